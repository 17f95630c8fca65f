package main

import (
	"bytes"
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"os"
	"slices"
	"time"

	"github.com/spf13/cobra"
	"github.com/spf13/pflag"
	"golang.org/x/sync/errgroup"

	"trajvault/internal/finding"
	"trajvault/internal/isolate"
	"trajvault/validate"
)

// workerUnreadable is the worker's exit status for "this file cannot be
// read at all" (missing, empty, not HDF5): the parent reports it as an
// I/O error of the run (exit 2), as it did before workers. Go's runtime
// uses 2 for fatal errors, so the status must differ from it.
const workerUnreadable = 3

// workerFault, when set (by tests only), runs in the worker before a file
// is read, to plant a crash, a hang or a runaway allocation.
var workerFault func(path string)

// newWorkerCommand is the hidden sub-command that validate starts once per
// file (internal/isolate): it applies the limits it was given, checks one
// file or bundle and writes the report as JSON on stdout.
func newWorkerCommand(g *globals) *cobra.Command {
	var o validateOptions
	var bundle bool
	c := &cobra.Command{
		Use:    "worker-validate PATH",
		Hidden: true,
		Args:   cobra.ExactArgs(1),
		RunE: func(c *cobra.Command, args []string) error {
			if err := isolate.Enter(); err != nil {
				return &exitError{exitUsage, err}
			}
			path := args[0]
			if workerFault != nil {
				workerFault(path)
			}
			if err := o.parseProfile(); err != nil {
				return &exitError{exitUsage, err}
			}
			var rep *validate.Report
			var err error
			if bundle {
				bo := validate.BundleOptions{ToolVersion: toolVersion(), Profile: o.funder, FileProfile: o.rules}
				bo.Member = func(name string, img []byte, p string) []finding.Finding {
					return memberIsolated(c, o, name, img, p)
				}
				rep, err = validate.Bundle(path, bo)
			} else {
				rep, err = validate.File(path, validate.Options{ToolVersion: toolVersion(), Profile: o.rules, MaxReadBytes: o.maxRead})
			}
			if err != nil {
				return &exitError{workerUnreadable, fmt.Errorf("validate: %w", err)}
			}
			return json.NewEncoder(g.stdout).Encode(rep)
		},
	}
	c.Flags().BoolVar(&bundle, "bundle", false, "the path is a bundle")
	c.Flags().StringVar(&o.profile, "profile", "", "rule and funder profiles, as validate takes them")
	c.Flags().Int64Var(&o.maxRead, "max-read", 0, "read budget in bytes")
	c.Flags().Int64Var(&o.maxMemoryMiB, "max-memory", defaultWorkerMemoryMiB, "limits of the worker of each trajectory file in a bundle")
	c.Flags().DurationVar(&o.timeLimit, "time-limit", defaultWorkerTime, "")
	return c
}

// memberIsolated checks one trajectory file of a bundle (validate.Member)
// in a worker of its own, started by the bundle's worker: the file's
// bytes go to its standard input (or, for a file too large to hold, its
// path is given). A crash, hang or memory blow-up is a finding of that
// file (X1-X3, located by its name in the bag) and the bundle check goes
// on with the next file (issue 12).
func memberIsolated(c *cobra.Command, o validateOptions, name string, img []byte, path string) []finding.Finding {
	exe, err := os.Executable()
	if err != nil {
		return []finding.Finding{{Code: "B14", Severity: finding.Error, Location: finding.Location{Path: name},
			Message: "cannot start a worker to read it: " + err.Error()}}
	}
	args := []string{"worker-member", "--profile", o.profile, "--name", name}
	var in io.Reader
	if img != nil {
		in = bytes.NewReader(img)
	} else {
		args = append(args, "--path", path)
	}
	// Half the bundle's time, so that one hanging file is reported as
	// itself while the bundle's worker still has time for the others.
	lim := isolate.Limits{Memory: o.maxMemoryMiB << 20, Time: max(o.timeLimit/2, time.Second)}
	ctx := c.Context()
	if ctx == nil {
		ctx = context.Background()
	}
	res, err := isolate.RunIO(ctx, exe, args, lim, isolate.IO{Stdin: in})
	if err != nil {
		return []finding.Finding{{Code: "B14", Severity: finding.Error, Location: finding.Location{Path: name},
			Message: "cannot run a worker to read it: " + err.Error()}}
	}
	var out []finding.Finding
	if res.Outcome == isolate.Done {
		if err := json.Unmarshal(res.Stdout, &out); err == nil {
			return out
		}
		res.Outcome, res.ExitCode, res.Stderr = isolate.Exited, 0, []byte("no findings written")
	}
	f := validate.Isolated(name, toolVersion(), res).Findings[0]
	f.Location = finding.Location{Path: name}
	return []finding.Finding{f}
}

// newMemberCommand is the hidden sub-command that a bundle's worker starts
// once per trajectory file (memberIsolated): the file's bytes on standard
// input, or --path; its findings as JSON on stdout.
func newMemberCommand(g *globals) *cobra.Command {
	var o validateOptions
	var name, path string
	c := &cobra.Command{
		Use:    "worker-member --name NAME",
		Hidden: true,
		Args:   cobra.NoArgs,
		RunE: func(c *cobra.Command, args []string) error {
			if err := isolate.Enter(); err != nil {
				return &exitError{exitUsage, err}
			}
			if workerFault != nil {
				workerFault(name)
			}
			if err := o.parseProfile(); err != nil {
				return &exitError{exitUsage, err}
			}
			var img []byte
			if path == "" {
				var err error
				if img, err = io.ReadAll(os.Stdin); err != nil {
					return &exitError{workerUnreadable, err}
				}
			}
			return json.NewEncoder(g.stdout).Encode(validate.Member(name, img, path, o.rules))
		},
	}
	c.Flags().StringVar(&o.profile, "profile", "", "rule and funder profiles, as validate takes them")
	c.Flags().StringVar(&name, "name", "", "the file's path inside the bag")
	c.Flags().StringVar(&path, "path", "", "read the file from here instead of standard input")
	return c
}

// isolateOptions are the limits of the worker process in which a command
// reads one untrusted file (internal/isolate), as validate has them:
// audit, export and inspect take the same flags.
type isolateOptions struct {
	maxMemoryMiB int64
	timeLimit    time.Duration
}

func (o *isolateOptions) AddFlags(c *cobra.Command) {
	c.Flags().Int64Var(&o.maxMemoryMiB, "max-memory", defaultWorkerMemoryMiB, "address space of the process reading each file, in MiB (X3 when reached)")
	c.Flags().DurationVar(&o.timeLimit, "time-limit", defaultWorkerTime, "time allowed for reading each file, e.g. 90s or 1h (X2 when reached)")
}

func (o *isolateOptions) check(command string) error {
	switch {
	case o.maxMemoryMiB < minWorkerMemoryMiB:
		return &exitError{exitUsage, fmt.Errorf("%s: --max-memory %d: at least %d (MiB), e.g. --max-memory 8192", command, o.maxMemoryMiB, minWorkerMemoryMiB)}
	case o.timeLimit <= 0:
		return &exitError{exitUsage, fmt.Errorf("%s: --time-limit %v: must be positive, e.g. --time-limit 30m", command, o.timeLimit)}
	}
	return nil
}

func (o isolateOptions) limits() isolate.Limits {
	return isolate.Limits{Memory: o.maxMemoryMiB << 20, Time: o.timeLimit}
}

// errWorkerFailed: a worker crashed, hung or ran out of memory on a file;
// the command has printed the finding (exit 1).
var errWorkerFailed = fmt.Errorf("%w: a worker failed", errFindings)

// inWorker runs work (the whole command, reading the one file path) as
// this process's own job when it is a worker: limits applied first, and
// a usage or I/O error exits workerUnreadable, since Go's runtime takes
// status 2 for its fatal errors.
func inWorker(path string, work func() error) error {
	if err := isolate.Enter(); err != nil {
		return &exitError{workerUnreadable, err}
	}
	if workerFault != nil {
		workerFault(path)
	}
	err := work()
	switch {
	case err == nil || errors.Is(err, errFindings):
		return err
	case errors.Is(err, errReported):
		os.Exit(workerUnreadable) // a worker is a process of its own
	}
	var ee *exitError
	if errors.As(err, &ee) && ee.code != exitUsage {
		return err
	}
	return &exitError{workerUnreadable, err}
}

// workerArgs is the command line that runs c again on positional: its
// name, every flag given (slices one item a flag) but those in drop, the
// flags in extra, then the arguments after "--", so that none is taken
// for a flag.
func workerArgs(c *cobra.Command, positional, drop []string, extra ...string) []string {
	args := []string{c.Name()}
	c.Flags().Visit(func(f *pflag.Flag) {
		if slices.Contains(drop, f.Name) {
			return
		}
		if sv, ok := f.Value.(pflag.SliceValue); ok {
			for _, v := range sv.GetSlice() {
				args = append(args, "--"+f.Name+"="+v)
			}
			return
		}
		args = append(args, "--"+f.Name+"="+f.Value.String())
	})
	args = append(args, extra...)
	return append(append(args, "--"), positional...)
}

// isolated runs command c on one file, path, in a worker process under
// lim: the worker's output streams to stdout (nil: kept in the result)
// and its messages are passed on to msgs (nil: dropped). A worker that crashed, hung or ran out
// of memory gives the finding returned (X1-X3, validate.Isolated); the
// error is errFindings or errReported for the worker's own exit 1 or 2,
// or an error of the run itself (no worker could start, ctx cancelled).
func isolated(c *cobra.Command, lim isolate.Limits, path string, args []string, stdout, msgs io.Writer) (*isolate.Result, *finding.Finding, error) {
	exe, err := os.Executable()
	if err != nil {
		return nil, nil, fmt.Errorf("%s: cannot find this program to start workers: %w", c.Name(), err)
	}
	ctx := c.Context()
	if ctx == nil {
		ctx = context.Background()
	}
	res, err := isolate.RunIO(ctx, exe, args, lim, isolate.IO{Stdout: stdout})
	if err != nil {
		return nil, nil, fmt.Errorf("%s %s: %w", c.Name(), path, err)
	}
	if msgs == nil {
		msgs = io.Discard
	}
	switch {
	case res.Outcome == isolate.Done:
		msgs.Write(res.Stderr)
		return res, nil, nil
	case res.Outcome == isolate.Exited && res.ExitCode == exitFindings:
		msgs.Write(res.Stderr)
		return res, nil, errFindings
	case res.Outcome == isolate.Exited && res.ExitCode == workerUnreadable:
		msgs.Write(res.Stderr)
		return res, nil, errReported
	}
	f := validate.Isolated(path, toolVersion(), res).Findings[0]
	return res, &f, nil
}

// runIsolated runs the whole command (work, reading the one file path)
// in a worker when this process is not one already. A worker that
// crashed, hung or ran out of memory is reported as its finding (in the
// JSON envelope with --json) and exit 1.
func runIsolated(c *cobra.Command, g *globals, o isolateOptions, path string, positional []string, jsonOut bool, work func() error) error {
	if isolate.IsWorker() {
		return inWorker(path, work)
	}
	_, f, err := isolated(c, o.limits(), path, workerArgs(c, positional, nil), g.stdout, g.stderr)
	if err != nil || f == nil {
		return err
	}
	if jsonOut {
		if err := printEnvelope(g, c.Name(), []finding.Finding{*f}, nil); err != nil {
			return err
		}
	} else {
		fmt.Fprintf(g.stderr, "trajvault: %s: %s\n", c.Name(), f)
	}
	return errWorkerFailed
}

// runIsolatedEach runs command c once per file, each in a worker of its
// own, and goes on after a file that failed: its output streams to
// stdout (a blank line between files), or with asJSON the results are
// gathered into one envelope. A worker that crashed, hung or ran out
// of memory is reported on stderr as its finding (X1-X3) and makes the
// exit status 1; a file that could not be read, 2.
func runIsolatedEach(c *cobra.Command, g *globals, o isolateOptions, files []string, asJSON bool) error {
	findings, unread := false, false
	// With --json each worker prints an envelope for its file; the run
	// prints one envelope holding every file's result (result.files) and
	// every finding, the crashes of workers included.
	var docs []json.RawMessage
	var all []finding.Finding
	for i, f := range files {
		out := g.stdout
		if asJSON {
			out = nil
		} else if i > 0 {
			fmt.Fprintln(g.stdout)
		}
		res, fd, err := isolated(c, o.limits(), f, workerArgs(c, []string{f}, nil), out, g.stderr)
		switch {
		case errors.Is(err, errFindings):
			findings = true
		case errors.Is(err, errReported):
			unread = true
			continue
		case err != nil:
			return err
		}
		if fd != nil {
			findings = true
			if asJSON {
				all = append(all, *fd)
			} else {
				fmt.Fprintf(g.stderr, "trajvault: %s: %s\n", c.Name(), fd)
			}
			continue
		}
		if asJSON {
			var env struct {
				Findings []finding.Finding `json:"findings"`
				Result   struct {
					Files []json.RawMessage `json:"files"`
				} `json:"result"`
			}
			if err := json.Unmarshal(bytes.TrimSpace(res.Stdout), &env); err != nil {
				return fmt.Errorf("%s: %s: the worker's report is not JSON: %w", c.Name(), f, err)
			}
			docs = append(docs, env.Result.Files...)
			all = append(all, env.Findings...)
		}
	}
	if asJSON {
		if docs == nil {
			docs = []json.RawMessage{}
		}
		if err := printEnvelope(g, c.Name(), all, map[string]any{"files": docs}); err != nil {
			return err
		}
	}
	switch {
	case unread:
		return errReported
	case findings:
		return errFindings
	}
	return nil
}

// screenFiles runs command c on each file in a worker of its own, at
// most jobs at a time, before the command reads them all in this process
// (audit, whose ensemble checks need every file's series at once): a
// file whose worker crashed, hung or ran out of memory is returned with
// its finding (X1-X3) and must not be read here. The worker's output and
// exit status are not used: the work is done again here. drop and extra
// adjust the worker's flags (no report file, one job).
func screenFiles(c *cobra.Command, o isolateOptions, files []string, jobs int, drop, extra []string) (map[string]finding.Finding, error) {
	out := make([]*finding.Finding, len(files))
	var eg errgroup.Group
	eg.SetLimit(max(jobs, 1))
	for i, f := range files {
		eg.Go(func() error {
			_, fd, err := isolated(c, o.limits(), f, workerArgs(c, []string{f}, drop, extra...), nil, nil)
			if err != nil && !errors.Is(err, errFindings) && !errors.Is(err, errReported) {
				return err
			}
			out[i] = fd
			return nil
		})
	}
	if err := eg.Wait(); err != nil {
		return nil, err
	}
	bad := map[string]finding.Finding{}
	for i, fd := range out {
		if fd != nil {
			bad[files[i]] = *fd
		}
	}
	return bad, nil
}
