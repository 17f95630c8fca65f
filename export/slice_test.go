package export_test

// Selections are checked like an outsider would: every selection form is
// exported as CSV, JSON and NumPy .npy, and testdata/h5py_slices.py
// compares the output with h5py's slicing of the same file (Debian
// python3-h5py and python3-numpy; numpy.load reads the .npy files per the
// NumPy documentation of numpy.lib.format). Expected frames of time
// selections are written out from the sampling the test logs were
// printed with (testenv.LegacyLogs: step 5 f, time 0.25 fs per step), not
// from trajvault.

import (
	"encoding/json"
	"errors"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"

	"trajvault/export"
	"trajvault/internal/demo"
	"trajvault/internal/testenv"
	"trajvault/internal/trajfile"
)

// pyCase is one case as h5py_slices.py reads it.
type pyCase struct {
	Name       string               `json:"name"`
	File       string               `json:"file"`
	Clock      string               `json:"clock"`
	Formats    map[string]string    `json:"formats"`
	Frames     map[string]any       `json:"frames"`
	Atoms      []int                `json:"atoms"`
	States     []int                `json:"states"`
	Quantities map[string][2]string `json:"quantities"`
	Hops       *string              `json:"hops"`
}

// slice is a Python slice [start, stop, step]; nil is an open end.
func slice(v ...any) map[string]any { return map[string]any{"slice": v} }

// kinds and paths of the quantities, as the layout documents them
// (schema/layout.md).
func quantityPaths(group string) map[string][2]string {
	return map[string][2]string{
		"position":         {trajfile.Particle(group, trajfile.Position), "atom"},
		"velocity":         {trajfile.Particle(group, trajfile.Velocity), "atom"},
		"force":            {trajfile.Particle(group, trajfile.Force), "atom"},
		"kinetic_energy":   {trajfile.KineticEnergy, "frame"},
		"potential_energy": {trajfile.PotentialEnergy, "frame"},
		"total_energy":     {trajfile.TotalEnergy, "frame"},
		"active_state":     {trajfile.ActiveState, "frame"},
		"state_energies":   {trajfile.StateEnergies, "state"},
		"populations":      {trajfile.Populations, "state"},
		"amplitudes":       {trajfile.Amplitudes, "reim"},
		"couplings":        {trajfile.Couplings, "pair"},
	}
}

type sliceCase struct {
	name   string
	file   string
	group  string
	sel    export.Selection
	frames map[string]any // what h5py is asked for
	atoms  []int
	states []int
	hops   bool
}

func TestSelectionsMatchH5py(t *testing.T) {
	legacyDir := testenv.LegacyLogs(t, 300) // 5 atoms C H H H H, 3 states
	legacy := convertDir(t, legacyDir)
	demoH5 := filepath.Join(t.TempDir(), "demo.h5") // amplitudes, couplings, hops
	o := demo.DefaultOptions
	o.Steps = 3000
	if err := demo.WriteH5(demoH5, o); err != nil {
		t.Fatal(err)
	}
	foreign := filepath.Join(t.TempDir(), "foreign.h5")
	if out, err := exec.Command(testenv.Python(), "testdata/h5py_foreign.py", foreign).CombinedOutput(); err != nil {
		t.Fatalf("h5py_foreign.py: %v\n%s", err, out)
	}
	all := "position,velocity,force,kinetic_energy,potential_energy,total_energy,active_state,state_energies,populations"
	q := func(s string) []string { return strings.Split(s, ",") }
	cases := []sliceCase{
		{name: "one frame", file: legacy, sel: export.Selection{Frames: "17", Quantities: q(all)}, frames: slice(17, 18, 1)},
		{name: "last frame from the end", file: legacy, sel: export.Selection{Frames: "-1", Quantities: q(all)}, frames: slice(-1, nil, 1)},
		{name: "window", file: legacy, sel: export.Selection{Frames: "100:140", Quantities: q("position,total_energy")}, frames: slice(100, 140, 1)},
		{name: "stride", file: legacy, sel: export.Selection{Frames: "3:290:7", Quantities: q("force,kinetic_energy")}, frames: slice(3, 290, 7)},
		{name: "open start", file: legacy, sel: export.Selection{Frames: ":5", Quantities: q("velocity")}, frames: slice(nil, 5, 1)},
		{name: "open stop", file: legacy, sel: export.Selection{Frames: "250:", Quantities: q("populations")}, frames: slice(250, nil, 1)},
		{name: "every 50th", file: legacy, sel: export.Selection{Frames: "::50", Quantities: q("position,active_state")}, frames: slice(nil, nil, 50)},
		{name: "negative window", file: legacy, sel: export.Selection{Frames: "-20:-10:3", Quantities: q("position")}, frames: slice(-20, -10, 3)},
		// time = 1.25 f fs: [12.5, 25) fs is frames 10..19.
		{name: "time fs", file: legacy, sel: export.Selection{Time: "12.5fs:25fs", Quantities: q(all)}, frames: slice(10, 20, 1)},
		// 3.75 fs is every third frame; the unit on the last part applies to all.
		{name: "time ps stride", file: legacy, sel: export.Selection{Time: "0.0125:0.05:0.00375ps", Quantities: q("position,total_energy")}, frames: slice(10, 40, 3)},
		{name: "time open end", file: legacy, sel: export.Selection{Time: "360fs:", Quantities: q("total_energy")}, frames: slice(288, nil, 1)},
		{name: "atom range", file: legacy, sel: export.Selection{Frames: "40:60", Atoms: "1-3", Quantities: q("position,velocity,force")}, frames: slice(40, 60, 1), atoms: []int{1, 2, 3}},
		{name: "atom by element", file: legacy, sel: export.Selection{Frames: "5", Atoms: "C", Quantities: q("position")}, frames: slice(5, 6, 1), atoms: []int{0}},
		{name: "atom list mixed", file: legacy, sel: export.Selection{Frames: "0:300:30", Atoms: "4,0-1", Quantities: q("position,force")}, frames: slice(0, 300, 30), atoms: []int{0, 1, 4}},
		{name: "states subset", file: legacy, sel: export.Selection{Frames: "7:9", States: "0,2", Quantities: q("state_energies,populations")}, frames: slice(7, 9, 1), states: []int{0, 2}},
		{name: "demo every quantity", file: demoH5, sel: export.Selection{Frames: "1000:1300:10", Quantities: q(all + ",amplitudes,couplings,hops")}, frames: slice(1000, 1300, 10), hops: true},
		{name: "demo one state", file: demoH5, sel: export.Selection{Frames: "200:2900:100", States: "1", Atoms: "H", Quantities: q("position,amplitudes,couplings,populations,hops")}, frames: slice(200, 2900, 100), atoms: []int{1, 2}, states: []int{1}, hops: true},
		{name: "unchunked sparse", file: foreign, group: "gas", sel: export.Selection{Frames: "::9", Atoms: "Ar", Quantities: q("position,velocity,potential_energy")}, frames: slice(nil, nil, 9), atoms: []int{0, 1}},
		{name: "unchunked window", file: foreign, group: "gas", sel: export.Selection{Frames: "5:17", Quantities: q("position,velocity,potential_energy")}, frames: slice(5, 17, 1)},
		// 0.2 ps + 0.002 ps per frame: [0.21, 0.22) ps is frames 5..9.
		{name: "foreign time", file: foreign, group: "gas", sel: export.Selection{Time: "210:220fs", Quantities: q("potential_energy")}, frames: slice(5, 10, 1)},
	}
	var py []pyCase
	for _, c := range cases {
		group := c.group
		if group == "" {
			group = trajfile.Group
		}
		paths := quantityPaths(trajfile.ParticleGroup(group))
		pc := pyCase{Name: c.name, File: c.file, Clock: paths["position"][0], Formats: map[string]string{},
			Frames: c.frames, Atoms: c.atoms, States: c.states, Quantities: map[string][2]string{}}
		for _, n := range c.sel.Quantities {
			if n == "hops" {
				h := trajfile.HopsGroup
				pc.Hops = &h
				continue
			}
			pc.Quantities[n] = paths[n]
		}
		for _, f := range []string{export.FormatCSV, export.FormatJSON, export.FormatNPY} {
			if f == export.FormatCSV && c.hops {
				continue // hops go to hops.csv; json and npy check them
			}
			dir := filepath.Join(t.TempDir(), f)
			if _, err := export.ExportSelection(c.file, dir, export.Options{Format: f, Sel: c.sel}); err != nil {
				t.Fatalf("%s (%s): %v", c.name, f, err)
			}
			pc.Formats[f] = dir
		}
		py = append(py, pc)
	}
	spec := filepath.Join(t.TempDir(), "cases.json")
	b, _ := json.Marshal(py)
	os.WriteFile(spec, b, 0o644)
	out, err := exec.Command(testenv.Python(), "testdata/h5py_slices.py", spec).Output()
	if err != nil {
		t.Fatalf("h5py_slices.py: %v\n%s", err, out)
	}
	var rep struct {
		Checked int      `json:"checked"`
		Errors  []string `json:"errors"`
		H5py    string   `json:"h5py"`
		Numpy   string   `json:"numpy"`
	}
	if err := json.Unmarshal(out, &rep); err != nil {
		t.Fatalf("%v: %s", err, out)
	}
	t.Logf("h5py %s, numpy %s: %d values compared", rep.H5py, rep.Numpy, rep.Checked)
	for _, e := range rep.Errors {
		t.Error(e)
	}
	if rep.Checked < 10000 {
		t.Errorf("only %d values compared", rep.Checked)
	}
}

// TestSelectedXYZDigits: an extended XYZ window gives back the source
// log's atom lines for the selected frames and atoms, token for token
// (the log is the reference: the printed digits of the original run).
func TestSelectedXYZDigits(t *testing.T) {
	dir := testenv.LegacyLogs(t, 120)
	h5path := convertDir(t, dir)
	out := filepath.Join(t.TempDir(), "x")
	sel := export.Selection{Frames: "30:90:4", Atoms: "H"}
	if _, err := export.ExportSelection(h5path, out, export.Options{Format: export.FormatExtXYZ, Sel: sel}); err != nil {
		t.Fatal(err)
	}
	src := xyzFrames(t, filepath.Join(dir, "geom.extxyz"))
	got := xyzFrames(t, filepath.Join(out, "traj.extxyz"))
	var want [][]string
	for f := 30; f < 90; f += 4 {
		want = append(want, src[f][1:]) // atoms 1-4 are the H atoms
	}
	if len(got) != len(want) {
		t.Fatalf("%d frames exported, want %d", len(got), len(want))
	}
	for i := range want {
		if strings.Join(got[i], "\n") != strings.Join(want[i], "\n") {
			t.Fatalf("frame %d:\ngot  %q\nwant %q", 30+4*i, got[i], want[i])
		}
	}
}

// xyzFrames splits an (extended) XYZ file into frames of atom lines with
// runs of blanks folded.
func xyzFrames(t *testing.T, path string) [][]string {
	t.Helper()
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	lines := strings.Split(strings.ReplaceAll(string(b), "\r", ""), "\n")
	var out [][]string
	for i := 0; i+1 < len(lines); {
		var n int
		if _, err := fmt.Sscan(lines[i], &n); err != nil {
			break
		}
		var fr []string
		for _, l := range lines[i+2 : i+2+n] {
			fr = append(fr, strings.Join(strings.Fields(l), " "))
		}
		out = append(out, fr)
		i += 2 + n
	}
	return out
}

// TestRestartFrame: --frame N writes one frame with positions,
// velocities, active state and amplitudes, as stored (compared with
// h5py's reading of frame N).
func TestRestartFrame(t *testing.T) {
	p := filepath.Join(t.TempDir(), "demo.h5")
	o := demo.DefaultOptions
	o.Steps = 400
	if err := demo.WriteH5(p, o); err != nil {
		t.Fatal(err)
	}
	out := filepath.Join(t.TempDir(), "r")
	if _, err := export.ExportSelection(p, out, export.Options{Format: export.FormatExtXYZ, Sel: export.Selection{Frames: "321"}, Restart: true}); err != nil {
		t.Fatal(err)
	}
	b, err := os.ReadFile(filepath.Join(out, "traj.extxyz"))
	if err != nil {
		t.Fatal(err)
	}
	script := `
import sys, h5py
f = h5py.File(sys.argv[1], "r")
lines = open(sys.argv[2]).read().splitlines()
assert len(lines) == 2 + 3, "one frame of 3 atoms, got %d lines" % len(lines)
head = lines[1]
kv = {}
import shlex
for tok in shlex.split(head):
    k, _, v = tok.partition("=")
    kv[k] = v
assert kv["Properties"] == "species:S:1:pos:R:3:velo:R:3:forces:R:3", kv["Properties"]
assert int(kv["step"]) == 321 and int(kv["frame"]) == 321
assert int(kv["active_state"]) == f["observables/active_state/value"][321]
amp = [float(x) for x in kv["amplitudes"].split()]
assert amp == list(f["observables/amplitudes/value"][321].reshape(-1)), amp
pop = [float(x) for x in kv["populations"].split()]
assert pop == list(f["observables/populations/value"][321]), pop
pos = f["particles/all/position/value"][321]
vel = f["particles/all/velocity/value"][321]
frc = f["particles/all/force/value"][321]
for i, line in enumerate(lines[2:]):
    fs = line.split()
    assert fs[0] == ["O", "H", "H"][i]
    got = [float(x) for x in fs[1:]]
    assert got == list(pos[i]) + list(vel[i]) + list(frc[i]), (i, got)
print("ok")
`
	res, err := exec.Command(testenv.Python(), "-c", script, p, filepath.Join(out, "traj.extxyz")).CombinedOutput()
	if err != nil || strings.TrimSpace(string(res)) != "ok" {
		t.Fatalf("h5py check of the restart frame: %v\n%s\n%s", err, res, b)
	}
}

// TestSelectionErrors: selections outside the data are SelectionErrors
// that say what the file holds.
func TestSelectionErrors(t *testing.T) {
	dir := testenv.LegacyLogs(t, 50)
	h5path := convertDir(t, dir)
	cases := []struct {
		name string
		sel  export.Selection
		want string
	}{
		{"frame beyond the end", export.Selection{Frames: "50"}, "frame 50 is beyond the end; the file has 50 frames, 0..49 (steps 0..245)"},
		{"stop beyond the end", export.Selection{Frames: "10:51"}, "stop 51 is beyond the end"},
		{"negative past start", export.Selection{Frames: "-51"}, "counts back past frame 0"},
		{"empty window", export.Selection{Frames: "20:10"}, "selects no frame"},
		{"zero stride", export.Selection{Frames: "0:10:0"}, "stride must be a positive"},
		{"not a number", export.Selection{Frames: "a:b"}, "is not a whole number"},
		{"time without unit", export.Selection{Time: "1:2"}, "give a time unit"},
		{"time outside", export.Selection{Time: "1ps:2ps"}, "selects no frame; the file's times run 0.000..61.250 fs over 50 frames"},
		{"time not time", export.Selection{Time: "1m:2m"}, "is not a time unit"},
		{"frames and time", export.Selection{Frames: "1", Time: "1fs:2fs"}, "not both"},
		{"unknown atom", export.Selection{Atoms: "7"}, "atom 7 does not exist; the file has 5 atoms, 0..4 (C H H H H)"},
		{"absent element", export.Selection{Atoms: "O"}, "no atom is O"},
		{"not an element", export.Selection{Atoms: "Xx"}, "is neither an atom index"},
		{"unknown quantity", export.Selection{Quantities: []string{"pressure"}}, "unknown quantity; known: position,"},
		{"absent quantity", export.Selection{Quantities: []string{"amplitudes"}}, "the file stores no amplitudes; it stores position, velocity, force"},
		{"unknown state", export.Selection{States: "3"}, "state 3 does not exist; the file has 3 electronic states, 0..2"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			_, err := export.ExportSelection(h5path, filepath.Join(t.TempDir(), "o"), export.Options{Format: export.FormatCSV, Sel: c.sel})
			var se *export.SelectionError
			if !errors.As(err, &se) || !errors.Is(err, export.ErrSelection) {
				t.Fatalf("err = %v, want a SelectionError", err)
			}
			if !strings.Contains(err.Error(), c.want) {
				t.Errorf("err = %q, want it to contain %q", err, c.want)
			}
		})
	}
}

// TestCSVAtomsDefault: choosing atoms without naming quantities writes
// their positions (besides the per-frame observables), never nothing.
func TestCSVAtomsDefault(t *testing.T) {
	h5path := convertDir(t, testenv.LegacyLogs(t, 20))
	out := filepath.Join(t.TempDir(), "c")
	if _, err := export.ExportSelection(h5path, out, export.Options{Format: export.FormatCSV, Sel: export.Selection{Atoms: "H", Frames: "2:4"}}); err != nil {
		t.Fatal(err)
	}
	b, err := os.ReadFile(filepath.Join(out, "values.csv"))
	if err != nil {
		t.Fatal(err)
	}
	lines := strings.Split(strings.TrimSpace(string(b)), "\n")
	if len(lines) != 4 || !strings.HasPrefix(lines[1], "frame,step,time[fs],position_1_x[angstrom],") || strings.Contains(lines[1], "position_0_") {
		t.Errorf("values.csv:\n%s", b)
	}
}
