package trajfile_test

import (
	"os/exec"
	"path/filepath"
	"slices"
	"strings"
	"testing"

	"trajvault/internal/testenv"
	"trajvault/internal/trajfile"
)

// TestGroups (issue 11): H5MD 1.1 allows any number of particle groups
// with any names, and makes species and mass optional. The file is
// fixed_strings.h5 of testdata/interop/h5py_corpus.py (Debian
// python3-h5py): groups protein (4 atoms) and solvent (6 atoms), 6
// frames, masses 12.011 u, no species; the expected values are the
// script's.
func TestGroups(t *testing.T) {
	dir := t.TempDir()
	if out, err := exec.Command(testenv.Python(), testenv.Repo("testdata", "interop", "h5py_corpus.py"), dir).CombinedOutput(); err != nil {
		t.Fatalf("h5py corpus (install python3-h5py; make test does): %v\n%s", err, out)
	}
	path := filepath.Join(dir, "fixed_strings.h5")
	groups, err := trajfile.Groups(path)
	if err != nil || !slices.Equal(groups, []string{"protein", "solvent"}) {
		t.Fatalf("Groups = %v, %v; want [protein solvent]", groups, err)
	}
	cases := []struct {
		name    string
		group   string
		atoms   int
		wantErr string
	}{
		{"default is the first in name order", "", 4, ""},
		{"named", "solvent", 6, ""},
		{"missing group names the groups there", "water", 0, "the file has: protein, solvent"},
		{"a path is not a name", "../particles/solvent", 0, "without slashes"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			r, err := trajfile.OpenReaderWith(path, trajfile.ReadOptions{Group: c.group})
			if c.wantErr != "" {
				if err == nil || !strings.Contains(err.Error(), c.wantErr) {
					t.Fatalf("error %v, want one containing %q", err, c.wantErr)
				}
				return
			}
			if err != nil {
				t.Fatal(err)
			}
			defer r.Close()
			if r.N != c.atoms || r.T != 6 {
				t.Errorf("N = %d, T = %d; want %d atoms, 6 frames", r.N, r.T, c.atoms)
			}
			if r.Species != nil || !strings.Contains(r.NoSpecies, "has no species") || r.Symbol(0) != "X" {
				t.Errorf("species %v (%q), symbol %q; want none, a reason, and X", r.Species, r.NoSpecies, r.Symbol(0))
			}
			// 12.011 u in electron masses: u / m_e = 1822.888486209
			// (CODATA 2018).
			if len(r.Masses) != c.atoms || r.NoMasses != "" || abs(r.Masses[0]/(12.011*1822.888486209)-1) > 1e-12 {
				t.Errorf("masses %v (%q), want %d of 12.011 u", r.Masses, r.NoMasses, c.atoms)
			}
		})
	}
	// No masses either: vlen_fixed_clock.h5 (5 atoms, 8 frames).
	r, err := trajfile.OpenReader(filepath.Join(dir, "vlen_fixed_clock.h5"))
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	if r.N != 5 || r.T != 8 || r.Masses != nil || !strings.Contains(r.NoMasses, "has no mass") {
		t.Errorf("N %d, T %d, masses %v (%q); want 5, 8, none with a reason", r.N, r.T, r.Masses, r.NoMasses)
	}
}

func abs(x float64) float64 {
	if x < 0 {
		return -x
	}
	return x
}
