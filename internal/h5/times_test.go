package h5

import (
	"os/exec"
	"path/filepath"
	"strings"
	"testing"
)

// TestNoObjectTimes: files carry no object modification times, so the
// same writes give the same bytes whenever they run (a cluster shard and
// a local run alike). h5ls -v (Debian's hdf5-tools) prints a
// "Modified:" line for every object whose header records times (HDF5
// File Format Specification, "Object Modification Time" message and the
// times of version 2 object headers); none may appear, in any format.
func TestNoObjectTimes(t *testing.T) {
	if _, err := exec.LookPath("h5ls"); err != nil {
		t.Skip("h5ls not installed (Debian package hdf5-tools)")
	}
	for _, f := range []Format{FormatEarliest, Format18, Format110} {
		path := filepath.Join(t.TempDir(), "t.h5")
		buildFmt(t, path, CreateOptions{Format: f})
		out, err := exec.Command("h5ls", "-vr", path).CombinedOutput()
		if err != nil {
			t.Fatalf("format %d: h5ls: %v\n%s", f, err, out)
		}
		if !strings.Contains(string(out), "/a/b/x") {
			t.Fatalf("format %d: h5ls lists no /a/b/x:\n%s", f, out)
		}
		if n := strings.Count(string(out), "Modified:"); n > 0 {
			t.Errorf("format %d: %d objects record a modification time:\n%s", f, n, out)
		}
	}
}
