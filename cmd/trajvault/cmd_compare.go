package main

import (
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"strings"

	"github.com/spf13/cobra"

	"trajvault/compare"
	"trajvault/internal/finding"
)

type compareOptions struct {
	readFlags
	json            bool
	threshold       float64
	roundOff        float64
	alpha           float64
	testTimes       int
	minTrajectories int
	report          string
}

func (o *compareOptions) AddFlags(c *cobra.Command) {
	d := compare.DefaultSettings
	o.readFlags.AddFlags(c)
	c.Flags().BoolVar(&o.json, "json", false, "print one JSON document (tool, command, ok, findings, result)")
	c.Flags().StringVar(&o.report, "report", "", "also write a self-contained HTML report with plots to `FILE.html` (never overwritten)")
	c.Flags().Float64Var(&o.threshold, "threshold", d.Threshold, "RMS position difference (angstrom) whose first crossing is reported; top of the growth-rate fit")
	c.Flags().Float64Var(&o.roundOff, "round-off", d.RoundOff, "largest RMS position difference (angstrom) at the start that counts as round-off")
	c.Flags().Float64Var(&o.alpha, "alpha", d.Alpha, "family-wise significance level of the ensemble tests")
	c.Flags().IntVar(&o.testTimes, "test-times", d.TestTimes, "number of times at which active-state fractions are tested")
	c.Flags().IntVar(&o.minTrajectories, "min-trajectories", d.MinTrajectories, "smaller ensembles are judged too few to tell")
}

func (o *compareOptions) check() error {
	switch {
	case !(o.threshold > 0):
		return &exitError{exitUsage, errors.New("compare: --threshold must be positive, e.g. --threshold 0.01 (angstrom)")}
	case !(o.roundOff > 0) || o.roundOff >= o.threshold:
		return &exitError{exitUsage, errors.New("compare: --round-off must be positive and below --threshold, e.g. --round-off 1e-6 (angstrom)")}
	case !(o.alpha > 0 && o.alpha < 1):
		return &exitError{exitUsage, errors.New("compare: --alpha must lie between 0 and 1, e.g. --alpha 0.05")}
	case o.testTimes < 1 || o.testTimes > 1000:
		return &exitError{exitUsage, errors.New("compare: --test-times must lie in 1..1000, e.g. --test-times 20")}
	case o.minTrajectories < 2:
		return &exitError{exitUsage, errors.New("compare: --min-trajectories must be at least 2, e.g. --min-trajectories 10")}
	case o.report != "" && !strings.HasSuffix(strings.ToLower(o.report), ".html") && !strings.HasSuffix(strings.ToLower(o.report), ".htm"):
		return &exitError{exitUsage, fmt.Errorf("compare: --report names an HTML file, e.g. --report compare.html (got %q)", o.report)}
	}
	return nil
}

func newCompareCommand(g *globals) *cobra.Command {
	var o compareOptions
	c := &cobra.Command{
		Use:   "compare A B",
		Short: "Audit whether a rerun reproduces a run: setup, trajectory pairs, ensembles",
		Long: `compare checks whether run B reproduces run A. A and B are trajectory
files, folders of them, bundles (folders, or .zip and .tar.zst archives
read in place), or text logs (converted on the fly with the options of
convert).

First the setups: program and version, method, time step, states, atoms,
units, constants and how the logs were printed; differences are listed
before any number. Then each pair of trajectories, matched by name, or,
where names differ, by initial conditions (the first frame's positions and
velocities equal within printed precision, one to one): the
first frame where each quantity differs by more than the printed precision
of either side, the RMS position difference over time with its fitted
exponential growth rate and the time it reaches --threshold, and the first
differing hop and active state. A pair is identical within printed
precision, the same until some time and then diverging exponentially from
round-off (as chaotic dynamics do), or different from the start (a setup
difference). Then the two ensembles as samples: active-state fractions
with Wilson score bands and mean |c|^2 with Student t bands, tested at
--test-times times (chi-squared and Welch's t test), first hop times
(two-sample Kolmogorov-Smirnov) and final states (chi-squared), judged
together with Holm's correction at --alpha; the verdict is statistically
equivalent, different, or too few trajectories to tell, with the smallest
difference the test would have detected.

--report FILE.html also writes all this as one self-contained HTML page
with plots: RMS divergence of each pair on a log scale, active-state
fractions of both ensembles with their Wilson bands, and the distributions
of first hop times. An existing file is never overwritten.

Exit status: 0 the runs agree (identical, reproduced up to chaotic
divergence, or statistically equivalent), 1 they differ or the ensembles
are too small to tell, 2 usage or I/O error.`,
		Example: "  trajvault compare archived.h5 rerun.h5\n  trajvault compare --json deposit/ rerun-logs/\n" +
			"  trajvault compare --report compare.html archived/ rerun/",
		Args: func(c *cobra.Command, args []string) error {
			if len(args) != 2 {
				return &exitError{exitUsage, errors.New("compare: name two runs, e.g. trajvault compare archived/ rerun/")}
			}
			return nil
		},
		PreRunE: func(c *cobra.Command, args []string) error { return o.check() },
		RunE:    func(c *cobra.Command, args []string) error { return runCompare(c, g, o, args[0], args[1]) },
	}
	o.AddFlags(c)
	return c
}

// compareResult is the result of compare --json: the inputs and the
// report; the report's findings are the envelope's (the nil field hides
// them here).
type compareResult struct {
	A string `json:"a"`
	B string `json:"b"`
	*compare.Report
	Findings []finding.Finding `json:"findings,omitempty"`
}

func runCompare(c *cobra.Command, g *globals, o compareOptions, a, b string) error {
	if o.report != "" {
		if _, err := os.Lstat(o.report); err == nil {
			return &exitError{exitUsage, fmt.Errorf("compare: %s already exists; trajvault never overwrites outputs", o.report)}
		}
	}
	opt, err := o.options()
	if err != nil {
		return err
	}
	s := compare.DefaultSettings
	s.Threshold, s.RoundOff, s.Alpha = o.threshold, o.roundOff, o.alpha
	s.TestTimes, s.MinTrajectories = o.testTimes, o.minTrajectories
	co := (&conversionFlags{compat: "1.10"}).packOptions(opt, nil)
	rep, err := compare.Run(c.Context(), a, b, compare.Options{Settings: s, Convert: co})
	if err != nil {
		return &exitError{exitUsage, fmt.Errorf("compare: %w", err)}
	}
	if o.report != "" {
		if err := writeAtomically(o.report, func(f *os.File) error { return rep.WriteHTML(f, toolVersion()) }); err != nil {
			return &exitError{exitUsage, fmt.Errorf("compare: %w", err)}
		}
	}
	if o.json {
		if err := printEnvelopeOK(g, "compare", rep.OK(), rep.Findings, compareResult{A: a, B: b, Report: rep}); err != nil {
			return err
		}
	} else {
		printCompare(g, rep)
		if o.report != "" {
			fmt.Fprintf(g.stdout, "report: %s\n", short(o.report, 72))
		}
	}
	if !rep.OK() {
		return errFindings
	}
	return nil
}

// short cuts s to n columns.
func short(s string, n int) string {
	if len(s) <= n {
		return s
	}
	return s[:n-1] + "~"
}

// fmtOpt prints an optional number.
func fmtOpt(x *float64, f string) string {
	if x == nil {
		return "-"
	}
	return fmt.Sprintf(f, *x)
}

// printCompare prints the comparison in lines of at most 80 columns:
// setup first, then pairs, then the ensemble, then the verdict.
func printCompare(g *globals, r *compare.Report) {
	w := g.stdout
	fmt.Fprintf(w, "A: %s (%d)\n", short(r.A, 70), len(r.FilesA))
	fmt.Fprintf(w, "B: %s (%d)\n", short(r.B, 70), len(r.FilesB))
	fmt.Fprintf(w, "setup: %s\n", plural(len(r.Setup), "difference"))
	for _, d := range r.Setup {
		fmt.Fprintf(w, "  %-24s A %-23s B %s\n", short(d.Item, 24), short(d.A, 23), short(d.B, 24))
	}
	counts := map[string]int{}
	for _, p := range r.Pairs {
		counts[p.Verdict]++
	}
	fmt.Fprintf(w, "pairs: %d: %d identical, %d same then diverged, %d different\n",
		len(r.Pairs), counts[compare.Identical], counts[compare.Diverged], counts[compare.Setup])
	if len(r.Pairs) > 0 {
		fmt.Fprintf(w, "  %-16s %-9s %10s %10s %9s %5s %9s\n", "name", "verdict", "same to", "reach thr", "rate", "R2", "first hop")
		fmt.Fprintf(w, "  %-16s %-9s %10s %10s %9s %5s %9s\n", "", "", "fs", "fs", "1/fs", "", "fs")
	}
	for _, p := range r.Pairs {
		v := map[string]string{compare.Identical: "identical", compare.Diverged: "diverged", compare.Setup: "different"}[p.Verdict]
		hop := "-"
		if p.FirstHop != nil {
			hop = fmtOpt(p.FirstHop.TimeA, "%.4g")
			if p.FirstHop.TimeA == nil {
				hop = fmtOpt(p.FirstHop.TimeB, "%.4g")
			}
		}
		fmt.Fprintf(w, "  %-16s %-9s %10s %10s %9s %5s %9s\n", short(p.Name, 16), v,
			fmtOpt(p.SameUntil, "%.4g"), fmtOpt(p.ThresholdTime, "%.4g"), fmtOpt(p.Rate, "%.3g"), fmtOpt(p.R2, "%.2f"), hop)
		if p.Verdict == compare.Setup {
			wrap(g, p.Reason, "    ")
		}
	}
	var byStart []string
	for _, p := range r.Pairs {
		if p.MatchedBy == compare.ByStart {
			byStart = append(byStart, p.Name+" = "+p.NameB)
		}
	}
	if len(byStart) > 0 {
		wrap(g, fmt.Sprintf("matched by initial conditions (names differ): %s", strings.Join(byStart, ", ")), "  ")
	}
	if d := r.Divergence; d != nil {
		wrap(g, fmt.Sprintf("diverged pairs: %d; median growth rate %.3g/fs (doubling in %.3g fs), median same until %s fs, median threshold time %s fs",
			d.Pairs, d.MedianRate, d.DoublingTime, fmtOpt(d.MedianSameUntil, "%.4g"), fmtOpt(d.MedianThresholdTime, "%.4g")), "  ")
	}
	if len(r.OnlyA)+len(r.OnlyB) > 0 {
		wrap(g, fmt.Sprintf("unmatched: %d only in A, %d only in B", len(r.OnlyA), len(r.OnlyB)), "  ")
	}
	e := r.Ensemble
	fmt.Fprintf(w, "ensemble: %d vs %d trajectories, %d states: %s\n", e.NA, e.NB, e.States, e.Verdict)
	if len(e.Tests) > 0 {
		fmt.Fprintf(w, "  %-34s %10s %4s %10s %10s\n", "test", "statistic", "df", "p", "p (Holm)")
		for _, t := range e.Tests {
			df := "-" // KS has no degrees of freedom
			if t.DF > 0 {
				df = fmt.Sprint(t.DF)
			}
			fmt.Fprintf(w, "  %-34s %10.4g %4s %10.3g %10.3g\n", short(t.Name, 34), t.Statistic, df, t.P, t.Adjusted)
		}
		wrap(g, fmt.Sprintf("smallest detectable difference of active-state fractions at these sizes: %.2f (power %g, alpha %g over %d tests, %d of them of mean |c|^2)",
			e.Detectable, compare.DefaultSettings.Power, r.Settings.Alpha, len(e.Tests), e.PopulationTests), "  ")
	}
	for _, s := range e.Skipped {
		wrap(g, "not tested: "+s, "  ")
	}
	for _, sp := range []struct {
		side string
		s    *compare.Spread
	}{{"A", e.EnergyA}, {"B", e.EnergyB}} {
		if sp.s != nil {
			fmt.Fprintf(w, "  energy spread %s: median %.3g eV, max %.3g eV (%d runs)\n", sp.side, sp.s.Median, sp.s.Max, sp.s.N)
		}
	}
	if len(r.Findings) > 0 {
		fmt.Fprintln(w, "findings:")
		// In recorded order: setup differences first.
		for _, f := range r.Findings {
			f.File = filepath.Base(f.File)
			if f.File == "." {
				f.File = ""
			}
			wrap(g, f.String(), "  ")
		}
	}
	fmt.Fprintf(w, "verdict: %s\n", strings.TrimSpace(r.Verdict))
}
