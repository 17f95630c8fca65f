package main

import (
	"errors"
	"fmt"

	"github.com/spf13/cobra"

	"trajvault/export"
)

type exportOptions struct {
	out    string
	format string
}

func (o *exportOptions) AddFlags(c *cobra.Command) {
	c.Flags().StringVarP(&o.out, "output", "o", "", "folder to write (must not exist)")
	c.Flags().StringVar(&o.format, "format", "xyz", "xyz, extxyz (with velocities, forces, energy) or csv (observables per frame)")
}

func newExportCommand(g *globals) *cobra.Command {
	var o exportOptions
	c := &cobra.Command{
		Use:   "export FILE.h5 -o DIR",
		Short: "Write a trajectory file back to text (XYZ, extended XYZ or CSV)",
		Long: `export writes a trajectory file back to text, printing every number in the
precision recorded at conversion, so that converted logs come back digit
for digit; numbers without a recorded precision are printed in the
shortest form that reads back to the same float64.

Exit status: 0 success, 2 usage or I/O error.`,
		Example: "  trajvault export traj-001.h5 -o traj-001-text --format extxyz",
		Args:    cobra.ExactArgs(1),
		PreRunE: func(c *cobra.Command, args []string) error {
			if o.out == "" {
				return &exitError{exitUsage, errors.New("export: name the output folder with -o, e.g. -o traj-001-text")}
			}
			return nil
		},
		RunE: func(c *cobra.Command, args []string) error {
			files, err := export.Export(args[0], o.out, o.format)
			if err != nil {
				return &exitError{exitUsage, err}
			}
			for _, f := range files {
				fmt.Fprintf(g.stdout, "wrote %s/%s\n", o.out, f)
			}
			return nil
		},
	}
	o.AddFlags(c)
	return c
}
