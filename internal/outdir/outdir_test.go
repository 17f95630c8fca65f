package outdir

import (
	"os"
	"path/filepath"
	"testing"
)

// TestTempLeavesUserFoldersAlone: a user's own NAME.partial is neither
// reused nor touched; two temporary folders never collide.
func TestTempLeavesUserFoldersAlone(t *testing.T) {
	dir := t.TempDir()
	final := filepath.Join(dir, "out")
	mine := final + ".partial"
	os.MkdirAll(mine, 0o755)
	os.WriteFile(filepath.Join(mine, "keep.txt"), []byte("mine"), 0o644)
	a, err := Temp(final)
	if err != nil {
		t.Fatal(err)
	}
	b, err := Temp(final)
	if err != nil {
		t.Fatal(err)
	}
	if a == b || a == mine || filepath.Dir(a) != dir {
		t.Errorf("temporary folders %s and %s (user's %s)", a, b, mine)
	}
	if st, err := os.Stat(a); err != nil || st.Mode().Perm() != 0o755 {
		t.Errorf("mode %v, %v", st.Mode(), err)
	}
	if b, err := os.ReadFile(filepath.Join(mine, "keep.txt")); err != nil || string(b) != "mine" {
		t.Error("the user's folder was touched")
	}
}

// TestTempMakesParents: an output in a folder that does not exist yet
// (demo -o demo/logs) gets its parent made.
func TestTempMakesParents(t *testing.T) {
	final := filepath.Join(t.TempDir(), "a", "b", "out")
	d, err := Temp(final)
	if err != nil {
		t.Fatal(err)
	}
	if filepath.Dir(d) != filepath.Dir(final) {
		t.Errorf("made %s, want it beside %s", d, final)
	}
}

// TestCleanKeeps: Clean removes nothing of a live run (this process's
// own marked folder), nothing whose marker is not one (wrong first
// line), and Tidy drops the marker of an output renamed into place.
func TestCleanKeeps(t *testing.T) {
	dir := t.TempDir()
	live, err := Temp(filepath.Join(dir, "out"))
	if err != nil {
		t.Fatal(err)
	}
	fake := filepath.Join(dir, ".fake.partial-1")
	os.MkdirAll(fake, 0o755)
	os.WriteFile(fake+MarkerSuffix, []byte("pid 1\nstart 1\nboot x\nobject 1:2:0\n"), 0o644)
	if got := Clean(dir); len(got) != 0 {
		t.Errorf("Clean removed %v", got)
	}
	for _, p := range []string{live, live + MarkerSuffix, fake, fake + MarkerSuffix} {
		if _, err := os.Lstat(p); err != nil {
			t.Errorf("%s: %v", p, err)
		}
	}
	if err := os.Rename(live, filepath.Join(dir, "out")); err != nil {
		t.Fatal(err)
	}
	Tidy()
	if _, err := os.Lstat(live + MarkerSuffix); !os.IsNotExist(err) {
		t.Errorf("marker of a finished output kept: %v", err)
	}
}
