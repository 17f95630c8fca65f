package main

import (
	"fmt"
	"math/rand"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"trajvault/internal/finding"
)

// TestValidatePoisonInTheMiddle (issue 12, item 3: "validate good1 POISON
// good2 never reaches good2"): a file whose reader is killed by a signal,
// hangs, runs out of memory or panics is an error finding of its own (X1,
// X2, X3; exit 1) and both good files around it are reported ok.
func TestValidatePoisonInTheMiddle(t *testing.T) {
	good := demoFile(t)
	raw, _ := os.ReadFile(good)
	dir := t.TempDir()
	g1, g2 := filepath.Join(dir, "good1.h5"), filepath.Join(dir, "good2.h5")
	os.WriteFile(g1, raw, 0o644)
	os.WriteFile(g2, raw, 0o644)
	cases := []struct{ mode, code, words string }{
		{"kill", "X1", "killed by signal 9"},
		{"panic", "X1", "panic: runtime error"},
		{"sleep", "X2", "time limit of 8s"},
		{"alloc", "X3", "out of memory under its limit of 2048 MiB"},
	}
	for _, c := range cases {
		t.Run(c.mode, func(t *testing.T) {
			poison := filepath.Join(dir, "poison-"+c.mode+".h5")
			os.WriteFile(poison, raw, 0o644)
			t.Setenv("TRAJVAULT_TEST_FAULT", c.mode+":"+filepath.Base(poison))
			start := time.Now()
			code, out, errs := runCLI("validate", "--json", "--time-limit", "8s", "--max-memory", "2048", g1, poison, g2)
			if code != 1 {
				t.Fatalf("exit %d, want 1 (findings)\n%s%s", code, out, errs)
			}
			if d := time.Since(start); d > 60*time.Second {
				t.Errorf("took %v", d)
			}
			var res validateResult
			env := readEnvelope(t, out, &res)
			if len(res.Files) != 3 || env.OK {
				t.Fatalf("%d reports (ok %v), want 3:\n%s", len(res.Files), env.OK, out)
			}
			for i, rep := range res.Files {
				want := []string{g1, poison, g2}[i]
				if rep.File != want {
					t.Errorf("report %d is for %s, want %s", i, rep.File, want)
				}
				if i != 1 && rep.Errors != 0 {
					t.Errorf("%s: %+v", rep.File, rep)
				}
			}
			// The crashed file is a report like any other, with one finding.
			var mine []finding.Finding
			for _, f := range env.Findings {
				if f.File == poison {
					mine = append(mine, f)
				} else if f.Severity == finding.Error {
					t.Errorf("good file with an error: %v", f)
				}
			}
			if len(mine) != 1 || mine[0].Code != c.code || !strings.Contains(mine[0].Message, c.words) {
				t.Errorf("poison findings %+v, want one %s saying %q", mine, c.code, c.words)
			}
		})
	}
}

// TestValidateMutants: byte-flipped copies of a trajectory file, all in
// one run, each get a report or a one-line "cannot read" message; the run
// reaches the last file whatever the earlier ones did to their workers.
// Seeded, so a failure names a reproducible mutant.
func TestValidateMutants(t *testing.T) {
	n := 20
	if testing.Short() {
		n = 10
	}
	raw, _ := os.ReadFile(demoFile(t))
	dir := t.TempDir()
	rng := rand.New(rand.NewSource(12))
	var files []string
	for i := 0; i < n; i++ {
		b := append([]byte(nil), raw...)
		for k := 0; k < 1+rng.Intn(8); k++ {
			b[rng.Intn(len(b))] ^= byte(1 << rng.Intn(8))
		}
		p := filepath.Join(dir, fmt.Sprintf("m%03d.h5", i))
		os.WriteFile(p, b, 0o644)
		files = append(files, p)
	}
	start := time.Now()
	code, out, errs := runCLI(append([]string{"validate", "--json", "--time-limit", "5s"}, files...)...)
	if code < 0 || code > 2 {
		t.Fatalf("exit %d", code)
	}
	reported := map[string]bool{}
	codes := map[string]int{}
	var res validateResult
	env := readEnvelope(t, out, &res)
	for _, r := range res.Files {
		reported[r.File] = true
	}
	for _, r := range res.Unreadable {
		reported[r.File] = true
	}
	for _, f := range env.Findings {
		if f.Code[0] == 'X' {
			codes[f.Code]++
			t.Logf("%s: %s", f.Code, f.Message)
			if keep := os.Getenv("TRAJVAULT_KEEP_MUTANTS"); keep != "" {
				b, _ := os.ReadFile(f.File)
				os.WriteFile(filepath.Join(keep, filepath.Base(f.File)), b, 0o644)
			}
		}
	}
	if (code == 2) != (len(res.Unreadable) > 0) {
		t.Errorf("exit %d with %d unreadable files\n%s", code, len(res.Unreadable), errs)
	}
	for _, f := range files {
		if !reported[f] {
			t.Errorf("%s: neither a report nor a message", f)
		}
	}
	t.Logf("%d mutants in %v: exit %d, worker findings %v", n, time.Since(start).Round(time.Millisecond), code, codes)
}
