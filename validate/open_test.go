package validate

import (
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"trajvault/internal/isolate"
	"trajvault/schema"
)

// TestOpenCodesDocumented: the reading-limit and worker codes are in the
// rules table of layout.md.
func TestOpenCodesDocumented(t *testing.T) {
	md := string(schema.LayoutMarkdown())
	for _, code := range OpenCodes {
		if !strings.Contains(md, "| "+code+" |") {
			t.Errorf("rule %s is not in the rules table of schema/layout.md", code)
		}
	}
}

// TestReadLimitsAreFindings (issue 12, items 1-2): a read over the budget
// is V42 and data kept outside the file is V43, never a generic "damaged
// file" (V33), and nothing outside is opened. The external-storage file
// is written by h5py (an independent writer; h5py documentation,
// "Datasets: external storage").
func TestReadLimitsAreFindings(t *testing.T) {
	t.Run("V42 read budget", func(t *testing.T) {
		rep, err := File(base(t), Options{MaxReadBytes: 1024})
		mustDo(t, err)
		if !rep.Has("V42") || rep.OK() {
			t.Fatalf("no V42 error: %v", rep.Findings)
		}
		for _, f := range rep.Findings {
			if f.Code == "V33" && strings.Contains(f.Message, "budget") {
				t.Errorf("budget reported as damage: %v", f)
			}
		}
	})
	t.Run("V43 external storage", func(t *testing.T) {
		dir := t.TempDir()
		secret := filepath.Join(dir, "secret.bin")
		mustDo(t, os.WriteFile(secret, make([]byte, 128), 0o600))
		path := filepath.Join(dir, "ext.h5")
		pyRun(t, `
import sys, h5py
with h5py.File(sys.argv[1], "w") as f:
    f.create_group("h5md")
    f.create_dataset("/observables/x", shape=(16,), dtype="f8", external=[(sys.argv[2], 0, 128)])
`, path, secret)
		mustDo(t, os.Chmod(secret, 0)) // opening it would now fail loudly, not quietly
		rep, err := File(path, Options{})
		mustDo(t, err)
		found := false
		for _, f := range rep.Findings {
			if f.Code == "V43" {
				found = true
				if !strings.Contains(f.Message, secret) {
					t.Errorf("V43 does not name the target: %v", f)
				}
			}
		}
		if !found {
			t.Fatalf("no V43: %v", rep.Findings)
		}
	})
}

// TestIsolated: each abnormal end of a worker is one error finding with
// its own code; a finished worker gives no report here.
func TestIsolated(t *testing.T) {
	for _, c := range []struct {
		res  isolate.Result
		code string
	}{
		{isolate.Result{Outcome: isolate.Signaled, Signal: 11}, "X1"},
		{isolate.Result{Outcome: isolate.Exited, ExitCode: 2, Stderr: []byte("fatal error: unexpected signal")}, "X1"},
		{isolate.Result{Outcome: isolate.OutputTooLarge}, "X1"},
		{isolate.Result{Outcome: isolate.TimedOut}, "X2"},
		{isolate.Result{Outcome: isolate.OutOfMemory}, "X3"},
	} {
		rep := Isolated("f.h5", "test", &c.res)
		if rep == nil || rep.Errors != 1 || rep.Findings[0].Code != c.code || rep.Findings[0].File != "f.h5" {
			t.Errorf("%v: %+v, want one %s error", c.res.Outcome, rep, c.code)
		}
	}
	if Isolated("f.h5", "test", &isolate.Result{Outcome: isolate.Done}) != nil {
		t.Error("a finished worker gave a report")
	}
}

// TestGroupCycles (found by FuzzValidateImage): a group under
// /observables that links to its ancestor is visited once; the walk used
// to recurse along ever longer paths until the time limit. The cycle is
// made with h5py (a hard link to a parent group).
func TestGroupCycles(t *testing.T) {
	path := base(t)
	pyRun(t, `
import sys, h5py
with h5py.File(sys.argv[1], "a") as f:
    f["observables/extra"] = f["observables"]
    f.create_group("observables/deep/er")
    f["observables/deep/er/up"] = f["observables/deep"]
`, path)
	done := make(chan *Report, 1)
	go func() {
		rep, err := File(path, Options{})
		mustDo(t, err)
		done <- rep
	}()
	select {
	case <-done:
	case <-time.After(20 * time.Second):
		t.Fatal("validation of a file with group cycles did not end in 20 s")
	}
}

// TestUnwrittenNotScanned (found by TestValidateMutants: one flipped bit
// turned a dimension of 2 into 1048578): a chunked dataset that declares
// vastly more than the file stores is V44 and is not scanned. Written by
// h5py: a chunked dataset of 2^40 rows, none of them written.
func TestUnwrittenNotScanned(t *testing.T) {
	path := base(t)
	pyRun(t, `
import sys, h5py
with h5py.File(sys.argv[1], "a") as f:
    d = f.create_dataset("observables/sparse/value", shape=(2**40,), dtype="f8", chunks=(1024,))
    d[:4] = 1.0
    d.attrs["unit"] = "hartree"
`, path)
	start := time.Now()
	rep, err := File(path, Options{})
	mustDo(t, err)
	if !rep.Has("V44") {
		t.Errorf("no V44: %v", rep.Findings)
	}
	if d := time.Since(start); d > 20*time.Second {
		t.Errorf("took %v", d)
	}
}
