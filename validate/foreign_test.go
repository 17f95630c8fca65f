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
// H5MD reader of python3-mdanalysis needs, so they are not reported.
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
