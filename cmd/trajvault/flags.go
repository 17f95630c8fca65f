package main

import (
	"fmt"
	"strconv"
	"strings"

	"github.com/spf13/cobra"

	"trajvault/ingest"
	"trajvault/internal/quantity"
)

// readFlags are the options shared by scan and convert.
type readFlags struct {
	recipe string
	units  []string
	dt     float64
	// unitsOverFile lets --unit (or the recipe) replace a unit the
	// files write; without it a different unit is refused (exit 2).
	unitsOverFile bool
}

func (o *readFlags) AddFlags(c *cobra.Command) {
	c.Flags().StringVar(&o.recipe, "recipe", "", "recipe file (YAML) saying which files, columns and units the logs have (trajvault demo --text writes one to copy)")
	c.Flags().StringArrayVar(&o.units, "unit", nil, "unit of a kind of quantity the logs do not state, e.g. --unit position=angstrom (kinds: "+quantity.KindNames()+")")
	c.Flags().BoolVar(&o.unitsOverFile, "units-over-file", false, "let --unit (or the recipe) replace a different unit a file writes, when the file's label is wrong (recorded in the file); without it such a conflict is refused")
	c.Flags().Float64Var(&o.dt, "dt", 0, "time per step, in the time unit, when the logs give no times (with --unit time=fs)")
}

func (o *readFlags) options() (ingest.Options, error) {
	opt := ingest.Options{Units: map[string]string{}, Dt: o.dt, UnitsOverFile: o.unitsOverFile}
	for _, u := range o.units {
		k, v, ok := strings.Cut(u, "=")
		_, known := quantity.LookupKind(k)
		if !ok || !known || strings.TrimSpace(v) == "" {
			return opt, &exitError{exitUsage, fmt.Errorf("--unit %q: expected KIND=UNIT with KIND one of %s, e.g. --unit position=angstrom", u, quantity.KindNames())}
		}
		opt.Units[k] = v
	}
	if o.dt < 0 {
		return opt, &exitError{exitUsage, fmt.Errorf("--dt must be positive, e.g. --dt 0.5 --unit time=fs")}
	}
	if o.recipe != "" {
		rc, err := ingest.LoadRecipe(o.recipe)
		if err != nil {
			return opt, &exitError{exitUsage, err}
		}
		opt.Recipe = rc
	}
	return opt, nil
}

// parseTolerances reads --tolerance QUANTITY=VALUE flags.
func parseTolerances(list []string) (map[string]float64, error) {
	out := map[string]float64{}
	for _, t := range list {
		k, v, ok := strings.Cut(t, "=")
		x, err := strconv.ParseFloat(v, 64)
		if !ok || err != nil || x <= 0 {
			return nil, &exitError{exitUsage, fmt.Errorf("--tolerance %q: expected QUANTITY=BOUND with a positive bound in the quantity's unit, e.g. --tolerance position=1e-5", t)}
		}
		out[k] = x
	}
	return out, nil
}
