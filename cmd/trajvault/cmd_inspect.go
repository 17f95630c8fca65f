package main

import (
	"encoding/json"
	"fmt"
	"strings"
	"text/tabwriter"

	"github.com/spf13/cobra"

	"trajvault/export"
	"trajvault/internal/trajfile"
)

type inspectOptions struct {
	json   bool
	values bool
	selectFlags
}

func (o *inspectOptions) AddFlags(c *cobra.Command) {
	c.Flags().BoolVar(&o.json, "json", false, "print the summary (or, with --values, the values) as JSON")
	c.Flags().BoolVar(&o.values, "values", false, "print the values of a selection (CSV, or JSON with --json) instead of the summary")
	o.selectFlags.AddFlags(c)
}

func newInspectCommand(g *globals) *cobra.Command {
	var o inspectOptions
	c := &cobra.Command{
		Use:   "inspect FILE.h5",
		Short: "Summarise a trajectory file: atoms, frames, time span, states, units, compression",
		Long: `inspect prints a compact summary of one trajectory file without reading
its bulk data: atoms and species, frames, steps and time span, electronic
states and hops, and every dataset with its type, shape, unit, filters and
compression ratio (logical size / stored size).

--values prints the numbers of a selection instead (--frames or --time,
--atoms, --quantities, --states; indices from 0), as CSV after a comment
line saying what was selected, or as JSON with --json; only the chunks
that hold the selection are read, and numbers keep their recorded digits.

Exit status: 0 success, 2 the file could not be read or the selection
is outside the data (the message says what the file holds).`,
		Example: `  trajvault inspect run-001.h5
  trajvault inspect --json run-001.h5
  trajvault inspect --values --frames 100:110 --atoms O --quantities position,total_energy run-001.h5`,
		Args: cobra.ExactArgs(1),
		PreRunE: func(c *cobra.Command, args []string) error {
			for _, f := range []string{"frames", "time", "atoms", "quantities", "states"} {
				if c.Flags().Changed(f) && !o.values {
					return &exitError{exitUsage, fmt.Errorf("inspect: --%s selects values to print; add --values, e.g. inspect --values --%s ...", f, f)}
				}
			}
			return nil
		},
		RunE: func(c *cobra.Command, args []string) error {
			if o.values {
				return runValues(g, o, args[0])
			}
			return runInspect(g, o, args[0])
		},
	}
	o.AddFlags(c)
	return c
}

func runInspect(g *globals, o inspectOptions, path string) error {
	s, err := trajfile.Summarize(path)
	if err != nil {
		return &exitError{exitUsage, fmt.Errorf("inspect: %w", err)}
	}
	if o.json {
		b, err := json.MarshalIndent(s, "", "  ")
		if err != nil {
			return err
		}
		fmt.Fprintln(g.stdout, string(b))
		return nil
	}
	w := tabwriter.NewWriter(g.stdout, 0, 0, 2, ' ', 0)
	fmt.Fprintf(w, "file\t%s (%s, H5MD %s, written by %s)\n", s.File, human(s.FileBytes), s.H5MD, s.Creator)
	fmt.Fprintf(w, "author\t%s\n", s.Author)
	fmt.Fprintf(w, "modules\t%s\n", strings.Join(s.Modules, ", "))
	for _, p := range s.Groups {
		fmt.Fprintf(w, "particles\t%s: %d atoms (%s), %d frames, steps %d..%d every %d\n", p.Name, p.Atoms, p.Formula, p.Frames, p.FirstStep, p.LastStep, p.Stride)
		fmt.Fprintf(w, "time\t%g..%g %s, %g %s per step\n", p.TimeFirst, p.TimeLast, p.TimeUnit, p.StepTime, p.TimeUnit)
	}
	if s.States > 0 {
		line := fmt.Sprintf("%d electronic states", s.States)
		if s.Hops != nil {
			line += fmt.Sprintf("; hops: %d accepted, %d frustrated", s.Hops.Accepted, s.Hops.Frustrated)
		}
		fmt.Fprintf(w, "states\t%s\n", line)
	}
	fmt.Fprintf(w, "storage\t%s of data in %s (ratio %.2f)\n", human(s.Logical), human(s.Stored), s.Ratio)
	w.Flush()
	fmt.Fprintln(g.stdout)
	w = tabwriter.NewWriter(g.stdout, 0, 0, 2, ' ', 0)
	fmt.Fprintln(w, "DATASET\tTYPE\tSHAPE\tUNIT\tFILTERS\tSTORED\tRATIO")
	for _, d := range s.Datasets {
		shape := "scalar"
		if len(d.Shape) > 0 {
			shape = strings.Trim(strings.ReplaceAll(fmt.Sprint(d.Shape), " ", "x"), "[]")
		}
		unit, filters, ratio := d.Unit, strings.Join(d.Filters, "+"), "-"
		if unit == "" {
			unit = "-"
		}
		if filters == "" {
			filters = "-"
		}
		if d.Ratio > 0 {
			ratio = fmt.Sprintf("%.2f", d.Ratio)
		}
		fmt.Fprintf(w, "%s\t%s\t%s\t%s\t%s\t%s\t%s\n", d.Path, d.Type, shape, unit, filters, human(d.Stored), ratio)
	}
	return w.Flush()
}

// runValues prints the values of a selection.
func runValues(g *globals, o inspectOptions, path string) error {
	format := export.FormatCSV
	if o.json {
		format = export.FormatJSON
	}
	if err := export.WriteValues(g.stdout, path, o.selection(), format); err != nil {
		return &exitError{exitUsage, fmt.Errorf("inspect: %w", err)}
	}
	return nil
}

// human formats a byte count with binary prefixes.
func human(n int64) string {
	const unit = 1024
	if n < unit {
		return fmt.Sprintf("%d B", n)
	}
	div, exp := int64(unit), 0
	for m := n / unit; m >= unit; m /= unit {
		div *= unit
		exp++
	}
	return fmt.Sprintf("%.1f %ciB", float64(n)/float64(div), "KMGTPE"[exp])
}
