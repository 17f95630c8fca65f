package main

import (
	"errors"
	"fmt"
	"path"
	"sort"
	"strings"
	"text/tabwriter"

	"github.com/spf13/cobra"

	"trajvault/export"
	"trajvault/internal/isolate"
	"trajvault/internal/trajfile"
)

type inspectOptions struct {
	json   bool
	values bool
	selectFlags
	iso isolateOptions
}

func (o *inspectOptions) AddFlags(c *cobra.Command) {
	c.Flags().BoolVar(&o.json, "json", false, "print one JSON document (tool, command, ok, findings, result); with --values, result holds the selection and its values")
	c.Flags().BoolVar(&o.values, "values", false, "print the values of a selection (CSV, or JSON with --json) instead of the summary")
	o.selectFlags.AddFlags(c)
	o.iso.AddFlags(c)
}

func newInspectCommand(g *globals) *cobra.Command {
	var o inspectOptions
	c := &cobra.Command{
		Use:   "inspect FILE.h5...",
		Short: "Summarise a trajectory file: atoms, frames, time span, states, units, compression",
		Long: `inspect prints a compact summary of one trajectory file without reading
its bulk data: atoms and species, frames, steps and time span, electronic
states and hops, and every dataset with its type, shape, unit, filters and
compression ratio (logical size / stored size).

--values prints the numbers of a selection instead (--frames or --time,
--atoms, --quantities, --states; indices from 0), as CSV after a comment
line saying what was selected, or with --json as the result of the JSON
document (selection, frame, step, time, values, hops); only the chunks
that hold the selection are read, and numbers keep their recorded digits.

Every particle group under /particles is summarised, one line each;
--group NAME shows only that group (and with --values reads it; without
--group, --values reads the file's default group: ours, else the first
in name order).

Each file is read by a worker process with a memory limit (--max-memory)
and a time limit (--time-limit): a file that crashes the reader, hangs or
needs too much memory is reported (X1, X2, X3) and the next file is read.

Exit status: 0 success, 1 the reader crashed, hung or ran out of memory
on a file (X1-X3), 2 a file could not be read or the selection is
outside the data (the message says what the file holds).`,
		Example: `  trajvault inspect run-001.h5
  trajvault inspect --json run-001.h5
  trajvault inspect --values --frames 100:110 --atoms O \
    --quantities position,total_energy run-001.h5`,
		Args: cobra.MinimumNArgs(1),
		PreRunE: func(c *cobra.Command, args []string) error {
			if err := o.iso.check("inspect"); err != nil {
				return err
			}
			for _, f := range []string{"frames", "time", "atoms", "quantities", "states"} {
				if c.Flags().Changed(f) && !o.values {
					return &exitError{exitUsage, fmt.Errorf("inspect: --%s selects values to print; add --values, e.g. inspect --values --%s ...", f, f)}
				}
			}
			return nil
		},
		RunE: func(c *cobra.Command, args []string) error {
			if o.values && len(args) > 1 {
				return &exitError{exitUsage, errors.New("inspect: --values reads one file; run it once per file")}
			}
			if !isolate.IsWorker() {
				// Each file in a worker of its own (cmd_worker.go).
				if o.values {
					return runIsolated(c, g, o.iso, args[0], args, o.json, nil)
				}
				return runIsolatedEach(c, g, o.iso, args, o.json)
			}
			if o.values {
				return inWorker(args[0], func() error { return runValues(g, o, args[0]) })
			}
			if o.json {
				return inWorker(args[0], func() error { return inspectJSON(g, o, args) })
			}
			for i, a := range args {
				if i > 0 {
					fmt.Fprintln(g.stdout)
				}
				if err := inWorker(a, func() error { return runInspect(g, o, a) }); err != nil {
					return err
				}
			}
			return nil
		},
	}
	o.AddFlags(c)
	return c
}

// inspectJSON prints the summaries of the files, in the order given, as
// the result of one envelope.
func inspectJSON(g *globals, o inspectOptions, paths []string) error {
	var all []*trajfile.Summary
	for _, p := range paths {
		s, err := summarize(p, o.sel.Group)
		if err != nil {
			return err
		}
		all = append(all, s)
	}
	return printEnvelope(g, "inspect", nil, map[string]any{"files": all})
}

// summarize is the summary of path, with only the particle group named
// group when group is not "" (a usage error when the file lacks it).
func summarize(path, group string) (*trajfile.Summary, error) {
	s, err := trajfile.Summarize(path)
	if err != nil {
		return nil, &exitError{exitUsage, fmt.Errorf("inspect: %w", err)}
	}
	if group == "" {
		return s, nil
	}
	var names []string
	for _, p := range s.Groups {
		if p.Name == group {
			s.Groups = []trajfile.GroupSummary{p}
			return s, nil
		}
		names = append(names, p.Name)
	}
	return nil, &exitError{exitUsage, fmt.Errorf("inspect: %s has no particle group %q; it has: %s", path, group, strings.Join(names, ", "))}
}

func runInspect(g *globals, o inspectOptions, path string) error {
	s, err := summarize(path, o.sel.Group)
	if err != nil {
		return err
	}
	w := tabwriter.NewWriter(g.stdout, 0, 0, 2, ' ', 0)
	fmt.Fprintf(w, "file\t%s\n", s.File)
	fmt.Fprintf(w, "format\t%s, H5MD %s, written by %s\n", human(s.FileBytes), s.H5MD, s.Creator)
	fmt.Fprintf(w, "author\t%s\n", s.Author)
	fmt.Fprintf(w, "modules\t%s\n", strings.Join(s.Modules, ", "))
	for _, p := range s.Groups {
		formula := p.Formula
		if formula == "" {
			formula = "no species"
		}
		fmt.Fprintf(w, "particles\t%s: %d atoms (%s), %d frames, steps %d..%d every %d\n", p.Name, p.Atoms, formula, p.Frames, p.FirstStep, p.LastStep, p.Stride)
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
	// One row per dataset, under the group that holds it, within 80
	// columns: filters abbreviated, with a legend.
	paths := map[string]bool{}
	for _, d := range s.Datasets {
		paths[d.Path] = true
	}
	type row struct{ dir, name, shape, unit, filters, stored, ratio string }
	var rows []row
	used := map[string]bool{}
	for _, d := range s.Datasets {
		r := row{shape: "scalar", unit: d.Unit, filters: "-", stored: human(d.Stored), ratio: "-"}
		r.dir, r.name = datasetPlace(d.Path, paths)
		if len(d.Shape) > 0 {
			r.shape = strings.Trim(strings.ReplaceAll(fmt.Sprint(d.Shape), " ", "x"), "[]")
		}
		if r.unit == "" {
			r.unit = "-"
		}
		var fl []string
		for _, f := range d.Filters {
			fl = append(fl, filterAbbrev(f))
			used[f] = true
		}
		if len(fl) > 0 {
			r.filters = strings.Join(fl, "+")
		}
		if d.Ratio > 0 {
			r.ratio = fmt.Sprintf("%.2f", d.Ratio)
		}
		rows = append(rows, r)
	}
	sort.SliceStable(rows, func(a, b int) bool {
		if rows[a].dir != rows[b].dir {
			return rows[a].dir < rows[b].dir
		}
		return rows[a].name < rows[b].name
	})
	width := func(col func(row) string, head string) int {
		n := len(head)
		for _, r := range rows {
			n = max(n, len(col(r)))
		}
		return n
	}
	wn := width(func(r row) string { return "  " + r.name }, "DATASET")
	ws := width(func(r row) string { return r.shape }, "SHAPE")
	wu := width(func(r row) string { return r.unit }, "UNIT")
	wf := width(func(r row) string { return r.filters }, "FILTERS")
	wb := width(func(r row) string { return r.stored }, "STORED")
	line := func(a, b, c, d, e, f string) {
		fmt.Fprintf(g.stdout, "%-*s %-*s %-*s %-*s %*s %6s\n", wn, a, ws, b, wu, c, wf, d, wb, e, f)
	}
	line("DATASET", "SHAPE", "UNIT", "FILTERS", "STORED", "RATIO")
	group := ""
	for _, r := range rows {
		if r.dir != group {
			fmt.Fprintln(g.stdout, r.dir)
			group = r.dir
		}
		line("  "+r.name, r.shape, r.unit, r.filters, r.stored, r.ratio)
	}
	if len(used) > 0 {
		var legend []string
		for f := range used {
			legend = append(legend, filterAbbrev(f)+" "+f)
		}
		sort.Strings(legend)
		fmt.Fprintf(g.stdout, "filters: %s\nRATIO is the data size over the stored size.\n", strings.Join(legend, ", "))
	}
	return nil
}

// datasetPlace splits a dataset path into the group it is listed under
// and the name shown: a time-dependent element (a group with value,
// H5MD 1.1) is shown by its name, its step and time as element/step and
// element/time.
func datasetPlace(p string, paths map[string]bool) (dir, name string) {
	el := strings.TrimSuffix(p, trajfile.Value)
	dir, name = path.Split(el)
	if (name == "step" || name == "time") && paths[dir+"value"] {
		d, e := path.Split(strings.TrimSuffix(dir, "/"))
		return d, e + "/" + name
	}
	return dir, name
}

// filterAbbrev is the short name of an HDF5 filter in inspect's table.
func filterAbbrev(f string) string {
	switch f {
	case "scaleoffset":
		return "so"
	case "deflate":
		return "z"
	case "shuffle":
		return "sh"
	case "fletcher32":
		return "f32"
	case "nbit":
		return "nb"
	case "szip":
		return "sz"
	}
	return f
}

// runValues prints the values of a selection: CSV, or with --json the
// envelope whose result is the selection and its values.
func runValues(g *globals, o inspectOptions, path string) error {
	v, err := export.OpenValues(path, o.selection())
	if err != nil {
		return &exitError{exitUsage, fmt.Errorf("inspect: %w", err)}
	}
	defer v.Close()
	if o.json {
		err = printEnvelopeStream(g, "inspect", v.WriteJSON)
	} else {
		err = v.WriteCSV(g.stdout)
	}
	if err != nil {
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
