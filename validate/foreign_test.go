package validate

import (
	"os/exec"
	"path/filepath"
	"testing"

	"trajvault/internal/testenv"
)

// TestForeignH5MD: a valid H5MD file written by h5py (Debian python3-h5py)
// with h5py's defaults - variable-length strings, fixed-mode step/time,
// float32, the LZF filter that only h5py ships - is checked under the
// h5md profile (it does not claim trajvault's layout) and validates with
// one warning: V28 for the filter. Variable-length strings are what the
// H5MD reader of the common analysis library (.ci/deps.sh) needs, so they are not reported.
func TestForeignH5MD(t *testing.T) {
	script := testenv.Repo("testdata", "interop", "h5py_write_h5md.py")
	path := filepath.Join(t.TempDir(), "foreign.h5")
	if out, err := exec.Command(testenv.Python(), script, path).CombinedOutput(); err != nil {
		t.Fatalf("h5py writer failed (install python3-h5py; make test does): %v\n%s", err, out)
	}
	rep, err := File(path, Options{})
	if err != nil {
		t.Fatal(err)
	}
	for _, f := range rep.Findings {
		t.Log(f)
	}
	if rep.Errors != 0 {
		t.Errorf("%d errors on a valid foreign file", rep.Errors)
	}
	if rep.Profile != string(ProfileH5MD) {
		t.Errorf("profile %q, want h5md for a file without trajvault's module", rep.Profile)
	}
	if !rep.Has("V28") || rep.Warnings != 1 {
		t.Errorf("want exactly one warning, V28; got %d warnings", rep.Warnings)
	}
}

// TestForeignCorpus: files of other writers, each valid under the H5MD
// 1.1 specification (nongnu.org/h5md/h5md.html, units module
// nongnu.org/h5md/modules/units.html), are checked under the h5md profile
// by default and give no errors. The h5py corpus (Debian python3-h5py;
// testdata/interop/h5py_corpus.py: fixed- and variable-length strings,
// explicit and fixed-mode clocks, two particle groups, a periodic box
// with edges, a time-dependent box, no species, H5MD 1.0 without units)
// gives no findings at all. The file written by the analysis library's
// H5MD writer (testdata/interop/mda_write.py) gives only what it really
// does differently: units spelled "Angstrom" (V38, with the canonical
// spelling) and unit attributes without the units module declared (V19).
// Under --profile trajvault the same files fail (no species: V34), so
// the profile is what makes them pass.
func TestForeignCorpus(t *testing.T) {
	dir := t.TempDir()
	py := func(script string, args ...string) {
		t.Helper()
		cmd := exec.Command(testenv.Python(), append([]string{testenv.Repo("testdata", "interop", script)}, args...)...)
		if out, err := cmd.CombinedOutput(); err != nil {
			t.Fatalf("%s failed (install the packages of .ci/deps.sh; make test does): %v\n%s", script, err, out)
		}
	}
	py("h5py_corpus.py", dir)
	py("mda_write.py", filepath.Join(dir, "library.h5"))
	cases := []struct {
		file     string
		warnings map[string]int // code -> count
	}{
		{"fixed_strings.h5", nil},
		{"vlen_fixed_clock.h5", nil},
		{"h5md_1_0.h5", nil},
		{"library.h5", map[string]int{"V38": 4, "V19": 1}},
	}
	for _, c := range cases {
		t.Run(c.file, func(t *testing.T) {
			path := filepath.Join(dir, c.file)
			rep, err := File(path, Options{})
			if err != nil {
				t.Fatal(err)
			}
			got := map[string]int{}
			for _, f := range rep.Findings {
				t.Log(f)
				got[f.Code]++
			}
			if rep.Profile != string(ProfileH5MD) {
				t.Errorf("profile %q, want h5md", rep.Profile)
			}
			if rep.Errors != 0 || rep.Notes != 0 {
				t.Errorf("%d errors, %d notes; want none", rep.Errors, rep.Notes)
			}
			if len(got) != len(c.warnings) {
				t.Errorf("findings %v, want %v", got, c.warnings)
			}
			for code, n := range c.warnings {
				if got[code] != n {
					t.Errorf("%s: %d findings, want %d", code, got[code], n)
				}
			}
			strict, err := File(path, Options{Profile: ProfileTrajvault})
			if err != nil {
				t.Fatal(err)
			}
			if strict.Profile != string(ProfileTrajvault) || !strict.Has("V34") {
				t.Errorf("--profile trajvault: profile %q, V34 %v; want trajvault and V34 (no species)", strict.Profile, strict.Has("V34"))
			}
		})
	}
}
