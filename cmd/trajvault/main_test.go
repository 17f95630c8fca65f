package main

import (
	"io"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"syscall"
	"testing"
	"time"
)

// TestMain lets tests run this test binary as the trajvault command
// (TRAJVAULT_AS_MAIN=1), to test what only a separate process shows,
// such as being killed mid-run. The variable is also set for the tests
// themselves, so that the workers validate starts (os.Executable, i.e.
// this binary) run as trajvault too.
func TestMain(m *testing.M) {
	if os.Getenv("TRAJVAULT_AS_MAIN") == "1" {
		workerFault = plantedFault
		main()
		return
	}
	os.Setenv("TRAJVAULT_AS_MAIN", "1")
	os.Exit(m.Run())
}

// plantedFault makes a worker misbehave on files named in
// TRAJVAULT_TEST_FAULT ("kill:NAME,sleep:NAME,alloc:NAME,panic:NAME"), the
// ways a hostile file can end a reader: killed by a signal, hung, out of
// memory, a fatal runtime error.
func plantedFault(path string) {
	for _, f := range strings.Split(os.Getenv("TRAJVAULT_TEST_FAULT"), ",") {
		mode, name, _ := strings.Cut(f, ":")
		if name == "" || filepath.Base(path) != name {
			continue
		}
		switch mode {
		case "kill":
			// Go's handler turns a SIGSEGV sent by kill into a fatal
			// error (exit 2, the "panic" case); SIGKILL dies by a signal
			// as a C crash under the default handler does.
			syscall.Kill(os.Getpid(), syscall.SIGKILL)
			time.Sleep(time.Minute)
		case "sleep":
			time.Sleep(time.Hour)
		case "alloc":
			var keep [][]byte
			for i := 0; i < 1024; i++ {
				// Address space is what RLIMIT_AS counts: untouched
				// pages are enough to reach it.
				keep = append(keep, make([]byte, 64<<20))
			}
			_ = keep
		case "panic":
			var p *[1]int
			_ = p[0]
		}
	}
}

// TestDidYouMean: an unknown flag close to a real one is answered with
// the real one (issue 15: --units for --unit); a far one is not.
func TestDidYouMean(t *testing.T) {
	for _, c := range []struct {
		args []string
		want string
	}{
		{[]string{"scan", "--units", "position=angstrom", "x"}, "did you mean --unit?"},
		{[]string{"validate", "--profil", "h5md", "x.h5"}, "did you mean --profile?"},
		{[]string{"pack", "x", "--quite"}, "did you mean --quiet?"},
		{[]string{"export", "--zzzzzz", "x"}, ""},
	} {
		code, _, errs := runCLI(c.args...)
		if code != exitUsage {
			t.Errorf("%v: exit %d, want 2", c.args, code)
		}
		if c.want == "" && strings.Contains(errs, "did you mean") || c.want != "" && !strings.Contains(errs, c.want) {
			t.Errorf("%v: %q, want %q", c.args, errs, c.want)
		}
	}
}

// TestHelpFitsAndStandsAlone: every command's help fits in 80 columns
// (issue 15: flag lines of up to 176) and points at nothing a user of
// the binary does not have: no file of the source tree (issue 15:
// schema/layout.md, testdata/recipes/tarnol.yaml, a README section
// "Recipes" that did not exist).
func TestHelpFitsAndStandsAlone(t *testing.T) {
	root := newRootCommand(&globals{stdout: io.Discard, stderr: io.Discard})
	cmds := [][]string{{"--help"}}
	for _, c := range root.Commands() {
		if !c.Hidden {
			cmds = append(cmds, []string{c.Name(), "--help"})
		}
	}
	repoFile := regexp.MustCompile(`\b(schema|testdata|internal|cmd)/[\w./-]+|section Recipes|DEVELOPERS\.md`)
	for _, args := range cmds {
		code, out, _ := runCLI(args...)
		if code != 0 {
			t.Errorf("%v: exit %d", args, code)
		}
		for _, l := range strings.Split(out, "\n") {
			if len(l) > 80 {
				t.Errorf("%v: %d columns: %q", args, len(l), l)
			}
			if m := repoFile.FindString(l); m != "" {
				t.Errorf("%v: points at %q, a file of the source tree: %q", args, m, l)
			}
		}
	}
}
