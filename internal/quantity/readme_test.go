package quantity

import (
	"flag"
	"os"
	"strings"
	"testing"

	"trajvault/internal/testenv"
)

var updateReadme = flag.Bool("update-readme", false, "rewrite the vocabulary table in README.md")

// TestReadmeVocabulary: the column-name table users read in README.md is
// the table the readers use (make readme rewrites it).
func TestReadmeVocabulary(t *testing.T) {
	const begin, end = "<!-- vocabulary: begin -->\n", "<!-- vocabulary: end -->"
	path := testenv.Repo("README.md")
	raw, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	s := string(raw)
	i, j := strings.Index(s, begin), strings.Index(s, end)
	if i < 0 || j < i {
		t.Fatalf("README.md has no %q ... %q markers", strings.TrimSpace(begin), end)
	}
	want := Markdown()
	if got := s[i+len(begin) : j]; got == want {
		return
	} else if !*updateReadme {
		t.Fatalf("README.md vocabulary table differs from quantity.Markdown(); run make readme\nREADME:\n%s\ntable:\n%s", got, want)
	}
	s = s[:i+len(begin)] + want + s[j:]
	if err := os.WriteFile(path, []byte(s), 0o644); err != nil {
		t.Fatal(err)
	}
}
