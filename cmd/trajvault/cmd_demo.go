package main

import (
	_ "embed"
	"errors"
	"fmt"
	"os"
	"path/filepath"

	"github.com/spf13/cobra"

	"trajvault/internal/demo"
	"trajvault/internal/outdir"
)

type demoOptions struct {
	trajectories  int
	steps         int
	seed          uint64
	text          bool
	json          bool
	stride        int
	decimals      int
	molecules     int
	forceNoise    float64
	unrescaled    int
	restart       int
	truncate      bool
	dt            float64
	ampScale      float64
	couplingScale float64
	epsShift      float64
	startShift    float64
	startLower    bool
}

func (o *demoOptions) AddFlags(c *cobra.Command) {
	c.Flags().IntVar(&o.trajectories, "trajectories", 4, "number of trajectories in the invented ensemble")
	c.Flags().BoolVar(&o.json, "json", false, "print what was written as one JSON document (tool, command, findings, result)")
	c.Flags().IntVar(&o.steps, "steps", demo.DefaultOptions.Steps, "integration steps per trajectory")
	c.Flags().Uint64Var(&o.seed, "seed", 1, "seed of the first trajectory (the others follow)")
	c.Flags().BoolVar(&o.text, "text", false, "write the legacy text logs (one folder per trajectory, and the recipe that reads them, DIR/recipe.yaml) instead of HDF5 files")
	c.Flags().IntVar(&o.stride, "stride", 1, "with --text: write every n-th step")
	c.Flags().IntVar(&o.decimals, "decimals", 8, "with --text: decimals of the positions")
	c.Flags().Float64Var(&o.dt, "dt", demo.DefaultOptions.DtFs, "integration step in fs (a step too large for the model is a fault the audit sees)")
	c.Flags().Float64Var(&o.ampScale, "amplitude-scale", 1, "fault: scale the stored amplitudes (1.01 breaks the normalisation by 2 %)")
	c.Flags().Float64Var(&o.forceNoise, "force-noise", 0, "fault: Gaussian force noise (hartree/bohr per component per step)")
	c.Flags().IntVar(&o.unrescaled, "unrescaled-hops", 0, "fault: every n-th accepted hop keeps the velocities (energy not conserved)")
	c.Flags().IntVar(&o.restart, "restart-overlap", 0, "fault, with --text: repeat this many frames at mid-run, as a restart does")
	c.Flags().BoolVar(&o.truncate, "truncate-last", false, "fault, with --text: cut the last frame of the geometry file")
	c.Flags().Float64Var(&o.couplingScale, "coupling-scale", 1, "scenario: scale the diabatic coupling (0.1-0.3 give hop-rich runs through narrow avoided crossings)")
	c.Flags().Float64Var(&o.epsShift, "diabatic-shift", 0, "scenario: add this to the diabatic offset (hartree; negative narrows the diabatic gap at the start)")
	c.Flags().Float64Var(&o.startShift, "start-stretch", 0, "scenario: move each H atom this far (bohr) outward along its bond before the run")
	c.Flags().BoolVar(&o.startLower, "start-lower", false, "scenario: start on the lower state (thermal dynamics) instead of the upper one")
	c.Flags().IntVar(&o.molecules, "molecules", 1, "with --text: copies of the molecule in the geometry (for benchmarks of larger systems)")
}

// demoRecipe is the recipe of the demo's text logs, written beside them
// (a copy of testdata/recipes/tarnol.yaml; TestDemoRecipe keeps the two
// equal).
//
//go:embed demo_recipe.yaml
var demoRecipe []byte

const demoRecipeName = "recipe.yaml"

func newDemoCommand(g *globals) *cobra.Command {
	var o demoOptions
	c := &cobra.Command{
		Use:   "demo DIR",
		Short: "Write the invented demo ensemble (a model two-state triatomic) into DIR",
		Long: `demo runs fewest-switches surface hopping on an invented two-state model
molecule ("tarnol", the fictional Tarn Valley group's scenario) and writes
one trajectory file per run into DIR, which must not exist yet. The data
are for trying trajvault out; they describe no real molecule.

Exit status: 0 success, 2 usage or I/O error.`,
		Example: "  trajvault demo demo-data",
		Args:    cobra.ExactArgs(1),
		PreRunE: func(c *cobra.Command, args []string) error {
			if o.couplingScale <= 0 {
				return &exitError{exitUsage, errors.New("demo: --coupling-scale must be positive, e.g. --coupling-scale 0.3")}
			}
			if o.trajectories < 1 || o.steps < 1 || o.dt <= 0 {
				return &exitError{exitUsage, errors.New("demo: --trajectories, --steps and --dt must be positive, e.g. --trajectories 4 --steps 2000 --dt 0.05")}
			}
			return nil
		},
		RunE: func(c *cobra.Command, args []string) error { return runDemo(g, o, args[0]) },
	}
	o.AddFlags(c)
	return c
}

func runDemo(g *globals, o demoOptions, dir string) error {
	if _, err := os.Stat(dir); err == nil {
		return &exitError{exitUsage, fmt.Errorf("demo: %s already exists; choose a new directory (trajvault never overwrites outputs)", dir)}
	}
	tmp, err := outdir.Temp(dir)
	if err != nil {
		return &exitError{exitUsage, err}
	}
	for i := 0; i < o.trajectories; i++ {
		opt := demo.DefaultOptions
		opt.Seed, opt.Steps, opt.Tool = o.seed+uint64(i), o.steps, toolVersion()
		opt.DtFs = o.dt
		opt.Faults = demo.Faults{ForceNoise: o.forceNoise, NoRescaleEvery: o.unrescaled, AmplitudeScale: o.ampScale,
			CouplingScale: o.couplingScale, EpsShift: o.epsShift, StartDisplacement: o.startShift, StartLower: o.startLower}
		var err error
		if o.text {
			err = demo.WriteLogs(filepath.Join(tmp, fmt.Sprintf("traj-%03d", i+1)), demo.LogOptions{Options: opt, Stride: o.stride, Decimals: o.decimals, Molecules: o.molecules, RestartOverlap: o.restart, TruncateLast: o.truncate})
		} else {
			err = demo.WriteH5(filepath.Join(tmp, fmt.Sprintf("traj-%03d.h5", i+1)), opt)
		}
		if err != nil {
			os.RemoveAll(tmp)
			return &exitError{exitUsage, fmt.Errorf("demo: %w", err)}
		}
	}
	if o.text {
		// The logs come with their recipe, so that the hint below works
		// for a user who has the program and nothing else.
		if err := os.WriteFile(filepath.Join(tmp, demoRecipeName), demoRecipe, 0o644); err != nil {
			os.RemoveAll(tmp)
			return &exitError{exitUsage, fmt.Errorf("demo: %w", err)}
		}
	}
	if err := os.Rename(tmp, dir); err != nil {
		os.RemoveAll(tmp)
		return &exitError{exitUsage, err}
	}
	kind := "trajectory files"
	if o.text {
		kind = "text-log folders"
	}
	if o.json {
		result := map[string]any{"output": dir, "trajectories": o.trajectories, "kind": kind}
		if o.text {
			result["recipe"] = filepath.Join(dir, demoRecipeName)
		}
		return printEnvelope(g, "demo", nil, result)
	}
	fmt.Fprintf(g.stdout, "wrote %s (%s) to %s\n", plural(o.trajectories, "invented demo trajectory"), kind, dir)
	if o.text {
		fmt.Fprintf(g.stdout, "read them with: trajvault scan --recipe %s %s\n", filepath.Join(dir, demoRecipeName), dir)
	}
	return nil
}
