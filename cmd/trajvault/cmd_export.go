package main

import (
	"bytes"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"strconv"
	"strings"

	"github.com/spf13/cobra"

	"trajvault/export"
	"trajvault/internal/trajfile"
)

// selectFlags are the selection options shared by export and inspect
// --values.
type selectFlags struct {
	sel        export.Selection
	quantities string
}

func (o *selectFlags) AddFlags(c *cobra.Command) {
	c.Flags().StringVar(&o.sel.Frames, "frames", "", "frames by index from 0: N or START:STOP[:STRIDE] (STOP excluded, negatives count from the end), e.g. 500000:501000")
	c.Flags().StringVar(&o.sel.Time, "time", "", "frames by time: T0:T1[:DT] with a unit (T1 excluded), e.g. 10fs:20fs or 0:1:0.1ps")
	c.Flags().StringVar(&o.sel.Atoms, "atoms", "", "atoms by index from 0, inclusive range or element, e.g. 0-2,7,H")
	c.Flags().StringVar(&o.quantities, "quantities", "", "comma-separated quantities: "+strings.Join(export.QuantityNames(), ", "))
	c.Flags().StringVar(&o.sel.States, "states", "", "electronic states by index from 0, e.g. 0,1 (subsets state energies, populations, amplitudes, couplings, hops)")
	c.Flags().StringVar(&o.sel.Group, "group", "", "particle group under /particles to read, e.g. water (default: every group)")
}

func (o *selectFlags) selection() export.Selection {
	s := o.sel
	if o.quantities != "" {
		s.Quantities = strings.Split(o.quantities, ",")
	}
	return s
}

type exportOptions struct {
	out    string
	format string
	frame  int
	json   bool
	// convention is export.ConventionStored or export.ConventionASE.
	convention string
	// formatSet says --format was given (not its default).
	formatSet bool
	selectFlags
	iso isolateOptions
}

func (o *exportOptions) AddFlags(c *cobra.Command) {
	c.Flags().StringVarP(&o.out, "output", "o", "", "folder to write, or one file NAME.xyz|.extxyz|.csv|.json (must not exist)")
	c.Flags().StringVar(&o.format, "format", "xyz", "xyz, extxyz (with velocities, forces, energy), csv (observables per frame), json or npy (NumPy arrays, one file per quantity)")
	c.Flags().IntVar(&o.frame, "frame", -1, "write one whole frame (all stored quantities) for a restart, e.g. --frame 5000 --format extxyz")
	c.Flags().StringVar(&o.convention, "convention", export.ConventionStored, "units of the numbers: stored (as converted, digit for digit) or ase (extended XYZ in angstrom, eV, eV/angstrom, u and ASE momenta; implies --format extxyz)")
	c.Flags().BoolVar(&o.json, "json", false, "print what was written as one JSON document (tool, command, findings, result)")
	o.selectFlags.AddFlags(c)
	o.iso.AddFlags(c)
}

func newExportCommand(g *globals) *cobra.Command {
	var o exportOptions
	c := &cobra.Command{
		Use:   "export FILE.h5 -o DIR",
		Short: "Write a trajectory file, or a window of it, as text or NumPy arrays",
		Long: `export writes a trajectory file back to text, printing every number in the
precision recorded at conversion, so that converted logs come back digit
for digit; numbers without a recorded precision are printed in the
shortest form that reads back to the same float64.

Selections (--frames or --time, --atoms, --quantities, --states) write a
window of the file, reading only the chunks that hold it; selection.json
in DIR says what was selected. Indices count from 0. --format npy writes
one NumPy .npy file per quantity (numpy.load reads it without h5py).
--frame N writes frame N whole (positions, velocities, forces, energies,
active state, populations, amplitudes where stored) to restart from.

--convention ase writes extended XYZ in the units Python MD toolkits
read: positions in angstrom, energies in eV (potential energy as
energy=), forces in eV/angstrom, masses in u and momenta (mass x
velocity) in u angstrom per angstrom*sqrt(u/eV), a time unit of
10.1805 fs. Numbers already in those units keep their printed digits
(momenta too, when the file's velocities came from momenta printed in
that unit); converted numbers are printed in the shortest form that
reads back to the same float64.

--group NAME reads that particle group (under /particles); without it a
file with several groups is written one folder per group, DIR/NAME.
Atoms of a group that stores no species are written as X.

The file is read by a worker process with a memory limit (--max-memory)
and a time limit (--time-limit): a file that crashes the reader, hangs or
needs too much memory is reported (X1, X2, X3; exit 1).

Exit status: 0 success, 1 the reader crashed, hung or ran out of memory
(X1-X3), 2 usage or I/O error (including a selection outside the data;
the message says what the file holds).`,
		Example: `  trajvault export traj-001.h5 -o traj-001-text --format extxyz
  trajvault export run.h5 -o window --frames 500000:501000 --atoms 0-2 \
    --quantities position,total_energy --format npy
  trajvault export run.h5 -o restart --frame 5000 --format extxyz
  trajvault export md.h5 -o md.extxyz --convention ase`,
		Args: cobra.ExactArgs(1),
		PreRunE: func(c *cobra.Command, args []string) error {
			if err := o.iso.check("export"); err != nil {
				return err
			}
			if o.out == "" {
				return &exitError{exitUsage, errors.New("export: name the output folder with -o, e.g. -o traj-001-text")}
			}
			switch o.convention {
			case export.ConventionStored:
			case export.ConventionASE:
				if !c.Flags().Changed("format") {
					o.format = export.FormatExtXYZ
				} else if o.format != export.FormatExtXYZ {
					return &exitError{exitUsage, fmt.Errorf("export: --convention ase writes extended XYZ; use --format extxyz (not %s)", o.format)}
				}
			default:
				return &exitError{exitUsage, fmt.Errorf("export: --convention %q: want stored or ase, e.g. --convention ase", o.convention)}
			}
			if c.Flags().Changed("frame") {
				if o.sel.Frames != "" || o.sel.Time != "" {
					return &exitError{exitUsage, errors.New("export: --frame names one frame; drop --frames/--time, e.g. --frame 5000")}
				}
				if o.frame < 0 {
					return &exitError{exitUsage, errors.New("export: --frame must be a frame index from 0, e.g. --frame 5000")}
				}
			}
			return nil
		},
		RunE: func(c *cobra.Command, args []string) error {
			o.formatSet = c.Flags().Changed("format")
			return runIsolated(c, g, o.iso, args[0], args, o.json, func() error {
				return runExport(g, c.Flags().Changed("frame"), o, args[0])
			})
		},
	}
	o.AddFlags(c)
	return c
}

// fileFormats are the formats whose output is one file: -o NAME.EXT
// writes that file rather than a folder.
var fileFormats = map[string]string{".xyz": export.FormatXYZ, ".extxyz": export.FormatExtXYZ, ".csv": export.FormatCSV, ".json": export.FormatJSON}

func runExport(g *globals, restart bool, o exportOptions, in string) error {
	if o.sel.Group == "" {
		if groups, err := trajfile.Groups(in); err == nil && len(groups) > 1 {
			return exportGroups(g, restart, o, in, groups)
		}
	}
	if format, ok := fileFormats[strings.ToLower(filepath.Ext(o.out))]; ok {
		return exportFile(g, restart, o, in, format)
	}
	sel := o.selection()
	var files []string
	var err error
	if sel.Empty() && !restart && o.convention != export.ConventionASE && (o.format == export.FormatXYZ || o.format == export.FormatExtXYZ || o.format == export.FormatCSV) {
		files, err = export.ExportGroup(in, o.out, o.format, o.sel.Group) // the whole group, as converted
	} else {
		if restart {
			sel.Frames = strconv.Itoa(o.frame)
		}
		files, err = export.ExportSelection(in, o.out, export.Options{Format: o.format, Sel: sel, Restart: restart, Convention: o.convention})
	}
	if err != nil {
		return &exitError{exitUsage, fmt.Errorf("export: %w", err)}
	}
	if o.json {
		return printEnvelope(g, "export", nil, map[string]any{"input": in, "output": o.out, "format": o.format, "convention": o.convention, "files": files})
	}
	for _, f := range files {
		fmt.Fprintf(g.stdout, "wrote %s/%s\n", o.out, f)
	}
	return nil
}

// exportGroups writes each particle group of a file with several into
// its own folder OUT/GROUP, reported per group; OUT must not exist and
// is removed again when a group fails.
func exportGroups(g *globals, restart bool, o exportOptions, in string, groups []string) error {
	if _, ok := fileFormats[strings.ToLower(filepath.Ext(o.out))]; ok {
		return &exitError{exitUsage, fmt.Errorf("export: %s has %d particle groups (%s); -o %s names one file: add --group NAME, or give a folder", in, len(groups), strings.Join(groups, ", "), o.out)}
	}
	if err := os.Mkdir(o.out, 0o755); err != nil {
		if errors.Is(err, os.ErrExist) {
			return &exitError{exitUsage, fmt.Errorf("export: %s already exists; trajvault never overwrites outputs", o.out)}
		}
		return &exitError{exitUsage, fmt.Errorf("export: %w", err)}
	}
	var all []string
	quiet := &globals{stdout: &bytes.Buffer{}, stderr: g.stderr}
	for _, name := range groups {
		one := o
		one.sel.Group, one.out, one.json = name, filepath.Join(o.out, name), false
		if err := runExport(quiet, restart, one, in); err != nil {
			os.RemoveAll(o.out)
			return err
		}
		entries, _ := os.ReadDir(one.out)
		for _, e := range entries {
			all = append(all, name+"/"+e.Name())
		}
	}
	if o.json {
		return printEnvelope(g, "export", nil, map[string]any{"input": in, "output": o.out, "format": o.format, "particle_groups": groups, "files": all})
	}
	for _, f := range all {
		fmt.Fprintf(g.stdout, "wrote %s/%s\n", o.out, f)
	}
	return nil
}

// exportFile writes one output file, o.out, in format: export into a
// temporary folder beside it (ours to remove), then link the one data
// file into place, never over an existing file.
func exportFile(g *globals, restart bool, o exportOptions, in, format string) error {
	if o.formatSet && o.format != format {
		return &exitError{exitUsage, fmt.Errorf("export: -o %s names a .%s file but --format is %s; drop one of them", o.out, format, o.format)}
	}
	if _, err := os.Lstat(o.out); err == nil {
		return &exitError{exitUsage, fmt.Errorf("export: %s already exists; trajvault never overwrites outputs", o.out)}
	}
	tmp, err := os.MkdirTemp(filepath.Dir(o.out), ".trajvault-export-*")
	if err != nil {
		return &exitError{exitUsage, fmt.Errorf("export: %w", err)}
	}
	defer os.RemoveAll(tmp)
	folder := o
	folder.out, folder.format, folder.json = filepath.Join(tmp, "out"), format, false
	var quiet bytes.Buffer
	if err := runExport(&globals{stdout: &quiet, stderr: g.stderr}, restart, folder, in); err != nil {
		return err
	}
	entries, err := os.ReadDir(folder.out)
	if err != nil {
		return &exitError{exitUsage, err}
	}
	var data []string
	for _, e := range entries {
		if e.Name() != "selection.json" {
			data = append(data, e.Name())
		}
	}
	if len(data) != 1 {
		return &exitError{exitUsage, fmt.Errorf("export: this selection writes %d files (%s); give a folder name with -o", len(data), strings.Join(data, ", "))}
	}
	if err := os.Link(filepath.Join(folder.out, data[0]), o.out); err != nil {
		return &exitError{exitUsage, fmt.Errorf("export: %w", err)}
	}
	if o.json {
		return printEnvelope(g, "export", nil, map[string]any{"input": in, "output": o.out, "format": format, "convention": o.convention, "files": []string{filepath.Base(o.out)}})
	}
	fmt.Fprintf(g.stdout, "wrote %s\n", o.out)
	return nil
}
