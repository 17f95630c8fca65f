package ingest

import (
	"errors"
	"os"
	"path/filepath"
	"strings"
	"syscall"
	"testing"
)

// secret is the content of a file outside the input folder: no error
// message may ever show it (issue 12: "the first line of /etc/hostname is
// echoed in an error").
const secret = "secret-line-7f3a outside the input"

// confineFixture builds, in a fresh folder, outside/secret.xyz and an
// input folder in/traj-1 holding a valid XYZ geometry; it returns the
// input folder and the trajectory folder.
func confineFixture(t *testing.T) (in, traj, outside string) {
	t.Helper()
	base := t.TempDir()
	outside = filepath.Join(base, "outside")
	in = filepath.Join(base, "in")
	traj = filepath.Join(in, "traj-1")
	for _, d := range []string{outside, traj} {
		if err := os.MkdirAll(d, 0o755); err != nil {
			t.Fatal(err)
		}
	}
	os.WriteFile(filepath.Join(outside, "secret.xyz"), []byte(secret+"\n"), 0o644)
	os.WriteFile(filepath.Join(outside, "secret.dat"), []byte(secret+"\n"), 0o644)
	os.WriteFile(filepath.Join(traj, "geom.xyz"), []byte("1\nstep=0 time=0\nH 0 0 0\n"), 0o644)
	return in, traj, outside
}

func writeRecipe(t *testing.T, dir, body string) string {
	t.Helper()
	p := filepath.Join(dir, "recipe.yaml")
	if err := os.WriteFile(p, []byte("recipe: 1\n"+body), 0o644); err != nil {
		t.Fatal(err)
	}
	return p
}

// TestRecipeConfined (issue 12, item 5): recipe names with "..", absolute
// names, symbolic links that lead out of the input folder and special
// files are refused before anything is opened; messages never carry the
// content of a file outside the input. Rule source: archive/tar's
// ErrInsecurePath (Go standard library) refuses the same names, common
// practice for unpackers.
func TestRecipeConfined(t *testing.T) {
	cases := []struct {
		name   string
		recipe string
		setup  func(t *testing.T, in, traj, outside string)
		// wantLoad: LoadRecipe itself refuses; else Discover does.
		wantLoad bool
		words    string
	}{
		{name: "dotdot geometry", recipe: "geometry:\n  file: ../../outside/secret.xyz\n", wantLoad: true, words: `".." element`},
		{name: "dotdot table", recipe: "tables:\n  - file: ../../../../outside/secret.dat\n", wantLoad: true, words: `".." element`},
		{name: "dotdot trajectories", recipe: "trajectories: \"../*\"\n", wantLoad: true, words: `".." element`},
		{name: "absolute geometry", recipe: "geometry:\n  file: OUTSIDE/secret.xyz\n", wantLoad: true, words: "absolute path"},
		{name: "absolute log", recipe: "logs:\n  - file: /etc/hostname\n    rules:\n      - match: '^(?P<step>\\d+)$'\n", wantLoad: true, words: "absolute path"},
		{name: "symlinked file out", recipe: "geometry:\n  file: link.xyz\n",
			setup: func(t *testing.T, in, traj, outside string) {
				os.Symlink(filepath.Join(outside, "secret.xyz"), filepath.Join(traj, "link.xyz"))
			}, words: "leads out of the input folder"},
		{name: "relative symlink out", recipe: "tables:\n  - file: t.dat\n",
			setup: func(t *testing.T, in, traj, outside string) {
				os.Symlink("../../outside/secret.dat", filepath.Join(traj, "t.dat"))
			}, words: "leads out of the input folder"},
		{name: "symlinked trajectory folder out", recipe: "trajectories: \"traj-*\"\ngeometry:\n  file: secret.xyz\n",
			setup: func(t *testing.T, in, traj, outside string) {
				os.Symlink(outside, filepath.Join(in, "traj-2"))
			}, words: "leads out of the input folder"},
		{name: "fifo", recipe: "tables:\n  - file: pipe.dat\n",
			setup: func(t *testing.T, in, traj, outside string) {
				if err := syscall.Mkfifo(filepath.Join(traj, "pipe.dat"), 0o644); err != nil {
					t.Skipf("mkfifo: %v", err)
				}
			}, words: "not a regular file (a FIFO)"},
		{name: "symlink to fifo inside", recipe: "tables:\n  - file: link.dat\n",
			setup: func(t *testing.T, in, traj, outside string) {
				if err := syscall.Mkfifo(filepath.Join(in, "pipe"), 0o644); err != nil {
					t.Skipf("mkfifo: %v", err)
				}
				os.Symlink("../pipe", filepath.Join(traj, "link.dat"))
			}, words: "not a regular file (a FIFO)"},
		{name: "device", recipe: "tables:\n  - file: zero.dat\n",
			setup: func(t *testing.T, in, traj, outside string) {
				os.Symlink("/dev/zero", filepath.Join(traj, "zero.dat"))
			}, words: "leads out of the input folder"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			in, traj, outside := confineFixture(t)
			if c.setup != nil {
				c.setup(t, in, traj, outside)
			}
			rp := writeRecipe(t, filepath.Dir(in), strings.ReplaceAll(c.recipe, "OUTSIDE", outside))
			rc, err := LoadRecipe(rp)
			if c.wantLoad {
				if err == nil {
					t.Fatal("LoadRecipe accepted the recipe")
				}
			} else {
				if err != nil {
					t.Fatalf("LoadRecipe: %v", err)
				}
				_, err = Discover(in, rc)
			}
			if err == nil {
				t.Fatal("no error")
			}
			if !strings.Contains(err.Error(), c.words) {
				t.Errorf("error %q lacks %q", err, c.words)
			}
			if strings.Contains(err.Error(), "secret-line") {
				t.Errorf("error echoes content from outside the input: %q", err)
			}
			if c.words != "" && !strings.Contains(c.words, "backslash") && !errors.Is(err, ErrOutsideInput) {
				t.Errorf("error %v is not ErrOutsideInput", err)
			}
		})
	}
}

// TestFolderWalkConfined: without a recipe the folder walk refuses the
// same links and special files (a data file linked from outside would be
// read, a FIFO would block the scan for good).
func TestFolderWalkConfined(t *testing.T) {
	in, traj, outside := confineFixture(t)
	os.Symlink(filepath.Join(outside, "secret.dat"), filepath.Join(traj, "energies.dat"))
	_, err := Discover(in, nil)
	if !errors.Is(err, ErrOutsideInput) || strings.Contains(err.Error(), "secret-line") {
		t.Fatalf("Discover: %v, want ErrOutsideInput without outside content", err)
	}
	// A link that stays inside is fine.
	in2, traj2, _ := confineFixture(t)
	os.WriteFile(filepath.Join(in2, "e.dat"), []byte("# step time[fs]\n0 0\n"), 0o644)
	os.Symlink("../e.dat", filepath.Join(traj2, "energies.dat"))
	trajs, err := Discover(in2, nil)
	if err != nil {
		t.Fatalf("link inside the input: %v", err)
	}
	if len(trajs) == 0 || len(trajs[0].Inputs) != 2 {
		t.Errorf("link inside the input: trajectories %+v, want one with 2 inputs", trajs)
	}
}
