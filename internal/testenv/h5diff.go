package testenv

import (
	"os/exec"
	"path/filepath"
	"strings"
	"testing"
)

// H5DiffData compares two trajectory files with h5diff (Debian's
// hdf5-tools, an independent reader): every dataset and attribute must be
// equal except the provenance record (times and the command line
// differ). The test is skipped when h5diff is not installed.
func H5DiffData(t testing.TB, a, b string) {
	t.Helper()
	if _, err := exec.LookPath("h5diff"); err != nil {
		t.Skip("h5diff (Debian hdf5-tools) not installed")
	}
	out, err := exec.Command("h5diff", a, b).CombinedOutput()
	if err == nil {
		return
	}
	for _, l := range strings.Split(strings.TrimSpace(string(out)), "\n") {
		switch {
		case strings.HasPrefix(l, "attribute: <trajvault_provenance of </parameters>>"):
		case strings.HasSuffix(l, "differences found") || strings.HasSuffix(l, "difference found"):
		default:
			t.Errorf("%s vs %s: h5diff: %s", filepath.Base(a), filepath.Base(b), l)
		}
	}
}
