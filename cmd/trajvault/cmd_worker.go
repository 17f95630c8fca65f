package main

import (
	"encoding/json"
	"fmt"

	"github.com/spf13/cobra"

	"trajvault/internal/isolate"
	"trajvault/validate"
)

// workerUnreadable is the worker's exit status for "this file cannot be
// read at all" (missing, empty, not HDF5): the parent reports it as an
// I/O error of the run (exit 2), as it did before workers. Go's runtime
// uses 2 for fatal errors, so the status must differ from it.
const workerUnreadable = 3

// workerFault, when set (by tests only), runs in the worker before a file
// is read, to plant a crash, a hang or a runaway allocation.
var workerFault func(path string)

// newWorkerCommand is the hidden sub-command that validate starts once per
// file (internal/isolate): it applies the limits it was given, checks one
// file or bundle and writes the report as JSON on stdout.
func newWorkerCommand(g *globals) *cobra.Command {
	var o validateOptions
	var bundle bool
	c := &cobra.Command{
		Use:    "worker-validate PATH",
		Hidden: true,
		Args:   cobra.ExactArgs(1),
		RunE: func(c *cobra.Command, args []string) error {
			if err := isolate.Enter(); err != nil {
				return &exitError{exitUsage, err}
			}
			path := args[0]
			if workerFault != nil {
				workerFault(path)
			}
			if err := o.parseProfile(); err != nil {
				return &exitError{exitUsage, err}
			}
			var rep *validate.Report
			var err error
			if bundle {
				rep, err = validate.Bundle(path, validate.BundleOptions{ToolVersion: toolVersion(), Profile: o.funder, FileProfile: o.rules})
			} else {
				rep, err = validate.File(path, validate.Options{ToolVersion: toolVersion(), Profile: o.rules, MaxReadBytes: o.maxRead})
			}
			if err != nil {
				return &exitError{workerUnreadable, fmt.Errorf("validate: %w", err)}
			}
			return json.NewEncoder(g.stdout).Encode(rep)
		},
	}
	c.Flags().BoolVar(&bundle, "bundle", false, "the path is a bundle")
	c.Flags().StringVar(&o.profile, "profile", "", "rule and funder profiles, as validate takes them")
	c.Flags().Int64Var(&o.maxRead, "max-read", 0, "read budget in bytes")
	return c
}
