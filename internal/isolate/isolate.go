// Package isolate runs work on untrusted input in a worker process with
// memory and time limits, so that a crash inside a C library (HDF5 on a
// damaged file), a runaway allocation or a hang costs one result, not the
// whole run (issue 12, item 3).
//
// The worker is the same program started again with other arguments (the
// caller picks a hidden sub-command); the parent passes the limits in the
// environment and the worker applies them to itself with Enter before it
// touches the input. The worker writes its result to stdout and exits 0;
// anything else is classified by Run: killed by a signal, killed at the
// time limit, out of memory, or exited otherwise.
package isolate

import (
	"bytes"
	"context"
	"errors"
	"fmt"
	"io"
	"os"
	"os/exec"
	"strconv"
	"strings"
	"syscall"
	"time"
)

// Limits of one worker. Zero fields mean no limit.
type Limits struct {
	// Memory caps the worker's address space (RLIMIT_AS, bytes). It bounds
	// virtual memory, which is above the resident size: the Go runtime and
	// thread stacks reserve address space they may never touch.
	Memory int64
	// Time is the wall-clock limit; at it the worker's process group is
	// killed (SIGKILL).
	Time time.Duration
	// MaxOutput caps what is kept of stdout (a result larger than this is
	// the outcome OutputTooLarge); 0 means DefaultMaxOutput. Stderr keeps
	// its last 64 KiB.
	MaxOutput int64
}

// DefaultMaxOutput bounds a worker's result held in memory.
const DefaultMaxOutput = 256 << 20

// Outcome of a worker.
type Outcome int

const (
	// Done: the worker exited with status 0.
	Done Outcome = iota
	// Exited: the worker exited with another status (its own error
	// report, or a fatal Go runtime error such as an unrecovered panic or
	// a C crash the runtime caught).
	Exited
	// Signaled: the worker was killed by a signal it did not handle.
	Signaled
	// TimedOut: the worker ran past Limits.Time and was killed.
	TimedOut
	// OutOfMemory: the worker reported that memory ran out under
	// Limits.Memory (the Go runtime or HDF5 failed to allocate).
	OutOfMemory
	// OutputTooLarge: the worker wrote more than Limits.MaxOutput.
	OutputTooLarge
)

func (o Outcome) String() string {
	switch o {
	case Done:
		return "done"
	case Exited:
		return "exited"
	case Signaled:
		return "killed by a signal"
	case TimedOut:
		return "timed out"
	case OutOfMemory:
		return "out of memory"
	case OutputTooLarge:
		return "output too large"
	}
	return "outcome(" + strconv.Itoa(int(o)) + ")"
}

// Result of one worker run.
type Result struct {
	Outcome  Outcome
	ExitCode int            // when Exited or OutOfMemory; -1 when killed
	Signal   syscall.Signal // when Signaled
	Stdout   []byte
	Stderr   []byte // the last 64 KiB
	Elapsed  time.Duration
	// TimeLimit and MemoryLimit are the limits the worker ran under.
	TimeLimit   time.Duration
	MemoryLimit int64
}

// Summary is one line about an abnormal end, for a finding's message: the
// outcome and the last informative line the worker wrote on stderr.
func (r *Result) Summary() string {
	var s string
	switch r.Outcome {
	case Signaled:
		s = fmt.Sprintf("killed by signal %d (%v)", int(r.Signal), r.Signal)
	case TimedOut:
		s = fmt.Sprintf("stopped at the time limit of %v", r.TimeLimit)
	case OutOfMemory:
		s = fmt.Sprintf("ran out of memory under its limit of %d MiB", r.MemoryLimit>>20)
	case Exited:
		s = fmt.Sprintf("exited with status %d", r.ExitCode)
	case OutputTooLarge:
		s = "wrote more than its output limit"
	default:
		s = "finished"
	}
	if l := LastLine(r.Stderr); l != "" {
		s += ": " + l
	}
	return s
}

// LastLine returns the most telling line of a worker's stderr: the Go
// runtime's "fatal error:"/"panic:" line when there is one (the goroutine
// dump after it says little to a user), else the last non-empty line, cut
// to 200 bytes.
func LastLine(stderr []byte) string {
	lines := strings.Split(string(stderr), "\n")
	pick := ""
	for _, l := range lines {
		l = strings.TrimSpace(l)
		if strings.HasPrefix(l, "fatal error:") || strings.HasPrefix(l, "panic:") || strings.HasPrefix(l, "SIGSEGV") || strings.HasPrefix(l, "signal ") {
			if pick == "" || !strings.HasPrefix(pick, "fatal error:") && !strings.HasPrefix(pick, "panic:") {
				pick = l
			}
		}
	}
	if pick == "" {
		for i := len(lines) - 1; i >= 0; i-- {
			if l := strings.TrimSpace(lines[i]); l != "" {
				pick = l
				break
			}
		}
	}
	if len(pick) > 200 {
		pick = pick[:200] + "..."
	}
	return pick
}

// Environment variables that carry the limits to the worker.
const (
	envMemory = "TRAJVAULT_ISOLATE_MEMORY"
	envWorker = "TRAJVAULT_ISOLATE_WORKER"
)

// Run starts exe with args as a worker under lim and waits for it. The
// error is non-nil only when the worker could not be started or its
// output could not be kept (a problem of the run, not of the input);
// every way the worker itself can end is a Result. Cancelling ctx kills
// the worker and returns ctx's error.
func Run(ctx context.Context, exe string, args []string, lim Limits) (*Result, error) {
	return RunIO(ctx, exe, args, lim, IO{})
}

// IO connects a worker's standard streams other than by Run's defaults.
type IO struct {
	// Stdin, when not nil, is copied to the worker's standard input (an
	// in-memory file image, say); nil gives it none.
	Stdin io.Reader
	// Stdout, when not nil, receives the worker's standard output as it
	// is written (a command's long text output), instead of
	// Result.Stdout; a worker that crashes may have written part of it.
	Stdout io.Writer
}

// RunIO is Run with the worker's standard input and output connected as
// io says.
func RunIO(ctx context.Context, exe string, args []string, lim Limits, io IO) (*Result, error) {
	max := lim.MaxOutput
	if max <= 0 {
		max = DefaultMaxOutput
	}
	cmd := exec.Command(exe, args...)
	cmd.Env = append(os.Environ(), envWorker+"=1")
	if lim.Memory > 0 {
		// glibc reserves 64 MiB of address space per malloc arena, up to
		// 8 per CPU (mallopt(3), M_ARENA_MAX): under RLIMIT_AS that
		// reservation, not use, would hit the limit. Two arenas suffice
		// for a worker that reads one file.
		cmd.Env = append(cmd.Env, envMemory+"="+strconv.FormatInt(lim.Memory, 10), "MALLOC_ARENA_MAX=2")
	}
	// Own process group, so a timeout kills anything the worker started;
	// Pdeathsig, so a worker never outlives a parent that was killed.
	cmd.SysProcAttr = &syscall.SysProcAttr{Setpgid: true, Pdeathsig: syscall.SIGKILL}
	stdout := &capped{max: max}
	stderr := &tail{max: 64 << 10}
	cmd.Stdout, cmd.Stderr = stdout, stderr
	if io.Stdout != nil {
		cmd.Stdout = io.Stdout
	}
	cmd.Stdin = io.Stdin
	start := time.Now()
	if err := cmd.Start(); err != nil {
		return nil, fmt.Errorf("start worker: %w", err)
	}
	done := make(chan error, 1)
	go func() { done <- cmd.Wait() }()
	var timer <-chan time.Time
	if lim.Time > 0 {
		t := time.NewTimer(lim.Time)
		defer t.Stop()
		timer = t.C
	}
	kill := func() { syscall.Kill(-cmd.Process.Pid, syscall.SIGKILL) }
	timedOut := false
	var werr error
	select {
	case werr = <-done:
	case <-timer:
		timedOut = true
		kill()
		werr = <-done
	case <-ctx.Done():
		kill()
		<-done
		return nil, ctx.Err()
	}
	res := &Result{Stdout: stdout.buf.Bytes(), Stderr: stderr.bytes(), Elapsed: time.Since(start), ExitCode: -1,
		TimeLimit: lim.Time, MemoryLimit: lim.Memory}
	var ee *exec.ExitError
	switch {
	case timedOut:
		res.Outcome = TimedOut
	case werr == nil:
		res.Outcome, res.ExitCode = Done, 0
	case errors.As(werr, &ee):
		ws, _ := ee.Sys().(syscall.WaitStatus)
		switch {
		case ws.Signaled():
			res.Outcome, res.Signal = Signaled, ws.Signal()
		default:
			res.Outcome, res.ExitCode = Exited, ws.ExitStatus()
			if outOfMemory(res.Stderr) {
				res.Outcome = OutOfMemory
			}
		}
	default:
		return nil, fmt.Errorf("wait for worker: %w", werr)
	}
	if stdout.over && res.Outcome == Done {
		res.Outcome, res.Stdout = OutputTooLarge, nil
	}
	return res, nil
}

// outOfMemory recognises the Go runtime's and libc's words for a failed
// allocation (from memory: "fatal error: runtime: out of memory", and
// strerror(ENOMEM) "cannot allocate memory").
func outOfMemory(stderr []byte) bool {
	s := strings.ToLower(string(stderr))
	return strings.Contains(s, "out of memory") || strings.Contains(s, "cannot allocate memory")
}

// IsWorker reports whether this process was started by Run.
func IsWorker() bool { return os.Getenv(envWorker) == "1" }

// Enter applies the limits Run passed to this worker. Call it first in
// the worker, before reading any input. Outside a worker it does nothing.
func Enter() error {
	if !IsWorker() {
		return nil
	}
	if v := os.Getenv(envMemory); v != "" {
		n, err := strconv.ParseInt(v, 10, 64)
		if err != nil || n <= 0 {
			return fmt.Errorf("isolate: bad %s=%q", envMemory, v)
		}
		lim := syscall.Rlimit{Cur: uint64(n), Max: uint64(n)}
		if err := syscall.Setrlimit(syscall.RLIMIT_AS, &lim); err != nil {
			return fmt.Errorf("isolate: set memory limit %d bytes: %w", n, err)
		}
	}
	return nil
}

// capped keeps at most max bytes and remembers that it was cut; the rest
// is read and dropped, so the worker never blocks on a full pipe.
type capped struct {
	buf  bytes.Buffer
	max  int64
	over bool
}

func (c *capped) Write(p []byte) (int, error) {
	if c.over || int64(c.buf.Len())+int64(len(p)) > c.max {
		c.over = true
		return len(p), nil
	}
	return c.buf.Write(p)
}

// tail keeps the last max bytes written.
type tail struct {
	b   []byte
	max int
}

func (t *tail) Write(p []byte) (int, error) {
	t.b = append(t.b, p...)
	if len(t.b) > 2*t.max {
		t.b = append(t.b[:0], t.b[len(t.b)-t.max:]...)
	}
	return len(p), nil
}

func (t *tail) bytes() []byte {
	if len(t.b) > t.max {
		return t.b[len(t.b)-t.max:]
	}
	return t.b
}
