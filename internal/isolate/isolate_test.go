package isolate

import (
	"context"
	"fmt"
	"io"
	"os"
	"strings"
	"syscall"
	"testing"
	"time"
)

// TestMain turns this test binary into a worker when ISOLATE_TEST_MODE is
// set, so that the tests run real processes that crash, hang or allocate.
func TestMain(m *testing.M) {
	mode := os.Getenv("ISOLATE_TEST_MODE")
	if mode == "" {
		os.Exit(m.Run())
	}
	if err := Enter(); err != nil {
		fmt.Fprintln(os.Stderr, err)
		os.Exit(4)
	}
	switch mode {
	case "ok":
		fmt.Print("result")
	case "fail":
		fmt.Fprintln(os.Stderr, "worker: cannot read input")
		os.Exit(3)
	case "kill":
		// Death by a signal, as a C crash with the default handler or the
		// kernel's out-of-memory killer would end it.
		syscall.Kill(os.Getpid(), syscall.SIGKILL)
		time.Sleep(time.Minute)
	case "panic":
		var p *[1]int
		fmt.Println(p[0]) // nil dereference: a Go fatal panic, exit 2
	case "sleep":
		time.Sleep(time.Hour)
	case "alloc":
		// 16 GiB in 64 MiB pieces that are touched, far past the limit.
		var keep [][]byte
		for i := 0; i < 256; i++ {
			b := make([]byte, 64<<20)
			for j := 0; j < len(b); j += 4096 {
				b[j] = 1
			}
			keep = append(keep, b)
		}
		fmt.Print(len(keep))
	case "echo":
		io.Copy(os.Stdout, os.Stdin)
	case "flood":
		for i := 0; i < 1<<12; i++ {
			os.Stdout.Write(make([]byte, 1<<10))
		}
	}
	os.Exit(0)
}

func runMode(t *testing.T, mode string, lim Limits) *Result {
	t.Helper()
	t.Setenv("ISOLATE_TEST_MODE", mode)
	r, err := Run(context.Background(), os.Args[0], []string{"-test.run=^$"}, lim)
	if err != nil {
		t.Fatal(err)
	}
	return r
}

// TestOutcomes: every way a worker can end is told apart, and none of
// them harms the parent.
func TestOutcomes(t *testing.T) {
	lim := Limits{Memory: 1 << 30, Time: 3 * time.Second}
	cases := []struct {
		mode string
		want Outcome
		code int
		line string // in Summary
	}{
		{"ok", Done, 0, ""},
		{"fail", Exited, 3, "cannot read input"},
		{"kill", Signaled, -1, "signal 9"},
		{"panic", Exited, 2, "panic: runtime error"},
		{"sleep", TimedOut, -1, "time limit of 3s"},
		{"alloc", OutOfMemory, 2, "out of memory"},
	}
	for _, c := range cases {
		t.Run(c.mode, func(t *testing.T) {
			r := runMode(t, c.mode, lim)
			if r.Outcome != c.want || r.ExitCode != c.code {
				t.Fatalf("outcome %v exit %d, want %v exit %d; stderr %q", r.Outcome, r.ExitCode, c.want, c.code, LastLine(r.Stderr))
			}
			if !strings.Contains(r.Summary(), c.line) {
				t.Errorf("summary %q lacks %q", r.Summary(), c.line)
			}
			if c.mode == "ok" && string(r.Stdout) != "result" {
				t.Errorf("stdout %q", r.Stdout)
			}
			if c.mode == "sleep" && r.Elapsed > 6*time.Second {
				t.Errorf("timeout took %v", r.Elapsed)
			}
		})
	}
}

func TestOutputLimit(t *testing.T) {
	r := runMode(t, "flood", Limits{Time: 10 * time.Second, MaxOutput: 1 << 20})
	if r.Outcome != OutputTooLarge || r.Stdout != nil {
		t.Fatalf("outcome %v, %d bytes kept", r.Outcome, len(r.Stdout))
	}
}

func TestCancel(t *testing.T) {
	t.Setenv("ISOLATE_TEST_MODE", "sleep")
	ctx, cancel := context.WithTimeout(context.Background(), 300*time.Millisecond)
	defer cancel()
	start := time.Now()
	if _, err := Run(ctx, os.Args[0], nil, Limits{}); err != context.DeadlineExceeded {
		t.Fatalf("err %v", err)
	}
	if d := time.Since(start); d > 3*time.Second {
		t.Errorf("cancel took %v", d)
	}
}

func TestEnterOutsideWorker(t *testing.T) {
	if IsWorker() {
		t.Skip("running as a worker")
	}
	var before syscall.Rlimit
	syscall.Getrlimit(syscall.RLIMIT_AS, &before)
	if err := Enter(); err != nil {
		t.Fatal(err)
	}
	var after syscall.Rlimit
	syscall.Getrlimit(syscall.RLIMIT_AS, &after)
	if before != after {
		t.Errorf("Enter changed the limit of a non-worker: %v -> %v", before, after)
	}
}

// TestRunIO: the input given is what the worker reads, and its output
// streams to the writer given, past MaxOutput (which bounds only what
// Run keeps in memory).
func TestRunIO(t *testing.T) {
	t.Setenv("ISOLATE_TEST_MODE", "echo")
	in := strings.Repeat("0123456789abcdef", 1<<16) // 1 MiB
	var out strings.Builder
	r, err := RunIO(context.Background(), os.Args[0], []string{"-test.run=^$"}, Limits{Time: 10 * time.Second, MaxOutput: 1024},
		IO{Stdin: strings.NewReader(in), Stdout: &out})
	if err != nil {
		t.Fatal(err)
	}
	if r.Outcome != Done || out.String() != in || len(r.Stdout) != 0 {
		t.Fatalf("outcome %v, %d bytes out (want %d), %d kept", r.Outcome, out.Len(), len(in), len(r.Stdout))
	}
}
