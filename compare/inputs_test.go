package compare

import (
	"context"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"trajvault/internal/bagit"
	"trajvault/schema"
)

// TestArchiveInputs: a bundle given as a .zip or a .tar.zst archive
// (BagIt, RFC 8493, written by internal/bagit as pack does) is read in
// place and compares as its folder does: a rerun of the same seeds is
// identical, pair by pair, and each file is named inside its archive.
// An archive without trajectories is refused with a message.
func TestArchiveInputs(t *testing.T) {
	a := t.TempDir()
	bag := filepath.Join(t.TempDir(), "bag")
	traj := filepath.Join(bag, filepath.FromSlash(schema.TrajectoriesDir))
	if err := os.MkdirAll(traj, 0o755); err != nil {
		t.Fatal(err)
	}
	for i, n := range []string{"traj-001", "traj-002", "traj-003"} {
		writeDemo(t, a, n, uint64(i+1))
		writeDemo(t, traj, n, uint64(i+1))
	}
	if err := bagit.Make(context.Background(), bag, []string{"sha256"}, nil, nil, 1, time.Unix(0, 0)); err != nil {
		t.Fatal(err)
	}
	out := t.TempDir()
	for _, x := range []struct {
		name  string
		write func(string, *os.File, time.Time) error
	}{
		{"bundle.zip", func(d string, f *os.File, m time.Time) error { return bagit.WriteZip(d, f, m) }},
		{"bundle.tar.zst", func(d string, f *os.File, m time.Time) error { return bagit.WriteTarZst(d, f, m) }},
	} {
		p := filepath.Join(out, x.name)
		f, err := os.Create(p)
		if err != nil {
			t.Fatal(err)
		}
		if err := x.write(bag, f, time.Unix(0, 0)); err != nil {
			t.Fatal(err)
		}
		f.Close()
		rep, err := Run(context.Background(), a, p, Options{Settings: DefaultSettings})
		if err != nil {
			t.Fatalf("%s: %v", x.name, err)
		}
		if rep.Verdict != AllIdentical || len(rep.Pairs) != 3 {
			t.Errorf("%s: %s with %d pairs, want identical with 3", x.name, rep.Verdict, len(rep.Pairs))
		}
		want := p + ":" + schema.TrajectoriesDir + "/traj-001.h5"
		if len(rep.FilesB) != 3 || rep.FilesB[0] != want {
			t.Errorf("%s: files %v, want the first named %s", x.name, rep.FilesB, want)
		}
	}

	// An archive with no trajectory files.
	empty := filepath.Join(t.TempDir(), "bag")
	os.MkdirAll(filepath.Join(empty, schema.PayloadDir), 0o755)
	os.WriteFile(filepath.Join(empty, schema.PayloadDir, "README.txt"), []byte("nothing\n"), 0o644)
	if err := bagit.Make(context.Background(), empty, []string{"sha256"}, nil, nil, 1, time.Unix(0, 0)); err != nil {
		t.Fatal(err)
	}
	p := filepath.Join(out, "empty.zip")
	f, _ := os.Create(p)
	if err := bagit.WriteZip(empty, f, time.Unix(0, 0)); err != nil {
		t.Fatal(err)
	}
	f.Close()
	if _, err := Run(context.Background(), a, p, Options{Settings: DefaultSettings}); err == nil || !strings.Contains(err.Error(), "no trajectories found") {
		t.Errorf("empty archive: %v", err)
	}
}
