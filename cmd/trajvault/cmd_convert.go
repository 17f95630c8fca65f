package main

import (
	"bytes"
	"context"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"runtime"
	"sort"

	"trajvault/ingest"

	"github.com/spf13/cobra"

	"trajvault/internal/h5"
	"trajvault/internal/outdir"
)

// conversionFlags are the settings of a conversion, one flag set shared
// by convert and pack (and passed on to worker processes).
type conversionFlags struct {
	dropPartial bool
	bitExact    bool
	forReaders  bool
	tolerance   []string
	author      string
	email       string
	explicit    bool
	compat      string
	series      int
	accept      bool
}

func (o *conversionFlags) AddFlags(c *cobra.Command) {
	c.Flags().BoolVar(&o.dropPartial, "drop-partial", false, "drop a cut last frame instead of failing (recorded in the file)")
	c.Flags().BoolVar(&o.bitExact, "bit-exact", false, "store each number as the float64 nearest to its printed decimal (larger files); default: scale-offset at the printed decimals, digit-exact")
	c.Flags().StringArrayVar(&o.tolerance, "tolerance", nil, "allow lossy storage of a quantity within an absolute bound, e.g. --tolerance velocity=5e-7 (recorded in the file)")
	c.Flags().StringVar(&o.author, "author", "", "author name for /h5md/author (default: $USER; pack: the first creator)")
	c.Flags().StringVar(&o.email, "email", "", "author e-mail")
	c.Flags().BoolVar(&o.forReaders, "for-readers", false, "convert time, positions, velocities, forces and energies into units common H5MD readers understand, with an explicit clock (the stored numbers are then conversions, not the printed digits)")
	c.Flags().BoolVar(&o.explicit, "explicit-clock", false, "store step and time per frame even when sampling is uniform (default: H5MD fixed mode then)")
	c.Flags().IntVar(&o.series, "chunk-frames", ingest.DefaultSeriesFrames, "frames per chunk of each atom coordinate (time-series chunks); -1 chunks whole frames")
	c.Flags().BoolVar(&o.accept, "accept-mismatch", false, "convert although a physics cross-check failed (e.g. P17: kinetic energy vs 1/2 m v^2); recorded in the file")
	c.Flags().StringVar(&o.compat, "hdf5-compat", "1.10", "oldest HDF5 library that must read the files: 1.10, 1.8 or earliest (older formats are a little larger)")
}

// check is the usage check of the conversion flags.
func (o *conversionFlags) check(verb string) error {
	if _, ok := compatFormats[o.compat]; !ok {
		return &exitError{exitUsage, fmt.Errorf("%s: --hdf5-compat %q: use 1.10, 1.8 or earliest", verb, o.compat)}
	}
	return nil
}

type convertOptions struct {
	readFlags
	conversionFlags
	out  string
	json bool
	jobs int
	// workerArgs are the flags the user set, for worker processes.
	workerArgs []string
	shard      string // I/N: convert one shard of an ensemble
	gather     bool   // check that every shard is done
}

func (o *convertOptions) AddFlags(c *cobra.Command) {
	o.readFlags.AddFlags(c)
	o.conversionFlags.AddFlags(c)
	c.Flags().StringVarP(&o.out, "output", "o", "", "trajectory file to write (must not exist)")
	c.Flags().BoolVar(&o.json, "json", false, "print one JSON document (tool, command, ok, findings, result)")
	c.Flags().IntVarP(&o.jobs, "jobs", "j", runtime.NumCPU(), "trajectories converted at once when SRC is an ensemble folder; above 1, each in a worker process of its own (HDF5 serialises threads)")
	c.Flags().StringVar(&o.shard, "shard", "", "convert shard I of N of an ensemble (I/N, e.g. 0/8): one job of a cluster job array; -o may exist, done trajectories are skipped by checksum")
	c.Flags().BoolVar(&o.gather, "gather", false, "check that the shards have converted every trajectory of the ensemble into -o, unchanged since")
}

func newConvertCommand(g *globals) *cobra.Command {
	var o convertOptions
	c := &cobra.Command{
		Use:   "convert SRC... -o OUT.h5",
		Short: "Convert the text logs of a trajectory (or of an ensemble) into trajectory files",
		Long: `convert reads one trajectory - a folder, or its files (an XYZ or
extended XYZ geometry file and column tables) - and writes it as one
HDF5 file in the trajvault layout. Given an ensemble folder (one
subfolder per trajectory, or as the recipe says), it writes one file per
trajectory into the folder named by -o, --jobs at a time; all or
nothing: if any trajectory has problems, nothing is written. Numbers are
stored at exactly the precision printed in the logs (scale-offset
filter) or losslessly; export prints them back digit for digit.
Restarted runs that repeat steps keep the later occurrence; a cut last
frame is an error unless --drop-partial. What was dropped is recorded in
the file (/parameters@trajvault_dropped); what the logs hold but the
file does not store is listed ("not stored") and recorded in the
provenance. A physics cross-check that fails (P17: the kinetic energy
column against 1/2 m v^2 of the stored data, a sign of a wrong unit)
refuses the conversion unless --accept-mismatch. A --unit that differs
from the unit a file writes is refused (exit 2) unless --units-over-file
(recorded). A table of energies or states without a geometry file gives
a file of observables only (no /particles group).

Exit status: 0 success, 1 the logs have problems (as scan reports them),
2 usage or I/O error (a --unit contradicting a file's unit among them).
No output file appears unless conversion succeeded.`,
		Example: "  trajvault convert runs/traj-001 -o traj-001.h5\n  trajvault convert geom.xyz energies.dat --unit position=angstrom -o run.h5",
		Args:    cobra.MinimumNArgs(1),
		PreRunE: func(c *cobra.Command, args []string) error {
			if o.out == "" {
				return &exitError{exitUsage, errors.New("convert: name the output with -o, e.g. -o traj-001.h5")}
			}
			if _, ok := compatFormats[o.compat]; !ok {
				return &exitError{exitUsage, fmt.Errorf("convert: --hdf5-compat %q: use 1.10, 1.8 or earliest", o.compat)}
			}
			return nil
		},
		RunE: func(c *cobra.Command, args []string) error {
			o.workerArgs = workerFlags(c)
			return runConvert(commandContext(c), g, o, args)
		},
	}
	o.AddFlags(c)
	return c
}

func runConvert(ctx context.Context, g *globals, o convertOptions, args []string) error {
	opt, err := o.options()
	if err != nil {
		return err
	}
	for _, a := range args {
		// H5MD files are an input kind of their own (repacked); any
		// other HDF5 file is not a log.
		if isHDF5(a) && ingest.ProbeH5MD(a) != nil {
			return &exitError{exitUsage, fmt.Errorf("convert: %s is an HDF5 file but not H5MD (no /h5md group), nor a text log; convert reads text logs and H5MD files (to check or read it: trajvault validate %s, trajvault inspect %s)", a, a, a)}
		}
	}
	opt.AcceptMismatch = o.accept
	tol, err := parseTolerances(o.tolerance)
	if err != nil {
		return err
	}
	if o.shard != "" || o.gather {
		if len(args) != 1 {
			return &exitError{exitUsage, errors.New("convert: --shard and --gather take one ensemble folder")}
		}
		trajs, err := ingest.Discover(args[0], opt.Recipe)
		if err != nil {
			return &exitError{exitUsage, fmt.Errorf("convert: %w", err)}
		}
		if o.gather {
			return gatherShards(g, o, args[0], trajs)
		}
		return convertShard(ctx, g, o, args[0], trajs, opt, tol)
	}
	if _, err := os.Stat(o.out); err == nil {
		return &exitError{exitUsage, fmt.Errorf("convert: %s already exists; trajvault never overwrites outputs", o.out)}
	}
	if len(args) == 1 {
		if trajs, err := ingest.Discover(args[0], opt.Recipe); err == nil && (len(trajs) > 1 || filepath.Clean(trajs[0].Dir) != filepath.Clean(args[0])) {
			if o.jobs > 1 && len(trajs) > 1 {
				return convertWithWorkers(ctx, g, o, args[0], trajs)
			}
			return convertEnsemble(ctx, g, o, opt, tol, trajs)
		}
	}
	rep, res, err := ingest.ConvertFiles(ctx, args, o.out, o.packOptions(opt, tol))
	if errors.Is(err, ingest.ErrRefused) {
		if o.json {
			printEnvelopeOK(g, "convert", false, rep.Problems, nil) // nothing was made
		} else {
			printScan(g, rep)
		}
		fmt.Fprintf(g.stderr, "trajvault: convert: %v\n", err)
		return errFindings
	}
	if err != nil {
		return &exitError{exitUsage, fmt.Errorf("convert: %w", err)}
	}
	if o.json {
		return printEnvelope(g, "convert", nil, convertResult{Output: o.out, Trajectories: []*ingest.Result{res}})
	}
	fmt.Fprintf(g.stdout, "%s: %s, %s -> %s\n", rep.Name, plural(res.Frames, "frame"), plural(res.Hops, "hop attempt"), filepath.Clean(res.Output))
	var keys []string
	for k := range res.Storage {
		keys = append(keys, k)
	}
	sort.Strings(keys)
	for _, k := range keys {
		wrap(g, fmt.Sprintf("%-17s %s", k, res.Storage[k]), "  ")
	}
	for _, d := range res.Dropped {
		fmt.Fprintf(g.stdout, "  dropped: %s\n", d)
	}
	for _, d := range res.NotStored {
		fmt.Fprintf(g.stdout, "  not stored: %s\n", d)
	}
	for _, d := range res.Accepted {
		fmt.Fprintf(g.stdout, "  accepted: %s\n", d)
	}
	for _, d := range res.Overrides {
		wrap(g, "unit override: "+d, "  ")
	}
	return nil
}

var compatFormats = map[string]h5.Format{"1.10": h5.Format110, "1.8": h5.Format18, "earliest": h5.FormatEarliest}

// packOptions are the conversion settings common to one trajectory and
// ensembles.
func (o *conversionFlags) packOptions(opt ingest.Options, tol map[string]float64) ingest.ConvertOptions {
	author := o.author
	if author == "" {
		author = os.Getenv("USER")
	}
	opt.DropPartial = o.dropPartial
	opt.AcceptMismatch = o.accept
	file := ingest.DefaultFile
	file.Format = compatFormats[o.compat]
	return ingest.ConvertOptions{Options: opt, Author: author, Email: o.email, ToolVersion: toolVersion(),
		Tolerance: tol, BitExact: o.bitExact, ForReaders: o.forReaders, ExplicitClock: o.explicit, File: &file, SeriesFrames: o.series,
		CommandLine: append([]string{"trajvault"}, os.Args[1:]...)}
}

// convertEnsemble converts every trajectory of an ensemble folder into
// o.out/<name>.h5, o.jobs at a time, all or nothing: the files are
// written into a hidden folder renamed into place only when every
// conversion succeeded.
func convertEnsemble(ctx context.Context, g *globals, o convertOptions, opt ingest.Options, tol map[string]float64, trajs []*ingest.Trajectory) error {
	opt.SpoolDir = ingest.SpoolDirFor(o.out) // one parse: ConvertAll replays the scan
	reps, err := scanEnsemble(ctx, g, "convert", trajs, opt, o.jobs, o.dropPartial, o.json)
	if err != nil {
		return err
	}
	tmp, err := outdir.Temp(o.out)
	if err != nil {
		for _, r := range reps {
			r.Discard()
		}
		return &exitError{exitUsage, err}
	}
	converting := newBar(g, "convert", "trajectories")
	results, err := ingest.ConvertAll(ctx, reps, tmp, o.packOptions(opt, tol), o.jobs, converting)
	converting.Finish()
	if err != nil {
		os.RemoveAll(tmp)
		return &exitError{exitUsage, fmt.Errorf("convert: %w", err)}
	}
	if err := os.Rename(tmp, o.out); err != nil {
		os.RemoveAll(tmp)
		return &exitError{exitUsage, err}
	}
	return printEnsembleResults(g, o, results)
}

// printEnsembleResults reports converted files where they now are, not
// where they were written.
func printEnsembleResults(g *globals, o convertOptions, results []*ingest.Result) error {
	for _, r := range results {
		r.Output = filepath.Join(o.out, filepath.Base(r.Output))
	}
	if o.json {
		return printEnvelope(g, "convert", nil, convertResult{Output: o.out, Trajectories: results})
	}
	frames := 0
	for _, r := range results {
		frames += r.Frames
	}
	fmt.Fprintf(g.stdout, "%s, %s -> %s/\n", plural(len(results), "trajectory"), plural(frames, "frame"), filepath.Clean(o.out))
	return nil
}

// hdf5Signature opens every HDF5 file's superblock, at byte 0 or at 512,
// 1024, 2048, ... after a user block (HDF5 File Format Specification,
// section II.A "Format Signature").
var hdf5Signature = []byte("\x89HDF\r\n\x1a\n")

// isHDF5 reports whether path is a regular file with the HDF5 signature
// at one of the places the format allows.
func isHDF5(path string) bool {
	f, err := os.Open(path)
	if err != nil {
		return false
	}
	defer f.Close()
	if st, err := f.Stat(); err != nil || !st.Mode().IsRegular() {
		return false
	}
	buf := make([]byte, len(hdf5Signature))
	for off := int64(0); off < 1<<20; off = max(512, off*2) {
		if _, err := f.ReadAt(buf, off); err != nil {
			return false
		}
		if bytes.Equal(buf, hdf5Signature) {
			return true
		}
	}
	return false
}

// convertResult is the result of convert --json: where the files went
// and, per trajectory, what was stored.
type convertResult struct {
	Output       string           `json:"output"`
	Trajectories []*ingest.Result `json:"trajectories"`
}

// scanEnsemble scans every trajectory (jobs at a time) and refuses,
// printing the problems, when any has errors (a cut last frame is
// allowed with dropPartial): convert and pack write all or nothing.
//
// With jsonOut the problems are printed as the command's envelope.
func scanEnsemble(ctx context.Context, g *globals, verb string, trajs []*ingest.Trajectory, opt ingest.Options, jobs int, dropPartial, jsonOut bool) ([]*ingest.TrajReport, error) {
	scanning := newBar(g, "scan", "trajectories")
	opt.DropPartial = dropPartial // a spool is kept only for what converts
	reps, err := ingest.ScanAll(ctx, trajs, opt, jobs, scanning)
	scanning.Finish()
	if err != nil {
		return nil, &exitError{exitUsage, fmt.Errorf("%s: %w", verb, err)}
	}
	var bad []*ingest.TrajReport
	for _, r := range reps {
		if r.Refusal(dropPartial) != nil {
			bad = append(bad, r)
		}
	}
	if len(bad) > 0 {
		for _, r := range reps {
			r.Discard() // nothing is converted
		}
		if jsonOut {
			printEnvelopeOK(g, verb, false, scanFindings(bad), nil) // nothing was made
		} else {
			for _, r := range bad {
				printScan(g, r)
			}
		}
		fmt.Fprintf(g.stderr, "trajvault: %s: %d of %s have problems; nothing written\n", verb, len(bad), plural(len(trajs), "trajectory"))
		return nil, errFindings
	}
	return reps, nil
}
