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
