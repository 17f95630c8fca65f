package main

import (
	"os"
	"path/filepath"
	"strings"
	"testing"

	"gopkg.in/yaml.v3"
)

// TestInitQuotesAnyText: titles and names with YAML's special characters
// (": ", "#", quotes) come back from the written file unchanged (issue 15:
// the text template wrote broken YAML and exited 0).
func TestInitQuotesAnyText(t *testing.T) {
	p := filepath.Join(t.TempDir(), "deposit.yaml")
	title := `Photolysis: a "test" # not a comment`
	creator := `O'Neil, "Jo"`
	if code, out, errs := runCLI("init", p, "--title", title, "--creator", creator+"|0000-0002-1825-0097|Lab: one"); code != 0 {
		t.Fatalf("exit %d %s %s", code, out, errs)
	}
	raw, _ := os.ReadFile(p)
	var d struct {
		Title    string `yaml:"title"`
		Creators []struct {
			Name, Affiliation string
		} `yaml:"creators"`
	}
	if err := yaml.Unmarshal(raw, &d); err != nil {
		t.Fatalf("written YAML does not parse: %v\n%s", err, raw)
	}
	if d.Title != title || len(d.Creators) != 1 || d.Creators[0].Name != creator || d.Creators[0].Affiliation != "Lab: one" {
		t.Errorf("read back %+v", d)
	}
}

// TestInitRefusesPlaceholders: the untouched template fails --check with
// exit 1 naming every placeholder; so does a licence that is not on the
// SPDX License List (https://spdx.org/licenses/; "CC-BY-9.9" does not
// exist there). The help example "init --check deposit.yaml" works.
func TestInitRefusesPlaceholders(t *testing.T) {
	dir := t.TempDir()
	p := filepath.Join(dir, "deposit.yaml")
	if code, _, errs := runCLI("init", "-o", p); code != 0 {
		t.Fatalf("init: %s", errs)
	}
	code, out, _ := runCLI("init", "--check", p)
	if code != exitFindings {
		t.Fatalf("untouched template: exit %d, want 1\n%s", code, out)
	}
	for _, field := range []string{"/title", "/description", "/creators/0/name", "/contact/email", "/simulation/program/name", "/simulation/program/version"} {
		if !strings.Contains(out, field+": still the template's") {
			t.Errorf("placeholder %s not named:\n%s", field, out)
		}
	}
	full := filepath.Join(dir, "full.yaml")
	args := []string{"init", full, "--title", "A test set", "--description", "Ten trajectories of a test.", "--creator", "Doe, Jane",
		"--contact", "Jane Doe|jane@example.net", "--program", "md|2.1"}
	if code, _, errs := runCLI(args...); code != 0 {
		t.Fatalf("init: %s", errs)
	}
	if code, out, _ := runCLI("init", "--check", full); code != 0 {
		t.Fatalf("filled-in deposit: exit %d\n%s", code, out)
	}
	bad := filepath.Join(dir, "bad.yaml")
	if code, _, errs := runCLI(append(args[:1:1], append([]string{bad, "--license", "CC-BY-9.9"}, args[2:]...)...)...); code != 0 {
		t.Fatalf("init: %s", errs)
	}
	if code, out, _ := runCLI("init", "--check", bad); code != exitFindings || !strings.Contains(out, "SPDX License List") {
		t.Errorf("CC-BY-9.9: exit %d\n%s", code, out)
	}
}
