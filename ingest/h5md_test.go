package ingest

import (
	"os"
	"path/filepath"
	"testing"
)

// TestH5BesideText: a folder holding a text geometry and an .h5 file
// (perhaps an earlier output) keeps the text file as its geometry,
// whatever the names' order; the .h5 file is reported as not used (P10).
// A folder holding only an .h5 file is a trajectory read by the H5MD
// reader.
func TestH5BesideText(t *testing.T) {
	dir := t.TempDir()
	for _, name := range []string{"a/a-out.h5", "a/traj.xyz", "b/run.h5"} {
		p := filepath.Join(dir, filepath.FromSlash(name))
		os.MkdirAll(filepath.Dir(p), 0o755)
		if err := os.WriteFile(p, []byte("1\n\nH 0 0 0\n"), 0o644); err != nil {
			t.Fatal(err)
		}
	}
	trajs, err := Discover(dir, nil)
	if err != nil {
		t.Fatal(err)
	}
	if len(trajs) != 2 {
		t.Fatalf("%d trajectories, want 2", len(trajs))
	}
	if g := trajs[0].geometry(); filepath.Base(g) != "traj.xyz" || len(trajs[0].unknown) != 1 {
		t.Errorf("a: geometry %q, unknown %v; want traj.xyz and a-out.h5 not used", g, trajs[0].unknown)
	}
	if in := trajs[1].Inputs; len(in) != 1 || in[0].Format != KindH5MD {
		t.Errorf("b: inputs %+v, want run.h5 read as H5MD", in)
	}
}
