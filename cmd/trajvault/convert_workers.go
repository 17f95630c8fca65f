package main

import (
	"bufio"
	"bytes"
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"os"
	"os/exec"
	"path/filepath"
	"runtime"
	"strconv"
	"strings"
	"sync"

	"github.com/spf13/cobra"
	"github.com/spf13/pflag"

	"trajvault/ingest"
	"trajvault/internal/outdir"
	"trajvault/internal/progress"
)

// Ensemble conversion with --jobs above 1 runs in worker processes of this
// program, each with its own HDF5 library: the serial HDF5 library is
// guarded by one lock per process, which capped threads at about 1.2x on
// two cores. A worker scans and converts the trajectories the parent hands
// it, one at a time, and answers with one JSON line each; a worker that
// dies (killed, out of memory, a crash in a reader) fails the trajectory
// it held, the parent starts another, and the run ends with exit 1 and no
// output under the final name.

// convertJob is one line the parent writes to a worker.
type convertJob struct {
	Name string `json:"name"`
	Out  string `json:"out"`
	// ScanOnly asks for the scan alone: once one trajectory is refused,
	// nothing will be written, but every problem is still reported.
	ScanOnly bool `json:"scan_only,omitempty"`
}

// convertReply is one line a worker writes back.
type convertReply struct {
	Name    string `json:"name"`
	Refused bool   `json:"refused,omitempty"`
	// ScanText is scan's report of a refused trajectory, as printScan
	// prints it.
	ScanText string `json:"scan_text,omitempty"`
	// Report is the scan report (its public part): pack's data
	// description needs it, and the worker's scan is the only one.
	Report *ingest.TrajReport `json:"report,omitempty"`
	Result *ingest.Result     `json:"result,omitempty"`
	Error  string             `json:"error,omitempty"`
	// Usage marks an Error that is the user's to fix on the command line
	// (a given unit that contradicts a file's): exit 2, as in process.
	Usage bool `json:"usage,omitempty"`
}

// workerFlags are the conversion flags the user set on c (convert or
// pack), to start workers with the same settings: the flags convert
// knows, except those that concern the parent alone.
func workerFlags(c *cobra.Command) []string {
	var known convertOptions
	kc := &cobra.Command{}
	known.AddFlags(kc)
	drop := []string{"jobs", "json", "output", "shard", "gather"}
	c.Flags().VisitAll(func(f *pflag.Flag) {
		if kc.Flags().Lookup(f.Name) == nil {
			drop = append(drop, f.Name)
		}
	})
	args := workerArgs(c, nil, drop)
	return args[1 : len(args)-1] // without the command name and "--"
}

// convertWithWorkers converts trajs (found under root) into o.out with
// o.jobs worker processes; all or nothing, as convertEnsemble.
func convertWithWorkers(ctx context.Context, g *globals, o convertOptions, root string, trajs []*ingest.Trajectory) error {
	exe, err := os.Executable()
	if err != nil {
		return fmt.Errorf("convert: cannot find this program to start workers: %w", err)
	}
	tmp, err := outdir.Temp(o.out)
	if err != nil {
		return &exitError{exitUsage, err}
	}
	parent, _ := json.Marshal(append([]string{"trajvault"}, os.Args[1:]...))
	args := append([]string{"worker-convert", "--root", root, "--parent-args", string(parent)}, o.workerArgs...)
	bar := newBar(g, "convert", "trajectories")
	replies := runConvertWorkers(ctx, exe, args, tmp, trajs, o.jobs, bar)
	bar.Finish()
	if err := ctx.Err(); err != nil {
		os.RemoveAll(tmp)
		return err
	}
	var refused, failed []convertReply
	var results []*ingest.Result
	for _, r := range replies {
		switch {
		case r.Refused:
			refused = append(refused, r)
		case r.Error != "":
			failed = append(failed, r)
		case r.Result != nil:
			results = append(results, r.Result)
		}
	}
	if len(refused) > 0 || len(failed) > 0 {
		os.RemoveAll(tmp)
		for _, r := range refused {
			fmt.Fprint(g.stdout, r.ScanText)
		}
		for _, r := range failed {
			fmt.Fprintf(g.stderr, "trajvault: convert: %s: %s\n", r.Name, r.Error)
		}
		if len(refused) > 0 {
			fmt.Fprintf(g.stderr, "trajvault: convert: %d of %d trajectories have problems; nothing written\n", len(refused), len(trajs))
		}
		if len(failed) > 0 {
			fmt.Fprintf(g.stderr, "trajvault: convert: %d of %d trajectories could not be converted; nothing written\n", len(failed), len(trajs))
		}
		for _, r := range failed {
			if r.Usage {
				return &exitError{exitUsage, errors.New("convert: a given unit contradicts a file's (see above)")}
			}
		}
		return errFindings
	}
	if err := os.Rename(tmp, o.out); err != nil {
		os.RemoveAll(tmp)
		return &exitError{exitUsage, err}
	}
	return printEnsembleResults(g, o, results)
}

// runConvertWorkers hands every trajectory to one of jobs workers and
// returns one reply per trajectory, in the order of trajs. Workers are
// restarted when one dies; the trajectory it held fails with the reason.
func runConvertWorkers(ctx context.Context, exe string, args []string, dir string, trajs []*ingest.Trajectory, jobs int, done progress.Counter) []convertReply {
	done = progress.Or(done)
	done.SetTotal(int64(len(trajs)))
	replies := make([]convertReply, len(trajs))
	next := make(chan int)
	var mu sync.Mutex
	refusedAny := false
	var wg sync.WaitGroup
	for range max(1, min(jobs, len(trajs))) {
		wg.Add(1)
		go func() {
			defer wg.Done()
			var w *convertWorker
			defer func() {
				if w != nil {
					w.close()
				}
			}()
			for i := range next {
				mu.Lock()
				job := convertJob{Name: trajs[i].Name, Out: filepath.Join(dir, trajs[i].Name+".h5"), ScanOnly: refusedAny}
				mu.Unlock()
				if w == nil {
					var err error
					if w, err = startConvertWorker(ctx, exe, args, jobs); err != nil {
						replies[i] = convertReply{Name: job.Name, Error: err.Error()}
						done.Add(1)
						continue
					}
				}
				r, err := w.do(job)
				if err != nil {
					// The worker is gone: fail this trajectory, start a
					// fresh worker for the next.
					r = convertReply{Name: job.Name, Error: err.Error()}
					w.close()
					w = nil
				}
				if r.Refused {
					mu.Lock()
					refusedAny = true
					mu.Unlock()
				}
				replies[i] = r
				done.Add(1)
			}
		}()
	}
	for i := range trajs {
		if ctx.Err() != nil {
			break
		}
		next <- i
	}
	close(next)
	wg.Wait()
	return replies
}

// workerEnv is the environment of one of jobs worker processes: the
// workers share the cores (GOMAXPROCS = cores / jobs, at least 1) unless
// the user set GOMAXPROCS. Each worker overlaps parsing with HDF5 writing
// in C, which runs outside Go's processor count; with every worker free to
// use every core, the runtimes' threads contend (measured on 2 cores, 16
// trajectories at --jobs 2: 7.6 s wall and 14.7 CPU s, 6.6 s and 12.9 with
// one Go processor per worker).
func workerEnv(jobs int) []string {
	env := os.Environ()
	if _, set := os.LookupEnv("GOMAXPROCS"); set || jobs < 2 {
		return env
	}
	return append(env, "GOMAXPROCS="+strconv.Itoa(max(1, runtime.NumCPU()/jobs)))
}

// convertWorker is one running worker process.
type convertWorker struct {
	cmd    *exec.Cmd
	in     io.WriteCloser
	out    *bufio.Reader
	stderr *tailBuffer
}

func startConvertWorker(ctx context.Context, exe string, args []string, jobs int) (*convertWorker, error) {
	cmd := exec.CommandContext(ctx, exe, args...)
	cmd.Env = workerEnv(jobs)
	in, err := cmd.StdinPipe()
	if err != nil {
		return nil, err
	}
	out, err := cmd.StdoutPipe()
	if err != nil {
		return nil, err
	}
	tail := &tailBuffer{max: 4096}
	cmd.Stderr = tail
	if err := cmd.Start(); err != nil {
		return nil, fmt.Errorf("cannot start a worker process: %w", err)
	}
	return &convertWorker{cmd: cmd, in: in, out: bufio.NewReaderSize(out, 1<<16), stderr: tail}, nil
}

// do sends one job and reads its reply; an error means the worker ended.
func (w *convertWorker) do(job convertJob) (convertReply, error) {
	b, _ := json.Marshal(job)
	if _, err := w.in.Write(append(b, '\n')); err != nil {
		return convertReply{}, w.ended(job.Name)
	}
	line, err := w.out.ReadBytes('\n')
	if err != nil {
		return convertReply{}, w.ended(job.Name)
	}
	var r convertReply
	if err := json.Unmarshal(line, &r); err != nil || r.Name != job.Name {
		return convertReply{}, fmt.Errorf("worker process answered out of turn for %s: %q", job.Name, strings.TrimSpace(string(line)))
	}
	return r, nil
}

// ended waits for a worker that stopped answering and says how it ended.
func (w *convertWorker) ended(name string) error {
	w.in.Close()
	err := w.cmd.Wait()
	w.cmd = nil
	msg := "the worker process ended while converting it"
	if err != nil {
		msg += " (" + err.Error() + ")"
	}
	if s := strings.TrimSpace(w.stderr.String()); s != "" {
		msg += ": " + s
	}
	return errors.New(msg)
}

func (w *convertWorker) close() {
	if w.cmd == nil {
		return
	}
	w.in.Close() // the worker ends at the end of its input
	w.cmd.Wait()
	w.cmd = nil
}

// tailBuffer keeps the last max bytes written to it (a worker's stderr).
type tailBuffer struct {
	mu  sync.Mutex
	max int
	b   []byte
}

func (t *tailBuffer) Write(p []byte) (int, error) {
	t.mu.Lock()
	defer t.mu.Unlock()
	t.b = append(t.b, p...)
	if len(t.b) > t.max {
		t.b = append([]byte(nil), t.b[len(t.b)-t.max:]...)
	}
	return len(p), nil
}

func (t *tailBuffer) String() string {
	t.mu.Lock()
	defer t.mu.Unlock()
	return string(t.b)
}

// newConvertWorkerCommand is the hidden command a parent convert starts
// for --jobs above 1: it reads jobs (JSON lines) on stdin, scans and
// converts each named trajectory of --root with the convert flags it was
// given, and answers each with one JSON line on stdout.
func newConvertWorkerCommand(g *globals) *cobra.Command {
	var o convertOptions
	var root, parentArgs string
	c := &cobra.Command{
		Use:    "worker-convert",
		Hidden: true,
		Args:   cobra.NoArgs,
		RunE: func(c *cobra.Command, args []string) error {
			ctx := commandContext(c)
			opt, err := o.options()
			if err != nil {
				return err
			}
			tol, err := parseTolerances(o.tolerance)
			if err != nil {
				return err
			}
			copt := o.packOptions(opt, tol)
			if parentArgs != "" {
				var cl []string
				if json.Unmarshal([]byte(parentArgs), &cl) == nil {
					copt.CommandLine = cl
				}
			}
			trajs, err := ingest.Discover(root, opt.Recipe)
			if err != nil {
				return &exitError{exitUsage, err}
			}
			byName := map[string]*ingest.Trajectory{}
			for _, t := range trajs {
				byName[t.Name] = t
			}
			in := bufio.NewScanner(os.Stdin)
			enc := json.NewEncoder(g.stdout)
			for in.Scan() {
				var job convertJob
				if err := json.Unmarshal(in.Bytes(), &job); err != nil {
					return &exitError{exitUsage, fmt.Errorf("worker-convert: bad job line: %w", err)}
				}
				if workerFault != nil {
					workerFault(job.Name)
				}
				if err := enc.Encode(convertOne(ctx, byName[job.Name], job, opt, copt, o.dropPartial)); err != nil {
					return err
				}
			}
			return in.Err()
		},
	}
	o.AddFlags(c)
	c.Flags().StringVar(&root, "root", "", "the ensemble folder")
	c.Flags().StringVar(&parentArgs, "parent-args", "", "the parent's command line (JSON), for provenance")
	return c
}

// convertOne scans one trajectory and, unless it is refused or only a
// scan was asked for, converts it.
func convertOne(ctx context.Context, t *ingest.Trajectory, job convertJob, opt ingest.Options, copt ingest.ConvertOptions, dropPartial bool) convertReply {
	r := convertReply{Name: job.Name}
	if t == nil {
		r.Error = "not found in the ensemble folder by the worker"
		return r
	}
	if !job.ScanOnly {
		opt.SpoolDir = ingest.SpoolDirFor(job.Out) // one parse: Convert replays the scan
		opt.DropPartial = dropPartial
	}
	rep, err := ingest.Scan(ctx, t, opt)
	if err != nil {
		var uc *ingest.UnitConflictError
		r.Error, r.Usage = err.Error(), errors.As(err, &uc)
		return r
	}
	defer rep.Discard() // when not converted (Convert removes its own)
	r.Report = rep
	if rep.Refusal(dropPartial) != nil {
		var b bytes.Buffer
		printScan(&globals{stdout: &b, stderr: io.Discard}, rep)
		r.Refused, r.ScanText = true, b.String()
		return r
	}
	if job.ScanOnly {
		return r
	}
	res, err := ingest.Convert(ctx, rep, job.Out, copt)
	if err != nil {
		r.Error = err.Error()
		return r
	}
	r.Result = res
	return r
}

// convertInWorkers scans and converts trajs (pack) into dir with jobs
// worker processes; flags are the conversion flags beyond the user's
// (e.g. the author pack takes from the deposit), cmdline the command
// line the files record. It returns the scan reports in the order of
// trajs, or the replies of refused trajectories (whose problems the
// caller prints; nothing is converted after the first refusal); any
// trajectory that fails otherwise fails the whole.
func convertInWorkers(ctx context.Context, g *globals, flags, cmdline []string, root, dir string, trajs []*ingest.Trajectory, jobs int) ([]*ingest.TrajReport, []convertReply, error) {
	exe, err := os.Executable()
	if err != nil {
		return nil, nil, fmt.Errorf("cannot find this program to start workers: %w", err)
	}
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return nil, nil, err
	}
	parent, _ := json.Marshal(cmdline)
	args := append([]string{"worker-convert", "--root", root, "--parent-args", string(parent)}, flags...)
	bar := newBar(g, "convert", "trajectories")
	replies := runConvertWorkers(ctx, exe, args, dir, trajs, jobs, bar)
	bar.Finish()
	if err := ctx.Err(); err != nil {
		return nil, nil, err
	}
	reps := make([]*ingest.TrajReport, len(replies))
	var bad []string
	var refused []convertReply
	for _, r := range replies {
		if r.Refused && r.Report != nil {
			refused = append(refused, r)
		}
	}
	for i, r := range replies {
		switch {
		case r.Refused && r.Report != nil:
		case r.Error != "":
			bad = append(bad, r.Name+": "+r.Error)
		case r.Report == nil || r.Result == nil && len(refused) == 0:
			// Without a refusal every trajectory is converted; after
			// one, the rest are only scanned.
			bad = append(bad, r.Name+": no result")
		}
		reps[i] = r.Report
	}
	if len(bad) > 0 {
		err := fmt.Errorf("%d of %d trajectories could not be converted: %s", len(bad), len(trajs), strings.Join(bad, "; "))
		for _, r := range replies {
			if r.Usage {
				return nil, nil, &exitError{exitUsage, err}
			}
		}
		return nil, nil, err
	}
	if len(refused) > 0 {
		return nil, refused, nil
	}
	return reps, nil, nil
}
