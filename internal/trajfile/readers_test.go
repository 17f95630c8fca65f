package trajfile_test

// Written for readers (schema/layout.md): a trajvault demo file opens in
// a common Python analysis library's H5MD reader (the Debian package in
// .ci/deps.sh, 2.4.2 on Debian 12; its reader with unit conversion on, and
// through the library's universe object; script testdata/interop/mda_read.py)
// and in h5py with str units, and the times it returns equal ours after
// unit conversion within 1e-12 relative; positions, velocities and forces
// equal ours converted and rounded to float32, the precision the library
// holds them in.

import (
	"encoding/json"
	"math"
	"os"
	"os/exec"
	"slices"
	"strings"
	"testing"

	"trajvault/internal/testenv"
	"trajvault/internal/trajfile"
	"trajvault/internal/units"
)

type mdaFrame struct {
	Time                          float64
	Positions, Velocities, Forces []float64
	Observables                   []string
}

type mdaRead struct {
	Version        string            `json:"mda_version"`
	BaseUnits      map[string]string `json:"base_units"`
	FileUnits      map[string]string `json:"file_units"`
	Frames         []mdaFrame        `json:"frames"`
	UniverseFrames int               `json:"universe_frames"`
	UnitTypes      map[string]string `json:"h5py_unit_types"`
}

func readWithAnalysisLibrary(t *testing.T, path string) mdaRead {
	t.Helper()
	script := testenv.Repo("testdata", "interop", "mda_read.py")
	out, err := exec.Command(testenv.Python(), script, path).Output()
	if err != nil {
		msg := ""
		if ee, ok := err.(*exec.ExitError); ok {
			msg = string(ee.Stderr)
		}
		t.Fatalf("the analysis library could not read %s (install the packages of .ci/deps.sh; make test does): %v\n%s", path, err, msg)
	}
	var r mdaRead
	if err := json.Unmarshal(out, &r); err != nil {
		t.Fatal(err)
	}
	t.Logf("reference reader: analysis library %s", r.Version)
	return r
}

func TestAnalysisLibraryReadsOurFiles(t *testing.T) {
	path := demoFile(t)
	got := readWithAnalysisLibrary(t, path)
	r, err := trajfile.OpenReader(path)
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	if len(got.Frames) != r.T || got.UniverseFrames != r.T {
		t.Fatalf("the library reads %d frames (Universe: %d), the file has %d", len(got.Frames), got.UniverseFrames, r.T)
	}
	// the library converts into its base units (its units module,
	// its table of base units; the library's user guide, "Units"), written in
	// its own notation where "A" is the angstrom; ours are on the right.
	mdaUnits := map[string][2]string{
		"length": {"A", "angstrom"}, "time": {"ps", "ps"},
		"speed": {"A/ps", "angstrom ps-1"}, "force": {"kJ/(mol*A)", "kJ mol-1 angstrom-1"},
	}
	base := map[string]string{}
	for k, u := range mdaUnits {
		if got.BaseUnits[k] != u[0] {
			t.Fatalf("the library's base unit of %s is %q, the test expects %q", k, got.BaseUnits[k], u[0])
		}
		base[k] = u[1]
	}
	clock, err := r.Clock(r.Particle(trajfile.Position))
	if err != nil {
		t.Fatal(err)
	}
	tf, err := units.Factor(clock.TimeUnit, base["time"])
	if err != nil {
		t.Fatal(err)
	}
	const rel = 1e-12
	for i, fr := range got.Frames {
		if want := clock.Times[i] * tf; math.Abs(fr.Time-want) > rel*math.Abs(want) {
			t.Fatalf("frame %d: the library time %.17g, ours %.17g %s", i, fr.Time, want, base["time"])
		}
	}
	for _, c := range []struct {
		el, base string
		pick     func(mdaFrame) []float64
	}{
		{trajfile.Position, "length", func(f mdaFrame) []float64 { return f.Positions }},
		{trajfile.Velocity, "speed", func(f mdaFrame) []float64 { return f.Velocities }},
		{trajfile.Force, "force", func(f mdaFrame) []float64 { return f.Forces }},
	} {
		el := r.Particle(c.el)
		e, err := r.Element(el)
		if err != nil || e == nil {
			t.Fatalf("%s: %v", el, err)
		}
		f, err := units.Factor(e.Unit, base[c.base])
		if err != nil {
			t.Fatal(err)
		}
		raw, err := r.Raw(e, 0, r.T)
		if err != nil {
			t.Fatal(err)
		}
		// the library 2.4 reads into float32 arrays (Timestep.dtype is
		// hard-wired float32) and converts them in place, so its values
		// are ours rounded to float32: each must lie within one float32
		// unit in the last place of float32(float32(ours) x factor).
		w := e.Width()
		worst := 0.0
		for i, fr := range got.Frames {
			v := c.pick(fr)
			if len(v) != w {
				t.Fatalf("%s frame %d: the library gives %d values, want %d", el, i, len(v), w)
			}
			for k, x := range v {
				want := float32(float32(raw[i*w+k]) * float32(f))
				ulp := math.Abs(float64(math.Nextafter32(want, float32(math.Inf(1))) - want))
				d := math.Abs(x-float64(want)) / ulp
				worst = math.Max(worst, d)
				if d > 1 {
					t.Fatalf("%s frame %d value %d: the library %.9g, ours %.17g x %.17g = %.9g in float32", el, i, k, x, raw[i*w+k], f, want)
				}
			}
		}
		t.Logf("%s: %s -> %s, largest difference %.2g float32 ulp", el, e.Unit, base[c.base], worst)
	}
	// Every observable, the module's included, reaches the library's
	// per-frame data (it fails on a nested group under /observables).
	for _, name := range []string{"total_energy", "state_energies", "active_state", "populations", "couplings"} {
		if !slices.Contains(got.Frames[0].Observables, name) {
			t.Errorf("the library frame data lacks observable %s: %v", name, got.Frames[0].Observables)
		}
	}
	for p, typ := range got.UnitTypes {
		if typ != "str" {
			t.Errorf("h5py returns %s@unit as %s, want str", p, typ)
		}
	}
	if len(got.UnitTypes) < 5 {
		t.Errorf("h5py saw %d unit attributes", len(got.UnitTypes))
	}
}

// TestLayoutRecipeReads runs the plain-h5py recipe of schema/layout.md
// ("Reading every dataset with plain h5py") on a demo file, once as
// written (explicit clock) and once with the clock rewritten in fixed
// mode, and compares what it gets with trajvault's reader.
func TestLayoutRecipeReads(t *testing.T) {
	md, err := os.ReadFile(testenv.Repo("schema", "layout.md"))
	if err != nil {
		t.Fatal(err)
	}
	doc := string(md)
	i := strings.Index(doc, "### Reading every dataset with plain h5py")
	if i < 0 {
		t.Fatal("layout.md lacks the h5py recipe")
	}
	start := strings.Index(doc[i:], "```python\n")
	end := strings.Index(doc[i+start+10:], "```")
	if start < 0 || end < 0 {
		t.Fatal("layout.md: recipe block not found")
	}
	recipe := doc[i+start+10 : i+start+10+end]
	check := `
import json, sys
json.dump({"steps": [int(s) for s in steps], "times": [float(x) for x in times],
           "x0": [float(v) for v in x[0].ravel()], "unit": p["position/value"].attrs["unit"],
           "e_shape": list(e.shape), "active": [int(a) for a in active], "hops": len(hops["step"])}, sys.stdout)
`
	for _, fixed := range []bool{false, true} {
		path := demoFile(t)
		if fixed {
			// Rewrite the shared clock in H5MD fixed mode with h5py.
			fix := `
import sys, h5py, numpy as np
f = h5py.File(sys.argv[1], "a")
p = f["particles/all/position"]
st, tm = p["step"][:], p["time"][:]
for g in ["particles/all/position", "particles/all/velocity", "particles/all/force"] + ["observables/" + k for k in f["observables"]]:
    del f[g + "/step"], f[g + "/time"]
p["step"] = np.int64(st[1] - st[0]); p["step"].attrs["offset"] = st[0]
p["time"] = tm[1] - tm[0]; p["time"].attrs["offset"] = tm[0]; p["time"].attrs["unit"] = "fs"
for g in ["particles/all/velocity", "particles/all/force"] + ["observables/" + k for k in f["observables"]]:
    f[g + "/step"] = p["step"]; f[g + "/time"] = p["time"]
f.close()
`
			if out, err := exec.Command(testenv.Python(), "-c", fix, path).CombinedOutput(); err != nil {
				t.Fatalf("h5py rewrite: %v\n%s", err, out)
			}
		}
		script := strings.Replace(recipe, `"traj-001.h5"`, "sys.argv[1]", 1) + check
		out, err := exec.Command(testenv.Python(), "-c", "import sys\n"+script, path).Output()
		if err != nil {
			t.Fatalf("fixed %v: the layout.md recipe fails: %v", fixed, err)
		}
		var got struct {
			Steps  []int64
			Times  []float64
			X0     []float64
			Unit   string
			EShape []int `json:"e_shape"`
			Active []int
			Hops   int
		}
		if err := json.Unmarshal(out, &got); err != nil {
			t.Fatal(err)
		}
		r, err := trajfile.OpenReader(path)
		if err != nil {
			t.Fatal(err)
		}
		c, err := r.Clock(r.Particle(trajfile.Position))
		if err != nil {
			t.Fatal(err)
		}
		if c.Fixed != fixed || !slices.Equal(got.Steps, c.Steps) || len(got.Times) != len(c.Times) {
			t.Fatalf("fixed %v (reader: %v): recipe steps %d, reader %d", fixed, c.Fixed, len(got.Steps), len(c.Steps))
		}
		for k := range c.Times {
			if math.Abs(got.Times[k]-c.Times[k]) > 1e-12*math.Max(1, math.Abs(c.Times[k])) {
				t.Fatalf("fixed %v: time %d: recipe %.17g, reader %.17g", fixed, k, got.Times[k], c.Times[k])
			}
		}
		hops, _ := r.Hops()
		act, _, _ := r.Values(trajfile.ActiveState, "")
		r.Close()
		if got.Hops != len(hops) || len(got.Active) != len(act) || got.Unit != "angstrom" || len(got.EShape) != 2 {
			t.Errorf("fixed %v: recipe read %d hops, %d active states, unit %q, energies %v; reader %d, %d", fixed, got.Hops, len(got.Active), got.Unit, got.EShape, len(hops), len(act))
		}
	}
}
