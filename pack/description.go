package pack

import (
	"fmt"
	"sort"
	"strings"

	"trajvault/ingest"
	"trajvault/internal/bagit"
	"trajvault/internal/trajfile"
	"trajvault/schema"
)

// dataDescription writes the bundle's README.md: what the data are, who made
// them, how they were produced, how to read them, units, one row per
// trajectory, the audit summary and the plots.
func dataDescription(conv []Converted, sums []*trajfile.Summary, o BundleOptions) string {
	d := o.Deposit
	var b strings.Builder
	w := func(format string, args ...any) { fmt.Fprintf(&b, format, args...) }
	w("# %s\n\n%s\n\n", d.Title, d.Description)
	var names []string
	for _, c := range d.Creators {
		s := c.Name
		if c.ORCID != "" {
			s += " (https://orcid.org/" + c.ORCID + ")"
		}
		if c.Affiliation != "" {
			s += ", " + c.Affiliation
		}
		names = append(names, s)
	}
	w("**Creators:** %s  \n**Licence:** %s  \n", strings.Join(names, "; "), d.License)
	cite := citation(d, o)
	if d.Identifier != "" {
		w("**DOI:** https://doi.org/%s  \n", d.Identifier)
	}
	if d.RelatedPublication != "" {
		w("**Paper:** https://doi.org/%s  \n", d.RelatedPublication)
	}
	for _, f := range d.Funding {
		w("**Funding:** %s %s %s  \n", f.Funder, f.Programme, f.Grant)
	}
	w("\n## How to cite\n\n%s\n", cite)
	s := d.Simulation
	w("\n## How the data were produced\n\n- Method: %s\n", s.Method)
	if s.ElectronicStructure != "" {
		w("- Electronic structure: %s\n", s.ElectronicStructure)
	}
	if s.States > 0 {
		w("- Electronic states: %d\n", s.States)
	}
	if s.TimeStepFs > 0 {
		w("- Time step: %g fs", s.TimeStepFs)
		if s.ElectronicSubsteps > 0 {
			w(" (%d electronic substeps)", s.ElectronicSubsteps)
		}
		w("\n")
	}
	if s.InitialConditions != "" {
		w("- Initial conditions: %s\n", s.InitialConditions)
	}
	if s.Thermostat != "" {
		w("- Thermostat: %s\n", s.Thermostat)
	}
	w("- Simulation program: %s %s", s.Program.Name, s.Program.Version)
	if s.Program.Commit != "" {
		w(" (commit %s)", s.Program.Commit)
	}
	if missing := unstated(s); len(missing) > 0 {
		w("\n- Not stated by the depositors: %s. Readers cannot judge these runs without them.", strings.Join(missing, ", "))
	}
	w("\n- Converted from text logs by trajvault %s; each file records its sources (SHA-256), recipe and conversion in `/parameters@trajvault_provenance`.\n", o.ToolVersion)
	w("\n## Files\n\n`trajectories/*.h5`: HDF5 in the H5MD 1.1 layout with the units module and the `trajvault_electronic` module (states, populations, hops); every dataset carries its `unit` attribute. Numbers are stored at the precision printed in the original logs.\n\n")
	w("Read positions in Python (h5py):\n\n```python\nimport h5py\nf = h5py.File(\"trajectories/%s\", \"r\")\nx = f[\"particles/all/position/value\"][:]  # [frames][atoms][3]\n```\n\n", firstName(conv))
	w("In Go (gonum.org/v1/hdf5):\n\n```go\nf, _ := hdf5.OpenFile(\"trajectories/%s\", hdf5.F_ACC_RDONLY)\nd, _ := f.OpenDataset(\"particles/all/position/value\") // read with d.Read(&buf)\n```\n\n", firstName(conv))
	w("%s\n\n", timeAxisHelp)
	w("%s\n\n", stateNumbering(conv))
	units := map[string]bool{}
	for _, sm := range sums {
		for _, ds := range sm.Datasets {
			if ds.Unit != "" {
				units[ds.Path[strings.LastIndex(strings.TrimSuffix(ds.Path, "/value"), "/")+1:]+": "+ds.Unit] = true
			}
		}
	}
	var ul []string
	for u := range units {
		ul = append(ul, u)
	}
	sort.Strings(ul)
	w("Units: %s.\n\n", strings.Join(ul, "; "))
	w("| trajectory | atoms | frames | time span | states | hops (accepted/frustrated) | size |\n|---|---:|---:|---|---:|---|---:|\n")
	for i, c := range conv {
		sm := sums[i]
		span := ""
		if len(sm.Groups) > 0 {
			g := sm.Groups[0]
			span = fmt.Sprintf("%g-%g %s", g.TimeFirst, g.TimeLast, g.TimeUnit)
		}
		hops := "-"
		if sm.Hops != nil {
			hops = fmt.Sprintf("%d/%d", sm.Hops.Accepted, sm.Hops.Frustrated)
		}
		atoms, frames := 0, 0
		if len(sm.Groups) > 0 {
			atoms, frames = sm.Groups[0].Atoms, sm.Groups[0].Frames
		}
		w("| %s | %d | %d | %s | %d | %s | %s |\n", strings.TrimPrefix(c.File, schema.PayloadDir+"/"), atoms, frames, span, sm.States, hops, bagit.HumanSize(sm.FileBytes))
	}
	if len(o.AuditLines) > 0 {
		w("\n## Physics audit\n\nAn audit is evidence about the stored numbers, not a certificate that the simulation behind them is sound.\n\n")
		for _, l := range o.AuditLines {
			w("- %s\n", l)
		}
	}
	if len(o.Plots) > 0 {
		w("\n## Plots\n\n")
		var pn []string
		for n := range o.Plots {
			pn = append(pn, n)
		}
		sort.Strings(pn)
		for _, n := range pn {
			w("![%s](plots/%s)\n\n", strings.TrimSuffix(n, ".svg"), n)
		}
	}
	w("\n## Rights\n\nLicensed under %s. Licensing and third-party rights in the data remain the depositors' responsibility.\n", d.License)
	return b.String()
}

// citation is a reference to the data in the usual author-year form
// (DataCite's recommended citation format: Creator (PublicationYear):
// Title. Publisher. Identifier).
func citation(d *Deposit, o BundleOptions) string {
	var names []string
	for _, c := range d.Creators {
		names = append(names, c.Name)
	}
	c := fmt.Sprintf("%s (%d): %s.", strings.Join(names, "; "), o.Now.Year(), d.Title)
	if d.Version != "" {
		c += " Version " + d.Version + "."
	}
	if d.Publisher != "" {
		c += " " + d.Publisher + "."
	}
	if d.Identifier != "" {
		return c + " https://doi.org/" + d.Identifier
	}
	return c + " (Add the DOI the repository assigns.)"
}

// unstated names the method fields a reader needs that deposit.yaml left
// empty.
func unstated(s Simulation) []string {
	var out []string
	for _, f := range []struct{ name, value string }{
		{"electronic structure method", s.ElectronicStructure},
		{"initial conditions", s.InitialConditions},
	} {
		if strings.TrimSpace(f.value) == "" {
			out = append(out, f.name)
		}
	}
	if s.TimeStepFs == 0 {
		out = append(out, "time step")
	}
	return out
}

// timeAxisHelp says how to rebuild the time of every frame with plain
// h5py, in both H5MD clock modes (H5MD 1.1, "time-dependent data").
const timeAxisHelp = "Time of each frame: every time-dependent element (e.g. `particles/all/position`) has `step` and `time`. " +
	"When they are arrays they hold one value per frame. When they are scalars (H5MD fixed mode, for uniformly sampled runs), " +
	"frame i is at `offset + i * value`, with `offset` an attribute of each:\n\n" +
	"```python\nimport numpy as np  # f as above\nt = f[\"particles/all/position/time\"]\n" +
	"n = f[\"particles/all/position/value\"].shape[0]\n" +
	"time = t[()] if t.shape else t.attrs.get(\"offset\", 0) + np.arange(n) * t[()]\n```"

// stateNumbering says how electronic states are numbered in the files and
// whether the logs numbered them otherwise.
func stateNumbering(conv []Converted) string {
	s := "Electronic states are numbered from 0 (the lowest): `observables/active_state`, the columns of `observables/state_energies` and `observables/populations`, and the hop table's `from_state` and `to_state` (`" + strings.TrimPrefix(trajfile.HopsGroup, "/") + "`)."
	for _, c := range conv {
		if c.Report == nil {
			continue
		}
		for _, p := range c.Report.Problems {
			if p.Code == ingest.PStateBase {
				return s + " The original logs numbered them from 1; 1 was subtracted."
			}
		}
	}
	return s
}

func firstName(conv []Converted) string {
	if len(conv) == 0 {
		return "traj.h5"
	}
	return strings.TrimPrefix(conv[0].File, schema.TrajectoriesDir+"/")
}
