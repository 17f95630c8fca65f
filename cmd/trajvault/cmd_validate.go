package main

import (
	"encoding/json"
	"errors"
	"fmt"
	"strings"

	"github.com/spf13/cobra"

	"trajvault/validate"
)

type validateOptions struct {
	json    bool
	profile string
	// Set by PreRunE from profile.
	rules  validate.Profile
	funder string
}

func (o *validateOptions) AddFlags(c *cobra.Command) {
	c.Flags().BoolVar(&o.json, "json", false, "print the report as JSON (schema/findings.schema.json); one object per line for several files")
	c.Flags().StringVar(&o.profile, "profile", "", "rules for files: h5md or trajvault (default: as each file claims); for bundles also the funder profile: minimal (default), fair, eu-grant or a JSON Schema file; both: trajvault,fair")
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
		Use:   "validate FILE.h5|BUNDLE [...]",
		Short: "Check trajectory files, or whole deposit bundles",
		Long: `validate checks each file against the H5MD 1.1 rules and the trajvault
layout (schema/layout.md): structure, types and shapes, units, monotone
steps and times, finite values, and the electronic-state module. Every
finding has a stable code (V1.., E1.., and R1.. for the provenance record
of files trajvault made), a severity, the HDF5 path and what to do about
it. Repeats of one rule at one place are folded ("and N more like this").

Profiles (--profile): under h5md a file is held to what the H5MD 1.0/1.1
specification requires (mass, species, observables and units on every
dataset are optional); under trajvault also to trajvault's stricter
layout, its electronic-state module and provenance rules. By default a
file that claims trajvault's layout (its module or provenance record) is
checked under trajvault, any other under h5md; the report names the
profile used. schema/layout.md lists the profile of every rule.

Given a bundle - a BagIt folder, or a .tar.zst or .zip of one, read
without unpacking - it checks completeness and validity per RFC 8493
(every checksum), paths that would leave the bag, every trajectory file,
the RO-Crate and DataCite metadata and a funder profile (--profile
minimal, fair, eu-grant or a JSON Schema file).
Bundle findings have codes B (bag) and M (metadata).

A clean report says the file is well-formed and labelled, not that the
simulation behind it is sound.

Exit status: 0 no errors (warnings and notes allowed), 1 errors found,
2 a file could not be read (missing, empty, not HDF5, truncated).`,
		Example: "  trajvault validate run-001.h5\n  trajvault validate --profile h5md other-writer.h5\n  trajvault validate --profile trajvault,fair bundle\n  trajvault validate --json runs/*.h5",
		Args: func(c *cobra.Command, args []string) error {
			if len(args) == 0 {
				return &exitError{exitUsage, errors.New("validate: name at least one file, e.g. trajvault validate run-001.h5")}
			}
			return nil
		},
		PreRunE: func(c *cobra.Command, args []string) error {
			if err := o.parseProfile(); err != nil {
				return &exitError{exitUsage, fmt.Errorf("validate: %w", err)}
			}
			return nil
		},
		RunE: func(c *cobra.Command, args []string) error { return runValidate(g, o, args) },
	}
	o.AddFlags(c)
	return c
}

func runValidate(g *globals, o validateOptions, files []string) error {
	failed, unread := false, 0
	for _, path := range files {
		var rep *validate.Report
		var err error
		if validate.IsBundle(path) {
			rep, err = validate.Bundle(path, validate.BundleOptions{ToolVersion: toolVersion(), Profile: o.funder, FileProfile: o.rules})
		} else {
			rep, err = validate.File(path, validate.Options{ToolVersion: toolVersion(), Profile: o.rules})
		}
		if err != nil {
			fmt.Fprintf(g.stderr, "trajvault: validate: %v\n", err)
			unread++
			continue
		}
		if !rep.OK() {
			failed = true
		}
		if o.json {
			b, err := json.Marshal(rep)
			if err != nil {
				return err
			}
			fmt.Fprintln(g.stdout, string(b))
			continue
		}
		printReport(g, rep)
	}
	if unread > 0 {
		return errReported
	}
	if failed {
		return errFindings
	}
	return nil
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
	rules := ""
	if rep.Profile != "" {
		rules = ", " + rep.Profile + " profile"
	}
	fmt.Fprintf(g.stdout, "%s: %s, %s (layout %s%s)\n", rep.File, verdict, counts, rep.LayoutVersion, rules)
	for _, f := range rep.Findings {
		fmt.Fprintf(g.stdout, "  %s\n", f)
	}
}

func plural(n int, word string) string {
	if n == 1 {
		return "1 " + word
	}
	return fmt.Sprintf("%d %ss", n, word)
}
