package main

import (
	"context"
	"encoding/json"
	"fmt"
	"runtime"
	"sort"
	"strings"

	"github.com/spf13/cobra"

	"trajvault/ingest"
	"trajvault/internal/quantity"
)

type scanOptions struct {
	readFlags
	json bool
}

func (o *scanOptions) AddFlags(c *cobra.Command) {
	o.readFlags.AddFlags(c)
	c.Flags().BoolVar(&o.json, "json", false, "print the reports as JSON")
}

func newScanCommand(g *globals) *cobra.Command {
	var o scanOptions
	c := &cobra.Command{
		Use:   "scan DIR",
		Short: "Find the trajectories in an ensemble folder of text logs and report their problems",
		Long: `scan reads every log of every trajectory in DIR once (one trajectory per
subfolder, or as a recipe says) and prints, per trajectory, its files and
formats, atoms, frames, steps, time span, electronic states, the printed
precision of each quantity, and every problem: cut last frames, missing
files, changing atom counts, clocks going backwards, restarts that repeat
steps, NaN or Inf, files that disagree on frames, quantities without units.

Exit status: 0 no problems, 1 problems found (notes do not count),
2 usage or I/O error.`,
		Example: "  trajvault scan runs/\n  trajvault scan --recipe lab.yaml --json runs/",
		Args:    cobra.ExactArgs(1),
		RunE:    func(c *cobra.Command, args []string) error { return runScan(commandContext(c), g, o, args[0]) },
	}
	o.AddFlags(c)
	return c
}

func runScan(ctx context.Context, g *globals, o scanOptions, dir string) error {
	opt, err := o.options()
	if err != nil {
		return err
	}
	trajs, err := ingest.Discover(dir, opt.Recipe)
	if err != nil {
		return &exitError{exitUsage, fmt.Errorf("scan: %w", err)}
	}
	scanning := newBar(g, "scan", "trajectories")
	reps, err := ingest.ScanAll(ctx, trajs, opt, runtime.NumCPU(), scanning)
	scanning.Finish()
	if err != nil {
		return &exitError{exitUsage, fmt.Errorf("scan: %w", err)}
	}
	problems := 0
	for _, r := range reps {
		problems += r.Findings()
	}
	if o.json {
		b, err := json.MarshalIndent(reps, "", "  ")
		if err != nil {
			return err
		}
		fmt.Fprintln(g.stdout, string(b))
	} else {
		for _, r := range reps {
			printScan(g, r)
		}
		fmt.Fprintf(g.stdout, "%d trajectories, %s\n", len(reps), plural(problems, "problem"))
	}
	if problems > 0 {
		return errFindings
	}
	return nil
}

func printScan(g *globals, r *ingest.TrajReport) {
	fmt.Fprintf(g.stdout, "%s: %d atoms (%s), %d frames, steps %d..%d, time %g..%g %s", r.Name, r.Atoms, r.Formula, r.Frames, r.FirstStep, r.LastStep, r.TimeFirst, r.TimeLast, r.Units["time"])
	if r.States > 0 {
		fmt.Fprintf(g.stdout, ", %d states, %d hop attempts", r.States, r.Hops)
	}
	fmt.Fprintln(g.stdout)
	for _, f := range r.Files {
		switch {
		case f.Records == 0 && f.Hops > 0:
			fmt.Fprintf(g.stdout, "  %-6s %s: %d hop events\n", f.Format, f.File, f.Hops)
		case f.Records != f.Kept:
			fmt.Fprintf(g.stdout, "  %-6s %s: %d records, %d kept\n", f.Format, f.File, f.Records, f.Kept)
		default:
			fmt.Fprintf(g.stdout, "  %-6s %s: %d records\n", f.Format, f.File, f.Records)
		}
	}
	var qs []string
	for _, q := range r.Quantities {
		s := q + " " + r.Precision[q]
		if u := r.Units[string(quantity.UnitKind(q))]; u != "" {
			s += " [" + u + "]"
		}
		qs = append(qs, s)
	}
	sort.Strings(qs)
	if len(qs) > 0 {
		fmt.Fprintf(g.stdout, "  precision: %s\n", strings.Join(qs, "; "))
	}
	for _, p := range r.Problems {
		fmt.Fprintf(g.stdout, "  %s\n", p)
	}
}

// commandContext is the command's context (cancelled on Ctrl-C once main
// passes a signal-aware one), or a background context.
func commandContext(c *cobra.Command) context.Context {
	if ctx := c.Context(); ctx != nil {
		return ctx
	}
	return context.Background()
}
