package main

import (
	"errors"
	"flag"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"

	"trajvault/internal/testenv"
)

// updateReadme rewrites the outputs shown in README.md from real runs:
//
//	go test ./cmd/trajvault -run TestReadmeExamples -update-readme
//
// (make readme). Without it the test fails when the README and the
// program disagree.
var updateReadme = flag.Bool("update-readme", false, "rewrite README.md example outputs from real runs")

// example is one "$ command" of a README console block and the output
// shown under it.
type example struct {
	command string   // as shown, continuation lines joined
	lines   []int    // README line indexes of the command (incl. continuations)
	want    []string // shown output
	first   int      // README line index of the first output line
}

// readmeExamples finds the console blocks of README.md: fenced blocks whose
// first line starts with "$ ". Each "$ " line is a command (a trailing
// backslash continues it); the lines up to the next command are its
// output.
func readmeExamples(lines []string) [][]*example {
	var blocks [][]*example
	for i := 0; i < len(lines); i++ {
		if strings.TrimSpace(lines[i]) != "```" || i+1 >= len(lines) || !strings.HasPrefix(lines[i+1], "$ ") {
			continue
		}
		var block []*example
		var cur *example
		for i++; i < len(lines) && strings.TrimSpace(lines[i]) != "```"; i++ {
			if strings.HasPrefix(lines[i], "$ ") {
				cur = &example{command: strings.TrimPrefix(lines[i], "$ "), lines: []int{i}}
				for strings.HasSuffix(cur.command, `\`) && i+1 < len(lines) {
					i++
					cur.command = strings.TrimSuffix(cur.command, `\`) + " " + strings.TrimSpace(lines[i])
					cur.lines = append(cur.lines, i)
				}
				cur.first = i + 1
				block = append(block, cur)
				continue
			}
			if cur != nil {
				cur.want = append(cur.want, lines[i])
			}
		}
		blocks = append(blocks, block)
	}
	return blocks
}

// matches compares shown output with real output. A line "..." in the
// shown output stands for any number of lines; a command marked
// "(excerpt)" in its comment shows a subsequence of the output.
func matches(want, got []string, excerpt bool) bool {
	if excerpt {
		j := 0
		for _, g := range got {
			if j < len(want) && want[j] == g {
				j++
			}
		}
		return j == len(want)
	}
	if len(want) == 0 {
		return len(got) == 0
	}
	if want[0] == "..." {
		for k := 0; k <= len(got); k++ {
			if matches(want[1:], got[k:], false) {
				return true
			}
		}
		return false
	}
	return len(got) > 0 && want[0] == got[0] && matches(want[1:], got[1:], false)
}

// regenerate keeps the shape of the shown output (head, "...", tail) and
// fills it from the real output.
func regenerate(want, got []string) []string {
	cut := -1
	for i, w := range want {
		if w == "..." {
			cut = i
		}
	}
	if cut < 0 || len(got) <= len(want) {
		return got
	}
	head, tail := cut, len(want)-cut-1
	out := append([]string{}, got[:head]...)
	out = append(out, "...")
	return append(out, got[len(got)-tail:]...)
}

// TestReadmeExamples runs every console example of README.md, in order, in
// a scratch folder that holds the repository's testdata and the demo logs
// that make demo writes, and compares what each prints (stdout and
// stderr) with what the README shows.
func TestReadmeExamples(t *testing.T) {
	if testing.Short() {
		t.Skip("runs the README's examples on the demo ensemble")
	}
	readme := repo("README.md")
	raw, err := os.ReadFile(readme)
	if err != nil {
		t.Fatal(err)
	}
	lines := strings.Split(string(raw), "\n")
	bin := filepath.Dir(buildBinary(t))
	work := t.TempDir()
	if err := os.Symlink(repo("testdata"), filepath.Join(work, "testdata")); err != nil {
		t.Fatal(err)
	}
	// python3 in the examples is the interpreter with h5py (Debian's).
	if err := os.Symlink(testenv.Python(), filepath.Join(bin, "python3")); err != nil {
		t.Fatal(err)
	}
	env := append(os.Environ(), "PATH="+bin+string(os.PathListSeparator)+os.Getenv("PATH"), "COLUMNS=80", "USER=demo")
	rc := 0
	sh := func(cmd string) (string, int) {
		c := exec.Command("bash", "-c", fmt.Sprintf("(exit %d); %s", rc, cmd))
		c.Dir, c.Env = work, env
		out, err := c.CombinedOutput()
		code := 0
		var ee *exec.ExitError
		if errors.As(err, &ee) {
			code = ee.ExitCode()
		} else if err != nil {
			t.Fatalf("%s: %v", cmd, err)
		}
		return string(out), code
	}
	if out, code := sh("trajvault demo --text --trajectories 8 --steps 10000 demo/logs"); code != 0 {
		t.Fatalf("demo: %s", out)
	}
	changed := false
	edits := map[int][]string{} // first output line -> new output
	for _, block := range readmeExamples(lines) {
		for _, ex := range block {
			out, code := sh(ex.command)
			rc = code
			got := strings.Split(strings.TrimRight(out, "\n"), "\n")
			if out == "" {
				got = nil
			}
			for i := range got {
				got[i] = strings.TrimRight(got[i], " ")
			}
			excerpt := strings.Contains(ex.command, "(excerpt)")
			if matches(ex.want, got, excerpt) {
				continue
			}
			if *updateReadme && !excerpt {
				edits[ex.first] = regenerate(ex.want, got)
				changed = true
				continue
			}
			t.Errorf("README.md:%d: $ %s\nshown:\n  %s\nprinted (exit %d):\n  %s", ex.lines[0]+1, ex.command,
				strings.Join(ex.want, "\n  "), code, strings.Join(got, "\n  "))
		}
	}
	if !changed {
		return
	}
	var out []string
	for i := 0; i < len(lines); i++ {
		if repl, ok := edits[i]; ok {
			delete(edits, i) // applied once, even where the old output was empty
			out = append(out, repl...)
			// Skip the old output: up to the next command or the fence.
			j := i
			for j < len(lines) && !strings.HasPrefix(lines[j], "$ ") && strings.TrimSpace(lines[j]) != "```" {
				j++
			}
			i = j - 1
			continue
		}
		out = append(out, lines[i])
	}
	if err := os.WriteFile(readme, []byte(strings.Join(out, "\n")), 0o644); err != nil {
		t.Fatal(err)
	}
	t.Logf("README.md: example outputs rewritten from real runs")
}

// buildBinary builds trajvault for tests that run it as a process (the
// version is fixed so that outputs do not depend on the checkout).
func buildBinary(t *testing.T) string {
	t.Helper()
	bin := filepath.Join(t.TempDir(), "trajvault")
	build := exec.Command("go", "build", "-ldflags", "-X main.version=0.0.0-readme", "-o", bin, ".")
	if out, err := build.CombinedOutput(); err != nil {
		t.Fatalf("build: %v\n%s", err, out)
	}
	return bin
}
