package main

import (
	"bytes"
	"io"
	"os/exec"
	"path/filepath"
	"regexp"
	"strings"
	"testing"

	"github.com/creack/pty"
)

// TestProgressOnTerminalOnly: pack run on a pseudo-terminal shows its
// progress bar on stderr; piped, or with --quiet, it shows none (issue 15).
func TestProgressOnTerminalOnly(t *testing.T) {
	bin := buildBinary(t)
	dir, deposit := packFixture(t, "2", "200")
	args := func(out string, extra ...string) []string {
		return append([]string{"pack", filepath.Join(dir, "logs"), "-o", filepath.Join(dir, out), "--deposit", deposit,
			"--recipe", repo("testdata", "recipes", "tarnol.yaml"), "--no-audit"}, extra...)
	}
	// On a terminal.
	c := exec.Command(bin, args("tty")...)
	f, err := pty.Start(c)
	if err != nil {
		t.Skipf("no pseudo-terminal here: %v", err)
	}
	var seen bytes.Buffer
	io.Copy(&seen, f) // until the process closes the terminal (EIO)
	f.Close()
	if err := c.Wait(); err != nil {
		t.Fatalf("pack on a terminal: %v\n%s", err, seen.String())
	}
	if !strings.Contains(seen.String(), "checksums") {
		t.Errorf("no progress bar on a terminal:\n%q", seen.String())
	}
	// Piped, and on a terminal with --quiet.
	var stderr bytes.Buffer
	c = exec.Command(bin, args("piped")...)
	c.Stderr = &stderr
	if err := c.Run(); err != nil {
		t.Fatalf("pack piped: %v\n%s", err, stderr.String())
	}
	if strings.Contains(stderr.String(), "checksums") {
		t.Errorf("progress bar printed into a pipe:\n%s", stderr.String())
	}
	c = exec.Command(bin, args("quiet", "--quiet")...)
	f, err = pty.Start(c)
	if err != nil {
		t.Fatal(err)
	}
	seen.Reset()
	io.Copy(&seen, f)
	f.Close()
	c.Wait()
	if strings.Contains(seen.String(), "checksums") {
		t.Errorf("progress bar despite --quiet:\n%q", seen.String())
	}
}

// TestValidateProgressOnTerminalOnly: validate of several files on a
// pseudo-terminal counts them in a progress bar on stderr; piped, or with
// --quiet, it shows none, and its report is the same (issue 15).
func TestValidateProgressOnTerminalOnly(t *testing.T) {
	bin := buildBinary(t)
	h5 := demoDir(t, 1, 3, 100)
	bar := regexp.MustCompile(`validate\s+\d+% \|`)
	onTTY := func(args ...string) string {
		c := exec.Command(bin, args...)
		f, err := pty.Start(c)
		if err != nil {
			t.Skipf("no pseudo-terminal here: %v", err)
		}
		var seen bytes.Buffer
		io.Copy(&seen, f) // until the process closes the terminal (EIO)
		f.Close()
		if err := c.Wait(); err != nil {
			t.Fatalf("validate on a terminal: %v\n%s", err, seen.String())
		}
		return seen.String()
	}
	if seen := onTTY("validate", h5); !bar.MatchString(seen) || !strings.Contains(seen, "traj-003.h5: ok") {
		t.Errorf("no progress bar (or no report) on a terminal:\n%q", seen)
	}
	if seen := onTTY("validate", "--quiet", h5); bar.MatchString(seen) {
		t.Errorf("progress bar despite --quiet:\n%q", seen)
	}
	var stdout, stderr bytes.Buffer
	c := exec.Command(bin, "validate", h5)
	c.Stdout, c.Stderr = &stdout, &stderr
	if err := c.Run(); err != nil {
		t.Fatalf("validate piped: %v\n%s", err, stderr.String())
	}
	if stderr.Len() != 0 || strings.Count(stdout.String(), ": ok,") != 3 {
		t.Errorf("piped: stderr %q, stdout\n%s", stderr.String(), stdout.String())
	}
}
