package main

import (
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// TestValidateFixityOnly: --fixity-only checks a bundle's checksums (RFC
// 8493 sec. 3) and says what it left out (B20); a flipped payload byte is
// caught (B7, exit 1); it refuses a trajectory file and --digest alone
// (exit 2, usage).
func TestValidateFixityOnly(t *testing.T) {
	dir, deposit := packFixture(t, "1", "200")
	bag := filepath.Join(dir, "bag")
	if code, out, errs := runCLI("pack", filepath.Join(dir, "logs"), "-o", bag, "--deposit", deposit,
		"--recipe", repo("testdata", "recipes", "tarnol.yaml")); code != 0 {
		t.Fatalf("pack: exit %d\n%s%s", code, out, errs)
	}
	code, out, errs := runCLI("validate", "--fixity-only", "--digest", "sha256", bag)
	if code != 0 || !strings.Contains(out, "B20") || !strings.Contains(out, "manifest-sha512.txt") {
		t.Errorf("fixity, sha256 only: exit %d\n%s%s", code, out, errs)
	}
	// No trajectory file was read, so the header names no layout version.
	if !strings.Contains(out, "(checksums only)") || strings.Contains(out, "layout") {
		t.Errorf("fixity header claims a layout check:\n%s", out)
	}
	h5s, _ := filepath.Glob(filepath.Join(bag, "data", "trajectories", "*.h5"))
	if len(h5s) == 0 {
		t.Fatal("no trajectory file in the bundle")
	}
	b, _ := os.ReadFile(h5s[0])
	b[len(b)/2] ^= 0x40
	os.WriteFile(h5s[0], b, 0o644)
	code, out, _ = runCLI("validate", "--fixity-only", bag)
	if code != 1 || !strings.Contains(out, "B7") {
		t.Errorf("flipped byte: exit %d\n%s", code, out)
	}
	if code, _, errs := runCLI("validate", "--fixity-only", h5s[0]); code != 2 || !strings.Contains(errs, "checks bundles") {
		t.Errorf("fixity of a trajectory file: exit %d %s", code, errs)
	}
	if code, _, errs := runCLI("validate", "--digest", "sha256", bag); code != 2 || !strings.Contains(errs, "--fixity-only") {
		t.Errorf("--digest alone: exit %d %s", code, errs)
	}
}
