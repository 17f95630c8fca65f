package main

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"sort"
	"strconv"
	"strings"
	"time"

	"github.com/spf13/cobra"

	"trajvault/internal/bagit"
	"trajvault/internal/finding"
	"trajvault/internal/h5"
	"trajvault/internal/isolate"
	"trajvault/validate"
)

type validateOptions struct {
	json    bool
	profile string
	// Set by parseProfile from profile.
	rules  validate.Profile
	funder string
	// Limits of the worker process that reads each file (internal/isolate).
	maxMemoryMiB int64
	timeLimit    time.Duration
	maxRead      int64 // bytes; set from readMiB
	readMiB      int64
	fixityOnly   bool
	digests      []string
}

// Worker defaults: workers read files from disk (an archive's members
// through a temporary file), so what they hold is one read of at most
// the read budget (512 MiB, h5.DefaultMaxReadBytes), HDF5's copy of it
// while converting types, and about 1 GiB the runtimes reserve: 6 GiB of
// address space leaves room for both and for several threads' arenas.
// 10 minutes is far above what a well-formed file of a few GB takes.
const (
	defaultWorkerMemoryMiB = 6 << 10
	defaultWorkerTime      = 10 * time.Minute
	// The Go runtime, HDF5 and their threads reserve about 1 GiB of
	// address space before reading anything (measured here: under 768 MiB
	// a worker cannot start its threads, under 1024 MiB 8 of 30 runs on a
	// small good file ran out, under 1536 MiB none of 90).
	minWorkerMemoryMiB = 1536
)

func (o *validateOptions) AddFlags(c *cobra.Command) {
	c.Flags().BoolVar(&o.json, "json", false, "print one JSON document for the whole run (tool, command, ok, findings, result)")
	c.Flags().StringVar(&o.profile, "profile", "", "rules for files: h5md or trajvault (default: as each file claims); for bundles also the funder profile: minimal (default), fair, eu-grant or a JSON Schema file; both: trajvault,fair")
	c.Flags().Int64Var(&o.maxMemoryMiB, "max-memory", defaultWorkerMemoryMiB, "address space of the process reading each file, in MiB (X3 when reached)")
	c.Flags().DurationVar(&o.timeLimit, "time-limit", defaultWorkerTime, "time allowed for reading each file or bundle, e.g. 90s or 1h (X2 when reached)")
	c.Flags().BoolVar(&o.fixityOnly, "fixity-only", false, "for bundles: check completeness and checksums only, not the files' content nor the metadata")
	c.Flags().StringSliceVar(&o.digests, "digest", nil, "compute only these checksums, e.g. --digest sha256 (the others are listed as not verified)")
	c.Flags().Int64Var(&o.readMiB, "read-budget", h5.DefaultMaxReadBytes>>20, "memory one read of a dataset or attribute may take, in MiB (V42 when a file declares more)")
}

func (o *validateOptions) check() error {
	if err := o.parseProfile(); err != nil {
		return &exitError{exitUsage, fmt.Errorf("validate: %w", err)}
	}
	switch {
	case o.maxMemoryMiB < minWorkerMemoryMiB:
		return &exitError{exitUsage, fmt.Errorf("--max-memory %d: at least %d (MiB), e.g. --max-memory 8192", o.maxMemoryMiB, minWorkerMemoryMiB)}
	case o.timeLimit <= 0:
		return &exitError{exitUsage, fmt.Errorf("--time-limit %v: must be positive, e.g. --time-limit 30m", o.timeLimit)}
	case o.readMiB < 1 || o.readMiB > 1<<30:
		return &exitError{exitUsage, fmt.Errorf("--read-budget %d: between 1 and 2^30 (MiB), e.g. --read-budget 2048", o.readMiB)}
	}
	o.maxRead = o.readMiB << 20
	if len(o.digests) > 0 && !o.fixityOnly {
		return &exitError{exitUsage, errors.New("--digest limits a fixity check: use it with --fixity-only")}
	}
	for _, d := range o.digests {
		if bagit.Algorithms[d] == nil {
			return &exitError{exitUsage, fmt.Errorf("--digest %s: not an algorithm of BagIt manifests here; use sha512, sha256 or md5", d)}
		}
	}
	return nil
}

// parseProfile splits --profile into the rule profile of trajectory files
// and the funder profile of bundles.
func (o *validateOptions) parseProfile() error {
	o.rules, o.funder = validate.ProfileAuto, "minimal"
	if o.profile == "" {
		return nil
	}
	rulesSet, funderSet := false, false
	for _, p := range strings.Split(o.profile, ",") {
		p = strings.TrimSpace(p)
		switch {
		case p == string(validate.ProfileH5MD) || p == string(validate.ProfileTrajvault):
			if rulesSet {
				return fmt.Errorf("--profile %q names two rule profiles; give one of h5md, trajvault", o.profile)
			}
			o.rules, rulesSet = validate.Profile(p), true
		case p == "":
			return fmt.Errorf("--profile %q has an empty entry; e.g. --profile trajvault,fair", o.profile)
		default:
			if funderSet {
				return fmt.Errorf("--profile %q names two funder profiles; give one, e.g. --profile fair", o.profile)
			}
			o.funder, funderSet = p, true
		}
	}
	return nil
}

func newValidateCommand(g *globals) *cobra.Command {
	var o validateOptions
	c := &cobra.Command{
		Use:   "validate FILE.h5|DIR|BUNDLE...",
		Short: "Check trajectory files, or whole deposit bundles",
		Long: `validate checks each file against the H5MD 1.1 rules and the trajvault
layout: structure, types and shapes, units, monotone steps and times,
finite values, and the electronic-state module. Every finding has a
stable code (V1.., E1.., and R1.. for the provenance record of files
trajvault made), a severity, the HDF5 path and what to do about it.
Repeats of one rule at one place are folded ("and N more like this").

Given a bundle - a BagIt folder, or a .tar.zst or .zip of one, read
without unpacking - it checks completeness and validity per RFC 8493
(every checksum), paths that would leave the bag, every trajectory file,
the RO-Crate and DataCite metadata and a funder profile (--profile).
Bundle findings have codes B (bag) and M (metadata).

A folder that is not a bag stands for its .h5 files. Several files,
folders and bundles can be named at once; each gets its report. With
--json the whole run is one JSON document; on a terminal a progress bar
counts the files (never with --quiet or when stderr is piped).

A clean report says the file is well-formed and labelled, not that the
simulation behind it is sound.

Each file or bundle is read by a separate worker process with a memory
limit (--max-memory) and a time limit (--time-limit): a file that crashes
the reader, hangs or needs too much memory gets a finding of its own (X1,
X2, X3) and the run goes on with the next file. Inside a bundle each
trajectory file has a worker of its own too, with the same memory limit
and half the time limit. A dataset or attribute
larger than the read budget (--read-budget) is not read (V42); data that
a file keeps outside itself (external links, external storage, virtual
dataset sources) is never opened (V43).

Exit status: 0 no errors (warnings and notes allowed), 1 errors found
(X1-X3 included), 2 a file could not be read (missing, empty, not HDF5,
truncated) or a usage error.`,
		Example: "  trajvault validate run-001.h5\n  trajvault validate --profile h5md other-writer.h5\n  trajvault validate --profile trajvault,fair bundle\n  trajvault validate --json runs/",
		Args: func(c *cobra.Command, args []string) error {
			if len(args) == 0 {
				return &exitError{exitUsage, errors.New("validate: name at least one file, folder or bundle, e.g. trajvault validate run-001.h5")}
			}
			return nil
		},
		PreRunE: func(c *cobra.Command, args []string) error { return o.check() },
		RunE:    func(c *cobra.Command, args []string) error { return runValidate(c.Context(), g, o, args) },
	}
	o.AddFlags(c)
	return c
}

// validateInputs expands the arguments: a bundle (a BagIt folder or an
// archive of one) and a file stay as given; any other folder stands for
// its .h5 files, sorted, as audit reads it.
func validateInputs(args []string) ([]string, error) {
	var out []string
	for _, a := range args {
		st, err := os.Stat(a)
		if err != nil || !st.IsDir() || validate.IsBundle(a) {
			out = append(out, a) // a missing file is reported by its worker
			continue
		}
		m, _ := filepath.Glob(filepath.Join(a, "*.h5"))
		if len(m) == 0 {
			return nil, fmt.Errorf("%s: a folder with no .h5 files and not a BagIt bag (no %s); name trajectory files, a folder of them or a bundle", a, bagit.DeclarationFile)
		}
		sort.Strings(m)
		out = append(out, m...)
	}
	return out, nil
}

// validateResult is the result of validate --json: each report without
// its findings, which are the envelope's.
type validateResult struct {
	Files      []validateFile   `json:"files"`
	Unreadable []validateUnread `json:"unreadable,omitempty"`
}

type validateFile struct {
	File          string `json:"file"`
	LayoutVersion string `json:"layout_version"`
	Profile       string `json:"profile,omitempty"`
	Errors        int    `json:"errors"`
	Warnings      int    `json:"warnings"`
	Notes         int    `json:"notes,omitempty"`
}

type validateUnread struct {
	File    string `json:"file"`
	Message string `json:"message"`
}

// runValidate checks each file in a worker process of its own (see
// validateOne), one after the other, with a progress bar on a terminal.
// Text reports are printed as they come; --json prints one envelope at
// the end.
func runValidate(ctx context.Context, g *globals, o validateOptions, args []string) error {
	exe, err := os.Executable()
	if err != nil {
		return fmt.Errorf("validate: cannot find this program to start workers: %w", err)
	}
	files, err := validateInputs(args)
	if err != nil {
		return &exitError{exitUsage, fmt.Errorf("validate: %w", err)}
	}
	checking := newBar(g, "validate", "files")
	checking.SetTotal(int64(len(files)))
	defer checking.Finish()
	failed := false
	res := validateResult{Files: []validateFile{}}
	var all []finding.Finding
	for _, path := range files {
		rep, msg, err := validateOne(ctx, exe, o, path)
		if err != nil {
			return err
		}
		checking.Clear() // the bar is drawn again by the next Add
		if rep == nil {
			res.Unreadable = append(res.Unreadable, validateUnread{path, msg})
			if !o.json {
				fmt.Fprintf(g.stderr, "trajvault: validate: %s\n", msg)
			}
			checking.Add(1)
			continue
		}
		if !rep.OK() {
			failed = true
		}
		res.Files = append(res.Files, validateFile{rep.File, rep.LayoutVersion, rep.Profile, rep.Errors, rep.Warnings, rep.Notes})
		for _, f := range rep.Findings {
			// Inside a bundle a finding names the file in the bag; the
			// envelope names it from where the user stands.
			switch {
			case f.File == "":
				f.File = rep.File
			case f.File != rep.File && validate.IsBundle(rep.File):
				f.File = rep.File + "/" + f.File
			}
			all = append(all, f)
		}
		if !o.json {
			printReport(g, rep)
		}
		checking.Add(1)
	}
	checking.Finish()
	if o.json {
		if err := printEnvelopeOK(g, "validate", !failed && len(res.Unreadable) == 0, all, res); err != nil {
			return err
		}
	}
	if len(res.Unreadable) > 0 {
		if o.json {
			// The message is in the envelope; exit status 2 says the rest.
			return &exitError{exitUsage, fmt.Errorf("validate: %s", plural(len(res.Unreadable), "file")+" could not be read")}
		}
		return errReported
	}
	if failed {
		return errFindings
	}
	return nil
}

// validateOne runs the hidden worker-validate command on path under the
// worker limits. It returns the report, or the one-line message of a file
// that cannot be read at all; the error is for the run itself (no worker
// could start, or ctx was cancelled).
func validateOne(ctx context.Context, exe string, o validateOptions, path string) (*validate.Report, string, error) {
	if o.fixityOnly {
		return fixityOne(o, path)
	}
	args := []string{"worker-validate", "--profile", o.profile, "--max-read", strconv.FormatInt(o.maxRead, 10),
		"--max-memory", strconv.FormatInt(o.maxMemoryMiB, 10), "--time-limit", o.timeLimit.String()}
	if validate.IsBundle(path) {
		args = append(args, "--bundle")
	}
	args = append(args, "--", path)
	res, err := isolate.Run(ctx, exe, args, isolate.Limits{Memory: o.maxMemoryMiB << 20, Time: o.timeLimit})
	if err != nil {
		return nil, "", fmt.Errorf("validate %s: %w", path, err)
	}
	if res.Outcome == isolate.Exited && res.ExitCode == workerUnreadable {
		msg := strings.TrimSpace(string(res.Stderr))
		msg = strings.TrimPrefix(msg, "trajvault: validate: ")
		return nil, msg, nil
	}
	if rep := validate.Isolated(path, toolVersion(), res); rep != nil {
		return rep, "", nil
	}
	var rep validate.Report
	if err := json.Unmarshal(res.Stdout, &rep); err != nil {
		// A worker that exits 0 without a report is as broken as one that
		// crashed: a finding for this file, not the end of the run.
		res.Outcome, res.ExitCode = isolate.Exited, 0
		res.Stderr = []byte("no report: " + err.Error())
		return validate.Isolated(path, toolVersion(), res), "", nil
	}
	return &rep, "", nil
}

func printReport(g *globals, rep *validate.Report) {
	verdict := "ok"
	if !rep.OK() {
		verdict = "FAILED"
	}
	counts := plural(rep.Errors, "error") + ", " + plural(rep.Warnings, "warning")
	if rep.Notes > 0 {
		counts += ", " + plural(rep.Notes, "note")
	}
	// What was checked: a fixity-only run read no trajectory file, so it
	// names no layout version.
	checked := "layout " + rep.LayoutVersion
	if rep.LayoutVersion == "" {
		checked = "checksums only"
	}
	if rep.Profile != "" {
		checked += ", " + rep.Profile + " profile"
	}
	// The header line stays whole (a long path is what it is); findings
	// wrap at 80 columns.
	fmt.Fprintf(g.stdout, "%s: %s, %s (%s)\n", rep.File, verdict, counts, checked)
	for _, f := range rep.Findings {
		wrap(g, f.String(), "  ")
	}
}

// plural counts word: "1 file", "2 files", "0 trajectories" (English:
// a consonant and y take -ies, s/x/ch/sh take -es; common practice).
func plural(n int, word string) string {
	if n == 1 {
		return "1 " + word
	}
	switch {
	case strings.HasSuffix(word, "y") && len(word) > 1 && !strings.ContainsAny(word[len(word)-2:len(word)-1], "aeiou"):
		word = word[:len(word)-1] + "ies"
	case strings.HasSuffix(word, "s") || strings.HasSuffix(word, "x") || strings.HasSuffix(word, "ch") || strings.HasSuffix(word, "sh"):
		word += "es"
	default:
		word += "s"
	}
	return fmt.Sprintf("%d %s", n, word)
}

// fixityOne checks a bundle's completeness and checksums in this process:
// no HDF5 file is opened, so there is nothing to isolate, and reading is
// bounded by the bag layer's limits.
func fixityOne(o validateOptions, path string) (*validate.Report, string, error) {
	if !validate.IsBundle(path) {
		return nil, fmt.Sprintf("%s: --fixity-only checks bundles (a BagIt folder, .tar.zst or .zip); for a trajectory file run validate without it", path), nil
	}
	rep, err := validate.Bundle(path, validate.BundleOptions{ToolVersion: toolVersion(), FixityOnly: true, Digests: o.digests})
	if err != nil {
		return nil, fmt.Sprintf("%s: %v", path, err), nil
	}
	// No trajectory file was read: no layout version was checked.
	rep.LayoutVersion = ""
	rep.Profile = ""
	return rep, "", nil
}
