package main

import (
	"bytes"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// TestDemoRecipe: demo --text writes the recipe of its logs beside them
// and its hint is a command that works when pasted (issue 15: the help
// named testdata/recipes/tarnol.yaml, which a user of the binary does not
// have); the recipe is the one of the source tree.
func TestDemoRecipe(t *testing.T) {
	src, err := os.ReadFile(repo("testdata", "recipes", "tarnol.yaml"))
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(src, demoRecipe) {
		t.Error("cmd/trajvault/demo_recipe.yaml differs from testdata/recipes/tarnol.yaml; copy it over")
	}
	logs := filepath.Join(t.TempDir(), "logs")
	code, out, errs := runCLI("demo", "--text", "--trajectories", "1", "--steps", "30", logs)
	if code != 0 {
		t.Fatalf("demo: exit %d %s", code, errs)
	}
	_, hint, ok := strings.Cut(out, "read them with: trajvault ")
	if !ok || !strings.Contains(out, "wrote 1 invented demo trajectory (") {
		t.Fatalf("no hint, or wrong count:\n%s", out)
	}
	code, out, errs = runCLI(strings.Fields(hint)...)
	if code != 0 || !strings.Contains(out, "1 trajectory, 0 problems") {
		t.Errorf("pasted hint %q: exit %d\n%s%s", hint, code, out, errs)
	}
	// Counts of one are singular (issue 15: "1 trajectories").
	code, out, errs = runCLI("convert", "--recipe", filepath.Join(logs, demoRecipeName), logs, "-o", filepath.Join(t.TempDir(), "h5"))
	if code != 0 || !strings.Contains(out, "1 trajectory, 31 frames -> ") {
		t.Errorf("convert of one trajectory: exit %d\n%s%s", code, out, errs)
	}
}
