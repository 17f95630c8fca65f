package pack

import (
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// ORCID check digits: the example iD 0000-0002-1825-0097 from ORCID's
// documentation of the ISO 7064 MOD 11-2 check (from memory), and one
// with the final X.
func TestValidORCID(t *testing.T) {
	for id, want := range map[string]bool{
		"0000-0002-1825-0097": true, "0000-0002-1825-0098": false, "0000-0002-1694-233X": true, "0000-0002-1825": false,
	} {
		if got := ValidORCID(id); got != want {
			t.Errorf("ValidORCID(%s) = %v, want %v", id, got, want)
		}
	}
}

func TestLoadDepositNamesFields(t *testing.T) {
	p := filepath.Join(t.TempDir(), "deposit.yaml")
	os.WriteFile(p, []byte("deposit: 1\ntitle: x\nlicense: CC-BY-4.0\ncreators: [{name: A, orcid: 0000-0002-1825-0098}]\nsimulation: {method: m, program: {name: p, version: '1'}}\n"), 0o644)
	_, err := LoadDeposit(p)
	de, ok := err.(*DepositError)
	if !ok {
		t.Fatalf("err = %v", err)
	}
	text := de.Error()
	for _, want := range []string{"description", "/title", "/creators/0/orcid"} {
		if !strings.Contains(text, want) {
			t.Errorf("problems lack %q:\n%s", want, text)
		}
	}
	codes := map[string]string{}
	for _, f := range de.Findings {
		codes[f.Path] = f.Code
	}
	if codes["/creators/0/orcid"] != DORCID || codes["/title"] != DSchema {
		t.Errorf("codes by field: %v", codes)
	}
}
