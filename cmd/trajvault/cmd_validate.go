package main

import (
	"encoding/json"
	"errors"
	"fmt"

	"github.com/spf13/cobra"

	"trajvault/validate"
)

type validateOptions struct {
	json    bool
	profile string
}

func (o *validateOptions) AddFlags(c *cobra.Command) {
	c.Flags().BoolVar(&o.json, "json", false, "print the report as JSON (schema/findings.schema.json); one object per line for several files")
	c.Flags().StringVar(&o.profile, "profile", "minimal", "for bundles: funder profile checked on datacite.json: minimal, fair, eu-grant, or a JSON Schema file")
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

Given a bundle - a BagIt folder, or a .tar.zst or .zip of one, read
without unpacking - it checks completeness and validity per RFC 8493
(every checksum), paths that would leave the bag, every trajectory file,
the RO-Crate and DataCite metadata and a funder profile (--profile).
Bundle findings have codes B (bag) and M (metadata).

A clean report says the file is well-formed and labelled, not that the
simulation behind it is sound.

Exit status: 0 no errors (warnings and notes allowed), 1 errors found,
2 a file could not be read (missing, empty, not HDF5, truncated).`,
		Example: "  trajvault validate run-001.h5\n  trajvault validate --json runs/*.h5",
		Args: func(c *cobra.Command, args []string) error {
			if len(args) == 0 {
				return &exitError{exitUsage, errors.New("validate: name at least one file, e.g. trajvault validate run-001.h5")}
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
			rep, err = validate.Bundle(path, validate.BundleOptions{ToolVersion: toolVersion(), Profile: o.profile})
		} else {
			rep, err = validate.File(path, validate.Options{ToolVersion: toolVersion()})
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
	fmt.Fprintf(g.stdout, "%s: %s, %s (layout %s)\n", rep.File, verdict, counts, rep.LayoutVersion)
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
