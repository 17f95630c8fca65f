package main

import (
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"syscall"
	"testing"
	"time"

	"trajvault/internal/outdir"
)

// killWhen starts this test binary as trajvault with args, waits until
// pattern matches a path, then kills it with SIGKILL (as the kernel's
// out-of-memory killer or a batch scheduler would) and returns what
// pattern matches then. It skips the test when the run ends first.
func killWhen(t *testing.T, pattern string, args ...string) []string {
	t.Helper()
	cmd := exec.Command(os.Args[0], args...)
	cmd.Env = append(os.Environ(), "TRAJVAULT_AS_MAIN=1")
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	deadline := time.Now().Add(60 * time.Second)
	for time.Now().Before(deadline) {
		if m, _ := filepath.Glob(pattern); len(m) > 0 {
			break
		}
		time.Sleep(2 * time.Millisecond)
	}
	time.Sleep(50 * time.Millisecond)
	cmd.Process.Signal(syscall.SIGKILL)
	if err := cmd.Wait(); err == nil {
		t.Skip("the run finished before it could be killed; nothing to test")
	}
	m, _ := filepath.Glob(pattern)
	return m
}

// TestKilledLeftoversCleaned (issue 12, item 6: "a single-file convert
// killed by SIGKILL leaves .out.h5.partial-PID that no later run
// removes"): the temporary output of a killed convert, a file or a
// folder, carries a marker; the next run into that folder removes it.
// Nothing without a valid marker of a dead run is removed: the user's own
// out.h5.partial, a hidden look-alike without a marker, and one whose
// marker names another object all survive.
func TestKilledLeftoversCleaned(t *testing.T) {
	dir := t.TempDir()
	logs := filepath.Join(dir, "logs")
	if code, _, errs := runCLI("demo", "--text", "--trajectories", "2", "--steps", "20000", logs); code != 0 {
		t.Fatalf("demo: %s", errs)
	}
	recipe := repo("testdata", "recipes", "tarnol.yaml")
	cases := []struct {
		name string
		out  string // the output, in its own folder
		args func(out string) []string
	}{
		{"file", "one.h5", func(out string) []string {
			return []string{"convert", "--recipe", recipe, filepath.Join(logs, "traj-001"), "-o", out}
		}},
		{"folder", "ens", func(out string) []string {
			return []string{"convert", "--recipe", recipe, "--jobs", "1", logs, "-o", out}
		}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			od := filepath.Join(dir, "out-"+c.name)
			os.MkdirAll(od, 0o755)
			out := filepath.Join(od, c.out)
			left := killWhen(t, filepath.Join(od, "."+c.out+".partial-*"+outdir.MarkerSuffix), c.args(out)...)
			if len(left) != 1 {
				t.Fatalf("markers after the kill: %v, want 1", left)
			}
			partial := strings.TrimSuffix(left[0], outdir.MarkerSuffix)
			if _, err := os.Lstat(partial); err != nil {
				t.Fatalf("the killed run left no temporary output: %v", err)
			}
			// What must survive: the user's own X.partial (file and
			// folder), a hidden look-alike without a marker, and one
			// whose marker records another object.
			keep := []string{out + ".partial", filepath.Join(od, "."+c.out+".partial-mine"), filepath.Join(od, "."+c.out+".partial-swapped")}
			for _, k := range keep {
				os.WriteFile(k, []byte("the user's"), 0o644)
			}
			os.MkdirAll(out+".partial.d", 0o755)
			keep = append(keep, out+".partial.d")
			swapped := keep[2]
			if err := outdir.Mark(swapped); err != nil {
				t.Fatal(err)
			}
			os.Remove(swapped)
			os.WriteFile(swapped, []byte("the user's, put there since"), 0o644) // a new inode
			// Forge the marker's owner as a dead process: copy a dead
			// run's marker fields (the killed run's pid and start).
			dead, _ := os.ReadFile(left[0])
			forged := strings.Split(string(dead), "\n")
			own, _ := os.ReadFile(swapped + outdir.MarkerSuffix)
			lines := strings.Split(string(own), "\n")
			lines[1], lines[2] = forged[1], forged[2] // pid, start of the dead run
			os.WriteFile(swapped+outdir.MarkerSuffix, []byte(strings.Join(lines, "\n")), 0o644)

			if code, o, errs := runCLI(c.args(out)...); code != 0 {
				t.Fatalf("rerun: exit %d\n%s%s", code, o, errs)
			}
			if _, err := os.Lstat(partial); !os.IsNotExist(err) {
				t.Errorf("the killed run's %s is still there", partial)
			}
			if m, _ := filepath.Glob(filepath.Join(od, "*"+outdir.MarkerSuffix)); len(m) > 0 {
				t.Errorf("markers left: %v", m)
			}
			m, _ := filepath.Glob(filepath.Join(od, ".*"))
			for _, k := range keep {
				if _, err := os.Lstat(k); err != nil {
					t.Errorf("%s was removed (%v); hidden entries now %v", k, err, m)
				}
			}
			if _, err := os.Stat(out); err != nil {
				t.Errorf("the rerun wrote no %s", out)
			}
		})
	}
}
