package main

import (
	"context"
	"fmt"
	"runtime"
	"sort"
	"strings"

	"github.com/spf13/cobra"

	"trajvault/ingest"
	"trajvault/internal/finding"
	"trajvault/internal/quantity"
)

type scanOptions struct {
	readFlags
	json bool
}

func (o *scanOptions) AddFlags(c *cobra.Command) {
	o.readFlags.AddFlags(c)
	c.Flags().BoolVar(&o.json, "json", false, "print one JSON document (tool, command, ok, findings, result)")
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

A --unit that differs from the unit a file writes for the same kind
(a table header, an extended-XYZ KEY_unit key) is refused with exit 2,
unless --units-over-file says the file's label is wrong.

Exit status: 0 no problems, 1 problems found (notes do not count),
2 usage or I/O error (a --unit contradicting a file's unit among them).`,
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
		if err := printEnvelopeOK(g, "scan", problems == 0, scanFindings(reps), scanResult(reps)); err != nil {
			return err
		}
	} else {
		for _, r := range reps {
			printScan(g, r)
		}
		fmt.Fprintf(g.stdout, "%s, %s\n", plural(len(reps), "trajectory"), plural(problems, "problem"))
	}
	if problems > 0 {
		return errFindings
	}
	return nil
}

// scanTraj is one trajectory in the result of scan --json; its problems
// are the envelope's findings (the nil field hides the report's own).
type scanTraj struct {
	*ingest.TrajReport
	Problems []finding.Finding `json:"problems,omitempty"`
}

func scanResult(reps []*ingest.TrajReport) map[string]any {
	out := make([]scanTraj, len(reps))
	for i, r := range reps {
		out[i] = scanTraj{TrajReport: r}
	}
	return map[string]any{"trajectories": out}
}

// scanFindings are the problems of every trajectory, in trajectory order.
func scanFindings(reps []*ingest.TrajReport) []finding.Finding {
	var all []finding.Finding
	for _, r := range reps {
		all = append(all, r.Problems...)
	}
	return all
}

// printScan prints one trajectory's report in lines of at most 80
// columns.
func printScan(g *globals, r *ingest.TrajReport) {
	what := fmt.Sprintf("%s (%s), %s", plural(r.Atoms, "atom"), r.Formula, plural(r.Frames, "frame"))
	if r.ObservablesOnly {
		what = plural(r.Frames, "record") + ", observables only"
	}
	head := fmt.Sprintf("%s: %s, steps %d..%d, time %g..%g %s", r.Name, what, r.FirstStep, r.LastStep, r.TimeFirst, r.TimeLast, r.Units["time"])
	if r.States > 0 {
		head += fmt.Sprintf(", %s, %s", plural(r.States, "state"), plural(r.Hops, "hop attempt"))
	}
	wrap(g, head, "")
	for _, f := range r.Files {
		switch {
		case f.Records == 0 && f.Hops > 0:
			wrap(g, fmt.Sprintf("%-6s %s: %s", f.Format, f.File, plural(f.Hops, "hop event")), "  ")
		case f.Records != f.Kept:
			wrap(g, fmt.Sprintf("%-6s %s: %s, %d kept", f.Format, f.File, plural(f.Records, "record"), f.Kept), "  ")
		default:
			wrap(g, fmt.Sprintf("%-6s %s: %s", f.Format, f.File, plural(f.Records, "record")), "  ")
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
		wrapItems(g, "precision: ", qs, "  ")
	}
	for _, p := range r.Problems {
		wrap(g, p.String(), "  ")
	}
}

// wrapItems prints label and items joined by "; " in lines of at most 80
// columns, breaking only between items, continuation lines indented two
// columns further.
func wrapItems(g *globals, label string, items []string, indent string) {
	line := indent + label
	for i, it := range items {
		sep := "; "
		if i == len(items)-1 {
			sep = ""
		}
		if i > 0 && len(line)+len(it)+len(sep) > 80 {
			fmt.Fprintln(g.stdout, strings.TrimRight(line, " "))
			line = indent + "  "
		}
		line += it + sep
	}
	fmt.Fprintln(g.stdout, line)
}

// commandContext is the command's context (cancelled on Ctrl-C once main
// passes a signal-aware one), or a background context.
func commandContext(c *cobra.Command) context.Context {
	if ctx := c.Context(); ctx != nil {
		return ctx
	}
	return context.Background()
}
