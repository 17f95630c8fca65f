package validate

import (
	"os/exec"
	"path/filepath"
	"testing"

	"trajvault/internal/testenv"
)

// TestForeignH5MD: a valid H5MD file written by h5py (Debian python3-h5py)
// with h5py's defaults - variable-length strings, fixed-mode step/time,
// float32, the LZF filter that only h5py ships - validates with warnings
// only: V4 for the strings and V28 for the filter.
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
	for _, code := range []string{"V4", "V28"} {
		if !rep.Has(code) {
			t.Errorf("want warning %s", code)
		}
	}
}
