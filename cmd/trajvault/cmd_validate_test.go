package main

import (
	"bytes"
	"context"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"trajvault/internal/demo"
	"trajvault/internal/h5"
)

func runCLI(args ...string) (int, string, string) {
	var out, errb bytes.Buffer
	code := run(context.Background(), args, &globals{stdout: &out, stderr: &errb})
	return code, out.String(), errb.String()
}

func demoFile(t *testing.T) string {
	t.Helper()
	p := filepath.Join(t.TempDir(), "run.h5")
	o := demo.DefaultOptions
	o.Steps = 50
	if err := demo.WriteH5(p, o); err != nil {
		t.Fatal(err)
	}
	return p
}

func TestValidateExitCodes(t *testing.T) {
	good := demoFile(t)
	dir := t.TempDir()
	raw, _ := os.ReadFile(good)
	write := func(name string, b []byte) string {
		p := filepath.Join(dir, name)
		os.WriteFile(p, b, 0o644)
		return p
	}
	bad := write("bad.h5", raw)
	f, err := h5.OpenRW(bad)
	if err != nil {
		t.Fatal(err)
	}
	f.DeleteAttr("/particles/all/position/value", "unit")
	f.Close()

	cases := []struct {
		name    string
		args    []string
		code    int
		stdout  string // substring
		stderr  string // substring; must be one line when set
		oneLine bool
	}{
		{"clean", []string{"validate", good}, 0, "ok, 0 errors, 0 warnings", "", false},
		{"findings", []string{"validate", bad}, 1, "error   V20", "", false},
		// V20 (every dimensional dataset carries a unit) is a trajvault
		// rule: under the h5md profile a missing unit is not an error.
		{"h5md profile", []string{"validate", "--profile", "h5md", bad}, 0, "ok, 0 errors, 0 warnings (layout 1.1, h5md profile)", "", false},
		{"trajvault profile", []string{"validate", "--profile", "trajvault,minimal", bad}, 1, "trajvault profile", "", false},
		{"two rule profiles", []string{"validate", "--profile", "h5md,trajvault", good}, 2, "", "two rule profiles", true},
		{"empty", []string{"validate", write("empty.h5", nil)}, 2, "", "file is empty", true},
		{"not hdf5", []string{"validate", write("x.xyz", []byte("1\n\nH 0 0 0\n"))}, 2, "", "not an HDF5 file", true},
		{"truncated", []string{"validate", write("cut.h5", raw[:len(raw)/2])}, 2, "", "truncated or damaged", true},
		{"missing", []string{"validate", filepath.Join(dir, "nope.h5")}, 2, "", "no such file", true},
		{"no args", []string{"validate"}, 2, "", "name at least one file", true},
		{"bad flag", []string{"validate", "--jsn", good}, 2, "", "unknown flag", true},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			code, out, errs := runCLI(c.args...)
			if code != c.code {
				t.Errorf("exit %d, want %d; stdout %q stderr %q", code, c.code, out, errs)
			}
			if !strings.Contains(out, c.stdout) {
				t.Errorf("stdout %q lacks %q", out, c.stdout)
			}
			if !strings.Contains(errs, c.stderr) {
				t.Errorf("stderr %q lacks %q", errs, c.stderr)
			}
			if c.oneLine && strings.Count(strings.TrimRight(errs, "\n"), "\n") > 1 {
				t.Errorf("stderr is not a short message: %q", errs)
			}
		})
	}
}

func TestValidateJSONMatchesSchema(t *testing.T) {
	good := demoFile(t)
	code, out, _ := runCLI("validate", "--json", good)
	if code != 0 {
		t.Fatalf("exit %d", code)
	}
	var res validateResult
	if env := readEnvelope(t, out, &res); env.Command != "validate" || !env.OK || len(res.Files) != 1 || res.Files[0].File != good {
		t.Errorf("envelope %+v, result %+v", env, res)
	}
}

func TestInspect(t *testing.T) {
	code, out, errs := runCLI("inspect", demoFile(t))
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errs)
	}
	for _, want := range []string{"3 atoms (H2O)", "51 frames", "0..2.5 fs, 0.05 fs per step", "2 electronic states", "/particles/all/\n", "  position ", "angstrom", "sh+z+f32", "sh shuffle"} {
		if !strings.Contains(out, want) {
			t.Errorf("inspect output lacks %q:\n%s", want, out)
		}
	}
	for i, line := range strings.Split(out, "\n") {
		if len(line) > 80 && !strings.HasPrefix(line, "file ") {
			t.Errorf("inspect line %d is %d columns wide (80 at most):\n%s", i+1, len(line), line)
		}
	}
	code, out, _ = runCLI("inspect", "--json", demoFile(t))
	var s struct{ Files []map[string]any }
	if readEnvelope(t, out, &s); code != 0 || len(s.Files) != 1 {
		t.Errorf("inspect --json: exit %d, %q", code, out)
	}
}

func TestDemoRefusesExistingDir(t *testing.T) {
	dir := t.TempDir()
	code, _, errs := runCLI("demo", dir)
	if code != 2 || !strings.Contains(errs, "already exists") {
		t.Errorf("exit %d, %q", code, errs)
	}
}

// TestValidateArguments: validate takes a folder of trajectory files as
// audit does (issue 15: "validate DIR refuses a folder that audit DIR
// accepts"), several arguments at once, and refuses a folder holding no
// .h5 files with what to do.
func TestValidateArguments(t *testing.T) {
	h5 := demoDir(t, 1, 2, 60)
	one := demoFile(t)
	code, out, errs := runCLI("validate", h5, one)
	want := []string{filepath.Join(h5, "traj-001.h5") + ": ok", filepath.Join(h5, "traj-002.h5") + ": ok", one + ": ok"}
	if code != 0 {
		t.Fatalf("exit %d\n%s%s", code, out, errs)
	}
	last := -1
	for _, w := range want {
		i := strings.Index(out, w)
		if i <= last {
			t.Errorf("report %q missing or out of order:\n%s", w, out)
		}
		last = i
	}
	empty := t.TempDir()
	os.WriteFile(filepath.Join(empty, "notes.txt"), []byte("x"), 0o644)
	code, _, errs = runCLI("validate", empty)
	if code != 2 || !strings.Contains(errs, "no .h5 files and not a BagIt bag") {
		t.Errorf("folder without .h5 files: exit %d, %q", code, errs)
	}
}

// TestTextFits80Columns (issue 15: scan lines of up to 321 columns,
// validate 177): scan and validate reports wrap at 80 columns, counts
// are in the right number ("1 trajectory", "1 problem").
func TestTextFits80Columns(t *testing.T) {
	problems := filepath.Join("..", "..", "testdata", "ensembles", "problems")
	code, out, _ := runCLI("scan", "--unit", "position=angstrom", problems)
	if code != 1 || !strings.Contains(out, "precision: ") {
		t.Fatalf("scan: exit %d\n%s", code, out)
	}
	checkWidth(t, out)
	for _, bad := range []string{"1 trajectories", "1 problems", "1 hop attempts", "1 records", "1 frames"} {
		if strings.Contains(out, bad) {
			t.Errorf("scan says %q", bad)
		}
	}
	code, out, _ = runCLI("scan", "--unit", "position=angstrom", filepath.Join(problems, "p1-truncated-frame"))
	if !strings.Contains(out, "1 trajectory, ") {
		t.Errorf("scan of one trajectory: exit %d\n%s", code, out)
	}
	// A finding of a bare file: the R1 note of a file not made by convert.
	dir := t.TempDir()
	os.Link(demoFile(t), filepath.Join(dir, "a.h5"))
	wd, _ := os.Getwd()
	os.Chdir(dir)
	defer os.Chdir(wd)
	code, out, _ = runCLI("validate", "a.h5")
	if code != 0 || !strings.Contains(out, "R1") {
		t.Fatalf("validate: exit %d\n%s", code, out)
	}
	checkWidth(t, out)
}
