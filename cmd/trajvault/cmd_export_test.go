package main

import (
	"bytes"
	"encoding/json"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// TestExportSelectionExitCodes: selections outside the data are usage
// errors (exit 2) on one line that says what the file holds.
func TestExportSelectionExitCodes(t *testing.T) {
	f := demoFile(t) // 51 frames, atoms O H H, 2 states
	out := func() string { return filepath.Join(t.TempDir(), "o") }
	cases := []struct {
		name   string
		args   []string
		code   int
		stderr string
	}{
		{"window", []string{"export", f, "-o", out(), "--frames", "10:20", "--format", "npy"}, 0, ""},
		{"restart", []string{"export", f, "-o", out(), "--frame", "50", "--format", "extxyz"}, 0, ""},
		{"frame beyond the end", []string{"export", f, "-o", out(), "--frame", "51", "--format", "extxyz"}, 2, "frame 51 is beyond the end; the file has 51 frames, 0..50"},
		{"frames beyond the end", []string{"export", f, "-o", out(), "--frames", "40:60"}, 2, "stop 60 is beyond the end"},
		{"unknown atom", []string{"export", f, "-o", out(), "--atoms", "3"}, 2, "atom 3 does not exist; the file has 3 atoms, 0..2 (O H H)"},
		{"unknown quantity", []string{"export", f, "-o", out(), "--quantities", "position,dipole"}, 2, `--quantities "dipole": unknown quantity`},
		{"unknown state", []string{"export", f, "-o", out(), "--states", "2", "--format", "json"}, 2, "state 2 does not exist; the file has 2 electronic states"},
		{"unknown format", []string{"export", f, "-o", out(), "--format", "pdb", "--frames", "1"}, 2, "unknown format; want csv, xyz, extxyz, json, npy"},
		{"hops in xyz", []string{"export", f, "-o", out(), "--quantities", "position,hops"}, 2, "hops are an event table"},
		{"frame and frames", []string{"export", f, "-o", out(), "--frame", "1", "--frames", "1:2"}, 2, "drop --frames/--time"},
		{"ase convention implies extxyz", []string{"export", f, "-o", out(), "--convention", "ase"}, 0, ""},
		{"ase convention is extxyz only", []string{"export", f, "-o", out(), "--convention", "ase", "--format", "csv"}, 2, "--convention ase writes extended XYZ; use --format extxyz (not csv)"},
		{"unknown convention", []string{"export", f, "-o", out(), "--convention", "si"}, 2, `--convention "si": want stored or ase`},
		{"values without --values", []string{"inspect", f, "--frames", "1"}, 2, "add --values"},
		{"values beyond the end", []string{"inspect", "--values", f, "--frames", "-52"}, 2, "counts back past frame 0"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			code, stdout, stderr := runCLI(c.args...)
			if code != c.code {
				t.Fatalf("exit %d, want %d; stdout %q stderr %q", code, c.code, stdout, stderr)
			}
			if !strings.Contains(stderr, c.stderr) {
				t.Errorf("stderr %q lacks %q", stderr, c.stderr)
			}
			if c.code != 0 && strings.Count(strings.TrimSpace(stderr), "\n") != 0 {
				t.Errorf("stderr is not one line: %q", stderr)
			}
		})
	}
}

// TestExportRestartFiles: --frame writes one extended XYZ frame and a
// selection.json naming it.
func TestExportRestartFiles(t *testing.T) {
	f := demoFile(t)
	dir := filepath.Join(t.TempDir(), "r")
	code, stdout, stderr := runCLI("export", f, "-o", dir, "--frame", "17", "--format", "extxyz")
	if code != 0 {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	if !strings.Contains(stdout, "r/traj.extxyz") || !strings.Contains(stdout, "r/selection.json") {
		t.Errorf("stdout %q", stdout)
	}
	b, _ := os.ReadFile(filepath.Join(dir, "traj.extxyz"))
	lines := strings.Split(strings.TrimSpace(string(b)), "\n")
	if len(lines) != 5 || lines[0] != "3" {
		t.Fatalf("want one frame of 3 atoms, got %q", b)
	}
	for _, key := range []string{"Properties=species:S:1:pos:R:3:velo:R:3:forces:R:3", " active_state=", ` amplitudes="`, " step=17 ", " frame=17"} {
		if !strings.Contains(lines[1], key) {
			t.Errorf("comment line lacks %q: %s", key, lines[1])
		}
	}
	var h struct {
		FrameCount int `json:"frame_count"`
		FirstFrame int `json:"first_frame"`
	}
	sb, _ := os.ReadFile(filepath.Join(dir, "selection.json"))
	if err := json.Unmarshal(sb, &h); err != nil || h.FrameCount != 1 || h.FirstFrame != 17 {
		t.Errorf("selection.json %s: %v", sb, err)
	}
}

// TestExportToOneFile: -o NAME.xyz writes that file, not a folder (issue
// 15), with the same text as the folder form; an existing file is never
// overwritten; a --format that contradicts the name is a usage error.
func TestExportToOneFile(t *testing.T) {
	f := demoFile(t)
	dir := t.TempDir()
	one := filepath.Join(dir, "run.xyz")
	if code, _, errs := runCLI("export", f, "-o", one); code != 0 {
		t.Fatalf("exit %d: %s", code, errs)
	}
	if code, _, errs := runCLI("export", f, "-o", filepath.Join(dir, "folder")); code != 0 {
		t.Fatalf("exit %d: %s", code, errs)
	}
	got, err := os.ReadFile(one)
	if err != nil {
		t.Fatal(err)
	}
	want, _ := os.ReadFile(filepath.Join(dir, "folder", "traj.xyz"))
	if len(want) == 0 || !bytes.Equal(got, want) {
		t.Errorf("run.xyz (%d bytes) differs from the folder export (%d bytes)", len(got), len(want))
	}
	if code, _, errs := runCLI("export", f, "-o", one); code != 2 || !strings.Contains(errs, "already exists") {
		t.Errorf("second export over run.xyz: exit %d %s", code, errs)
	}
	if code, _, _ := runCLI("export", f, "-o", filepath.Join(dir, "x.csv"), "--format", "xyz"); code != 2 {
		t.Errorf("contradicting --format: exit %d, want 2", code)
	}
	entries, _ := os.ReadDir(dir)
	for _, e := range entries {
		if strings.HasPrefix(e.Name(), ".trajvault-export-") {
			t.Errorf("temporary folder left behind: %s", e.Name())
		}
	}
}
