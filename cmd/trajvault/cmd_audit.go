package main

import (
	"context"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"runtime"
	"sort"
	"strings"

	"github.com/spf13/cobra"

	"trajvault/audit"
	"trajvault/internal/finding"
	"trajvault/internal/isolate"
	"trajvault/internal/trajfile"
)

type auditOptions struct {
	json        bool
	report      string
	noFail      bool
	jobs        int
	temperature float64
	energyWarn  float64
	energyFail  float64
	group       string
	iso         isolateOptions
	// screen, when set, reads each file first in a worker of its own and
	// returns those that crashed, hung or ran out of memory there
	// (screenFiles); they are reported (X1-X3), not audited here.
	screen func([]string) (map[string]finding.Finding, error)
}

func (o *auditOptions) AddFlags(c *cobra.Command) {
	d := audit.DefaultSettings
	c.Flags().BoolVar(&o.json, "json", false, "print one JSON document (tool, command, ok, findings, result)")
	c.Flags().StringVar(&o.report, "report", "", "write a self-contained HTML report with plots to this file (must not exist)")
	c.Flags().BoolVar(&o.noFail, "no-fail", false, "exit 0 even when checks fail")
	c.Flags().IntVarP(&o.jobs, "jobs", "j", runtime.NumCPU(), "trajectories audited at once")
	c.Flags().Float64Var(&o.temperature, "temperature", d.Temperature, "temperature (K) setting the momentum-drift scale k_B T")
	c.Flags().Float64Var(&o.energyWarn, "energy-warn", d.EnergyWarnEV, "warn when the total energy moves more than this from its start (eV)")
	c.Flags().Float64Var(&o.energyFail, "energy-fail", d.EnergyFailEV, "fail when the total energy moves more than this from its start (eV)")
	o.iso.AddFlags(c)
	c.Flags().StringVar(&o.group, "group", "", "particle group under /particles to audit, e.g. water (default: every group, reported per group)")
}

func newAuditCommand(g *globals) *cobra.Command {
	var o auditOptions
	c := &cobra.Command{
		Use:   "audit PATH...",
		Short: "Check the physics of stored runs: energy, time step, populations, hops, momentum, ZPE",
		Long: `audit reads trajectory files (or every .h5 file in the folders given) and
checks the physics in the stored numbers: energy conservation and force
noise, the time step against the fastest motion, electronic populations
and fewest-switches hops, total momentum, zero-point-energy leakage of X-H
bonds, and, across the ensemble, whether active-state fractions agree with
the mean |c|^2. Each check gives ok, warn, fail, cannot tell (JSON
"unknown": the data cannot tell) or not run (JSON "n/a": the file lacks
what it needs, or the check does not apply), the numbers behind it and
one line of explanation; "ok" never stands for a check that did not run.

Each verdict is also a finding: code A1.. per check (listed below; see also
--json), severity error for fail, warning for warn and note for
ok, unknown and n/a; A10 is a file that could not be audited (the other
files are audited regardless). The text output lists the findings that
need attention; --json lists them all.

A file with several particle groups is audited per group (--group NAME
audits one). On a group without masses or species (both optional in
H5MD) the checks that need them are not run, and say why.

An audit is evidence about the stored numbers, not a certificate that the
simulation behind them is sound.

Each file is first read by a worker process with a memory limit
(--max-memory) and a time limit (--time-limit): a file that crashes the
reader, hangs or needs too much memory there is reported (X1, X2, X3),
left out of the ensemble, and the other files are audited.

Exit status: 0 no failed check (or --no-fail), 1 a check failed or a
file could not be audited, 2 usage or I/O error.

Checks (code, name, quantity):
` + checksHelp(),
		Example: "  trajvault audit runs/*.h5\n  trajvault audit --report audit.html deposit/h5",
		Args: func(c *cobra.Command, args []string) error {
			if len(args) == 0 {
				return &exitError{exitUsage, errors.New("audit: name trajectory files or folders, e.g. trajvault audit runs/")}
			}
			return nil
		},
		PreRunE: func(c *cobra.Command, args []string) error { return o.iso.check("audit") },
		RunE: func(c *cobra.Command, args []string) error {
			if isolate.IsWorker() {
				return inWorker(args[0], func() error { return runAudit(c.Context(), g, o, args) })
			}
			o.screen = func(files []string) (map[string]finding.Finding, error) {
				return screenFiles(c, o.iso, files, o.jobs, []string{"report", "jobs", "json", "no-fail"}, []string{"--jobs=1", "--json"})
			}
			return runAudit(c.Context(), g, o, args)
		},
	}
	o.AddFlags(c)
	return c
}

// checksHelp lists the registered checks, one per line.
func checksHelp() string {
	var b strings.Builder
	for _, c := range audit.Registry() {
		scope := ""
		if c.Scope == audit.PerEnsemble {
			scope = ", across the ensemble"
		}
		fmt.Fprintf(&b, "  %-4s %-20s %s%s\n", c.Code, c.Name, c.Quantity, scope)
	}
	fmt.Fprintf(&b, "  %-4s %-20s %s\n", audit.FileUnreadable, "(file)", "the file could not be audited")
	return strings.TrimRight(b.String(), "\n")
}

// h5Files expands folders into their .h5 files, sorted.
func h5Files(args []string) ([]string, error) {
	var out []string
	for _, a := range args {
		st, err := os.Stat(a)
		if err != nil {
			return nil, err
		}
		if !st.IsDir() {
			out = append(out, a)
			continue
		}
		m, _ := filepath.Glob(filepath.Join(a, "*.h5"))
		sort.Strings(m)
		if len(m) == 0 {
			return nil, fmt.Errorf("%s: no .h5 files", a)
		}
		out = append(out, m...)
	}
	return out, nil
}

func runAudit(ctx context.Context, g *globals, o auditOptions, args []string) error {
	if ctx == nil {
		ctx = context.Background()
	}
	if o.report != "" {
		if _, err := os.Stat(o.report); err == nil {
			return &exitError{exitUsage, fmt.Errorf("audit: %s already exists; trajvault never overwrites outputs", o.report)}
		}
	}
	files, err := h5Files(args)
	if err != nil {
		return &exitError{exitUsage, fmt.Errorf("audit: %w", err)}
	}
	s := audit.DefaultSettings
	s.Temperature, s.EnergyWarnEV, s.EnergyFailEV = o.temperature, o.energyWarn, o.energyFail
	var crashed map[string]finding.Finding
	if o.screen != nil {
		if crashed, err = o.screen(files); err != nil {
			return &exitError{exitUsage, fmt.Errorf("audit: %w", err)}
		}
	}
	s.Group = o.group
	auditing := newBar(g, "audit", "files")
	rep, err := audit.Ensemble(ctx, withoutFiles(files, crashed), s, o.jobs, auditing)
	auditing.Finish()
	if err != nil {
		return &exitError{exitUsage, fmt.Errorf("audit: %w", err)}
	}
	addCrashed(rep, files, crashed)
	if o.report != "" {
		if err := writeAtomically(o.report, func(f *os.File) error { return rep.WriteHTML(f, toolVersion()) }); err != nil {
			return &exitError{exitUsage, fmt.Errorf("audit: %w", err)}
		}
	}
	failed := finding.Count(rep.Findings, finding.Error) > 0 && !o.noFail
	if o.json {
		// The report is the result; its findings are the envelope's (the
		// nil field hides the report's own).
		result := struct {
			*audit.Report
			Findings []finding.Finding `json:"findings,omitempty"`
		}{Report: rep}
		if err := printEnvelopeOK(g, "audit", !failed, rep.Findings, result); err != nil {
			return err
		}
	} else {
		printAudit(g, rep)
		if o.report != "" {
			fmt.Fprintf(g.stdout, "report: %s\n", o.report)
		}
	}
	if failed {
		return errFindings
	}
	return nil
}

// withoutFiles is files less those in drop, in order.
func withoutFiles(files []string, drop map[string]finding.Finding) []string {
	var keep []string
	for _, f := range files {
		if _, ok := drop[f]; !ok {
			keep = append(keep, f)
		}
	}
	return keep
}

// addCrashed puts the files whose worker failed back into the report, in
// their place among files: a failed trajectory that says why, and its
// finding (X1-X3).
func addCrashed(rep *audit.Report, files []string, crashed map[string]finding.Finding) {
	if len(crashed) == 0 {
		return
	}
	done := map[string][]*audit.Result{}
	for _, t := range rep.Trajectories {
		done[t.File] = append(done[t.File], t)
	}
	var all []*audit.Result
	for _, f := range files {
		if fd, ok := crashed[f]; ok {
			all = append(all, &audit.Result{File: f, Error: fd.Message, Verdict: audit.Fail, Checks: []audit.Check{}})
			rep.Findings = append(rep.Findings, fd)
			rep.Flagged++
			continue
		}
		if len(done[f]) > 0 {
			all = append(all, done[f][0])
			done[f] = done[f][1:]
		}
	}
	rep.Trajectories = all
	rep.Verdict = audit.Fail
}

// writeAtomically writes path through a temporary file in the same folder.
func writeAtomically(path string, fill func(*os.File) error) error {
	tmp, err := os.CreateTemp(filepath.Dir(path), "."+filepath.Base(path)+".partial-*")
	if err != nil {
		return err
	}
	defer os.Remove(tmp.Name())
	if err := fill(tmp); err != nil {
		tmp.Close()
		return err
	}
	if err := tmp.Close(); err != nil {
		return err
	}
	if err := os.Chmod(tmp.Name(), 0o644); err != nil {
		return err
	}
	return os.Link(tmp.Name(), path)
}

// printAudit prints lines of at most 80 columns: a verdict line per
// trajectory followed by its findings that need attention, then the
// ensemble summary and the caution.
func printAudit(g *globals, rep *audit.Report) {
	var ens []finding.Finding
	for _, f := range rep.Attention() {
		if f.File == "" {
			ens = append(ens, f)
		}
	}
	groups := map[string]int{} // particle groups audited per file
	for _, t := range rep.Trajectories {
		groups[t.File]++
	}
	printed := map[string]bool{} // a file named twice prints its findings once
	for _, t := range rep.Trajectories {
		name := filepath.Base(t.File)
		if groups[t.File] > 1 || (t.Group != "" && t.Group != trajfile.Group) {
			name += " [" + t.Group + "]" // reported per particle group
		}
		line := fmt.Sprintf("%-5s %s (%s)", t.Verdict.Label(), name, plural(t.Frames, "frame"))
		if n := t.NotRun(); n > 0 {
			// "ok" covers only the checks that ran (issue 13).
			line = fmt.Sprintf("%-5s %s (%s; %d of %d checks not run)", t.Verdict.Label(), name, plural(t.Frames, "frame"), n, len(t.Checks))
		}
		fmt.Fprintln(g.stdout, line)
		if printed[name] {
			continue
		}
		printed[name] = true
		for _, f := range t.Attention() {
			f.File = filepath.Base(f.File) // the line above names the file
			wrap(g, f.String(), "  ")
		}
	}
	for _, f := range ens {
		wrap(g, f.String(), "")
	}
	fmt.Fprintln(g.stdout, "ensemble:")
	for _, c := range rep.Ensemble {
		wrap(g, fmt.Sprintf("%-5s %s: %s", c.Verdict.Label(), c.Name, c.Summary), "  ")
	}
	verdict := rep.Verdict.Label()
	notRun := 0
	for _, c := range rep.Ensemble {
		if c.Verdict == audit.NA {
			notRun++
		}
	}
	if notRun > 0 && rep.Verdict != audit.NA {
		// The verdict covers the checks that ran, and says so.
		verdict += fmt.Sprintf(" for the checks that ran (%d of %d ensemble lines not run)", notRun, len(rep.Ensemble))
	}
	wrap(g, fmt.Sprintf("%d of %d trajectories flagged; verdict %s", rep.Flagged, len(rep.Trajectories), verdict), "")
	wrap(g, audit.Caution, "")
}

// wrap prints s in lines of at most 80 columns, indented, continuation
// lines two columns further. It breaks only at spaces and keeps the
// spacing inside each line (the aligned columns of a finding); a word
// longer than a line stays whole.
func wrap(g *globals, s, indent string) {
	const width = 80
	prefix := indent
	for s = strings.TrimSpace(s); s != ""; prefix = indent + "  " {
		room := width - len(prefix)
		if len(s) <= room {
			fmt.Fprintln(g.stdout, prefix+s)
			return
		}
		cut := strings.LastIndex(s[:room+1], " ")
		if cut <= 0 {
			if cut = strings.Index(s, " "); cut < 0 {
				fmt.Fprintln(g.stdout, prefix+s)
				return
			}
		}
		fmt.Fprintln(g.stdout, prefix+strings.TrimRight(s[:cut], " "))
		s = strings.TrimLeft(s[cut:], " ")
	}
}
