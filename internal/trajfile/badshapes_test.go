package trajfile_test

import (
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"testing"

	"trajvault/internal/demo"
	"trajvault/internal/testenv"
	"trajvault/internal/trajfile"
)

// TestReaderRefusesBadShapes (issue 12, "panics in audit and export on
// shapes validate lets through"): a valid file, one shape broken by h5py
// (testdata/badshapes.py), gives an error from OpenReader or from the
// read, never a panic, and nothing is allocated from an unchecked
// declared size. Every row expects an error: each shape contradicts the
// layout (schema/layout.md) or another element of the same file.
func TestReaderRefusesBadShapes(t *testing.T) {
	src := filepath.Join(t.TempDir(), "good.h5")
	o := demo.DefaultOptions
	o.Steps = 20
	if err := demo.WriteH5(src, o); err != nil {
		t.Fatal(err)
	}
	raw, _ := os.ReadFile(src)
	if err := readAll(src); err != nil {
		t.Fatalf("the unbroken file: %v", err)
	}
	cases := []string{
		"n_states_negative",      // n_states -5
		"n_states_huge",          // n_states 2^31-1
		"n_states_3_two_columns", // n_states 3, electronic data of 2 states
		"zero_frames",            // positions (0, N, 3)
		"one_frame",              // positions of 1 frame, observables of 21
		"total_energy_short",     // total_energy one row shorter than the clock
		"position_scalar",        // positions a scalar
		"species_rank5",          // species (N, 1, 1, 1, 1)
		"frames_2_40",            // 2^40 frames declared, fixed-mode clock
		"populations_rank3",      // populations (T, 2, 2)
	}
	for _, c := range cases {
		t.Run(c, func(t *testing.T) {
			p := filepath.Join(t.TempDir(), c+".h5")
			os.WriteFile(p, raw, 0o644)
			if out, err := exec.Command(testenv.Python(), filepath.Join("testdata", "badshapes.py"), p, c).CombinedOutput(); err != nil {
				t.Fatalf("h5py (install python3-h5py; make test does): %v\n%s", err, out)
			}
			err := readAll(p)
			if err == nil {
				t.Fatal("no error")
			}
			t.Logf("%v", err)
		})
	}
}

// readAll opens path and reads what audit and export read: every
// time-dependent element through Values and positions through Frames. A
// panic is returned as an error that says so, so that the test fails.
func readAll(path string) (err error) {
	defer func() {
		if p := recover(); p != nil {
			err = fmt.Errorf("PANIC: %v", p)
		}
	}()
	r, err := trajfile.OpenReader(path)
	if err != nil {
		return err
	}
	defer r.Close()
	for _, el := range []string{trajfile.TotalEnergy, trajfile.KineticEnergy, trajfile.PotentialEnergy,
		trajfile.Populations, trajfile.Amplitudes, trajfile.Couplings, trajfile.StateEnergies, trajfile.ActiveState} {
		if !r.Has(el) {
			continue
		}
		if _, _, err := r.Values(el, ""); err != nil {
			return err
		}
	}
	for start := 0; start < r.T; start += 8 {
		n := min(8, r.T-start)
		if _, err := r.Frames(r.Particle(trajfile.Position), "bohr", start, n); err != nil {
			return err
		}
	}
	if _, err := r.Hops(); err != nil {
		return err
	}
	return nil
}
