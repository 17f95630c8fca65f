package ingest

import (
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"sort"

	"trajvault/internal/elements"
	"trajvault/internal/textnum"
	"trajvault/internal/trajfile"
	"trajvault/internal/units"
)

// Problem is something wrong in the logs of a trajectory. Codes are
// stable (README, "scan problems").
type Problem struct {
	Code     string `json:"code"`
	Severity string `json:"severity"` // error, warning or note
	File     string `json:"file,omitempty"`
	Line     int    `json:"line,omitempty"`
	Column   int    `json:"column,omitempty"`
	Message  string `json:"message"`
}

// Problem codes.
const (
	PTruncated   = "P1"  // last frame or row cut
	PMissing     = "P2"  // a recipe file pattern matched nothing
	PAtomCount   = "P3"  // atom count changes
	PTime        = "P4"  // time goes backwards
	PRestart     = "P5"  // repeated or overlapping steps (restart)
	PNonFinite   = "P6"  // NaN or Inf
	PLength      = "P7"  // files disagree on frames
	PUnit        = "P8"  // no unit for a quantity
	PUnreadable  = "P9"  // other parse error
	PUnknownFile = "P10" // file not used
	PNoGeometry  = "P11" // no geometry
	PNoTime      = "P12" // no times
	PConflict    = "P13" // two files give the same quantity
)

// FileReport describes one source file after the first pass.
type FileReport struct {
	File      string            `json:"file"`
	Format    string            `json:"format"`
	Records   int               `json:"records"`
	Kept      int               `json:"kept"`
	FirstStep *int64            `json:"first_step,omitempty"`
	LastStep  *int64            `json:"last_step,omitempty"`
	Formats   map[string]string `json:"precision"`
	Hops      int               `json:"hops,omitempty"`

	src       source
	keys      keySeq // kept (index, step); steps are indices when the file has none
	hasSteps  bool
	dropped   [][2]int
	partial   int // record index of a cut last frame (-1 none)
	fmts      map[string]textnum.Format
	units     map[string]string
	maxAbs    map[string]float64
	states    int // per-state columns: highest index + 1, as written
	minState  int // lowest per-state index with a value (-1 none)
	maxActive int
	active    bool
	failed    bool // reading stopped at an error (other problems follow from it)
	// uniform sampling: every record at step s0 + k stride and time
	// t0 + k dt (to a quarter of the printed last digit)
	uniform  bool
	stride   int64
	dt, t0   float64
	s0       int64
	nUniform int
	// times of the first and last kept records, when the file has times
	hasTime             bool
	timeFirst, timeLast float64
}

// TrajReport is the result of scanning one trajectory.
type TrajReport struct {
	Name       string            `json:"name"`
	Files      []*FileReport     `json:"files"`
	Atoms      int               `json:"atoms"`
	Formula    string            `json:"formula,omitempty"`
	Frames     int               `json:"frames"`
	FirstStep  int64             `json:"first_step"`
	LastStep   int64             `json:"last_step"`
	TimeFirst  float64           `json:"time_first"`
	TimeLast   float64           `json:"time_last"`
	TimeStep   float64           `json:"time_per_step,omitempty"`
	States     int               `json:"states"`
	Hops       int               `json:"hops"`
	Units      map[string]string `json:"units"`
	Precision  map[string]string `json:"precision"`
	Quantities []string          `json:"quantities"`
	Problems   []Problem         `json:"problems"`

	traj    *Trajectory
	base    int
	clock   *trajfile.FixedClock
	symbols []string
	masses  []float64
	formats map[string]textnum.Format
	maxAbs  map[string]float64
}

// Options control reading; zero values are the defaults.
type Options struct {
	Recipe *Recipe
	// Units given on the command line (--unit kind=unit); they fill in
	// what neither the files nor the recipe say.
	Units map[string]string
	// DropPartial drops a cut last frame instead of failing.
	DropPartial bool
	// Dt is the time per step, in Units["time"], when the logs give no
	// times.
	Dt float64
}

func (t *TrajReport) add(code, sev, file string, line int, format string, args ...any) {
	t.Problems = append(t.Problems, Problem{Code: code, Severity: sev, File: file, Line: line, Message: fmt.Sprintf(format, args...)})
}

// Refusal is the first problem that forbids converting this trajectory,
// or nil: any error, except a cut last frame when dropPartial is set
// (that frame is then dropped and recorded). Convert and pack refuse by
// this one rule, all or nothing.
func (t *TrajReport) Refusal(dropPartial bool) *Problem {
	for i, p := range t.Problems {
		if p.Severity == "error" && !(dropPartial && p.Code == PTruncated) {
			return &t.Problems[i]
		}
	}
	return nil
}

// Errors counts problems of severity error.
func (t *TrajReport) Errors() int {
	n := 0
	for _, p := range t.Problems {
		if p.Severity == "error" {
			n++
		}
	}
	return n
}

// Findings counts errors and warnings (notes excluded).
func (t *TrajReport) Findings() int {
	n := 0
	for _, p := range t.Problems {
		if p.Severity != "note" {
			n++
		}
	}
	return n
}

func openSources(t *Trajectory, opt Options) ([]source, []string, error) {
	var srcs []source
	var kinds []string
	if t.Geometry != "" {
		s, err := openXYZ(t.Geometry, opt.Recipe)
		if err != nil {
			return nil, nil, err
		}
		srcs, kinds = append(srcs, s), append(kinds, "xyz")
	}
	for i, p := range t.Tables {
		s, err := openTable(p, t.tableSpec[i])
		if err != nil {
			for _, s := range srcs {
				s.close()
			}
			return nil, nil, err
		}
		srcs, kinds = append(srcs, s), append(kinds, "table")
	}
	for i, p := range t.Logs {
		s, err := openLog(p, t.logSpec[i])
		if err != nil {
			for _, s := range srcs {
				s.close()
			}
			return nil, nil, err
		}
		srcs, kinds = append(srcs, s), append(kinds, "log")
	}
	return srcs, kinds, nil
}

// Scan reads every file of a trajectory once (streaming) and reports what
// it holds and what is wrong with it.
func Scan(t *Trajectory, opt Options) *TrajReport {
	rep := &TrajReport{Name: t.Name, traj: t, Units: map[string]string{}, Precision: map[string]string{},
		formats: map[string]textnum.Format{}, maxAbs: map[string]float64{}, Quantities: []string{}, Problems: []Problem{}}
	for _, m := range t.missing {
		rep.add(PMissing, "error", t.Dir, 0, "no file matches the recipe pattern %q", m)
	}
	for _, u := range t.unknown {
		rep.add(PUnknownFile, "note", u, 0, "not read (not .xyz/.extxyz or a table extension); name it in a recipe to use it")
	}
	if t.Geometry == "" {
		rep.add(PNoGeometry, "error", t.Dir, 0, "no geometry file (.xyz or extended .xyz): a trajectory needs positions")
	}
	// Files that are not tables are skipped with a problem, not fatal.
	var kept []string
	var keptSpec []*TableSpec
	for i, p := range t.Tables {
		f, err := os.Open(p)
		if err == nil {
			_, err = NewTableReader(f, p)
			f.Close()
		}
		if err != nil {
			rep.add(PUnknownFile, "note", p, 0, "not read as a table: %v", err)
			continue
		}
		kept, keptSpec = append(kept, p), append(keptSpec, t.tableSpec[i])
	}
	t.Tables, t.tableSpec = kept, keptSpec
	srcs, kinds, err := openSources(t, opt)
	if err != nil {
		rep.add(PUnreadable, "error", t.Dir, 0, "%v", err)
		return rep
	}
	for i, s := range srcs {
		fr := scanSource(rep, s, kinds[i], opt)
		rep.Files = append(rep.Files, fr)
		s.close()
	}
	rep.combine(opt)
	return rep
}

func scanSource(rep *TrajReport, s source, kind string, opt Options) *FileReport {
	fr := &FileReport{File: s.file(), Format: kind, src: s, partial: -1, maxAbs: map[string]float64{}, minState: -1, maxActive: -1}
	idx := 0
	var prevTime float64
	var prevStep int64
	havePrev := false
	atoms := 0
	for ; ; idx++ {
		rec, err := s.next()
		if err == io.EOF {
			break
		}
		if err != nil {
			code, msg := PUnreadable, err.Error()
			switch {
			case errors.Is(err, ErrTruncated):
				code, msg = PTruncated, msg+"; convert with --drop-partial to drop it"
				fr.partial = idx
			case errors.Is(err, ErrNonFinite):
				code = PNonFinite
			case errors.Is(err, ErrAtomCount):
				code = PAtomCount
			}
			p := Problem{Code: code, Severity: "error", File: s.file(), Message: msg}
			var pe *ParseError
			if errors.As(err, &pe) {
				p.Line, p.Column, p.Message = pe.Line, pe.Column, pe.Err.Error()
				if code == PTruncated {
					p.Message += "; convert with --drop-partial to drop it"
				}
			}
			rep.Problems = append(rep.Problems, p)
			fr.failed = code != PTruncated
			break
		}
		if rec.frame != nil {
			if atoms == 0 {
				atoms = len(rec.frame.Symbols)
				if len(rep.symbols) == 0 {
					rep.symbols = append([]string(nil), rec.frame.Symbols...)
					if c := rec.frame.Column("masses"); c != nil {
						rep.masses = append([]float64(nil), c.Values...)
					} else if c := rec.frame.Column("mass"); c != nil {
						rep.masses = append([]float64(nil), c.Values...)
					}
				}
			}
			for _, c := range rec.frame.Columns {
				q := s.(*xyzSource).columnQuantity(c.Name)
				for _, v := range c.Values {
					fr.maxAbs[q] = math.Max(fr.maxAbs[q], math.Abs(v))
				}
			}
		}
		for i, ok := range rec.hasScalar {
			if ok {
				fr.maxAbs[scalarNames[i]] = math.Max(fr.maxAbs[scalarNames[i]], math.Abs(rec.scalar[i]))
			}
		}
		if rec.hasTime {
			fr.maxAbs["time"] = math.Max(fr.maxAbs["time"], math.Abs(rec.time))
		}
		for _, v := range rec.stateE {
			if !math.IsNaN(v) { // NaN marks a state index the log skipped
				fr.maxAbs["state_energy"] = math.Max(fr.maxAbs["state_energy"], math.Abs(v))
			}
		}
		for _, v := range rec.pop {
			if !math.IsNaN(v) {
				fr.maxAbs["population"] = math.Max(fr.maxAbs["population"], math.Abs(v))
			}
		}
		fr.states = max(fr.states, len(rec.stateE), len(rec.pop))
		for _, v := range [][]float64{rec.stateE, rec.pop} {
			for k, x := range v {
				if !math.IsNaN(x) && (fr.minState < 0 || k < fr.minState) {
					fr.minState = k
				}
			}
		}
		if rec.hasTime {
			if !fr.hasTime {
				fr.timeFirst, fr.hasTime = rec.time, true
			}
			fr.timeLast = rec.time
		}
		if rec.hasActive {
			fr.active = true
			fr.maxActive = max(fr.maxActive, rec.active)
		}
		key := int64(idx)
		if rec.hasStep {
			fr.hasSteps = true
			key = rec.step
		}
		if last, ok := fr.keys.last(); ok && key <= last {
			d := fr.keys.truncateFrom(key)
			fr.dropped = append(fr.dropped, d...)
			n := 0
			for _, r := range d {
				n += r[1] - r[0]
			}
			what := "repeats"
			if n > 1 {
				what = "overlaps"
			}
			rep.add(PRestart, "warning", s.file(), rec.line, "step %d %s %d earlier record(s) (a restart); the later occurrence is kept and the earlier dropped", key, what, n)
		} else if havePrev && rec.hasTime && (!rec.hasStep || rec.step > prevStep) && rec.time < prevTime {
			rep.add(PTime, "error", s.file(), rec.line, "time %g after %g while the step advances: the clock goes backwards; check the log", rec.time, prevTime)
		}
		fr.keys.push(idx, key)
		fr.checkUniform(rec, key, s.timeFormat())
		if rec.hasTime {
			prevTime, prevStep, havePrev = rec.time, rec.step, true
		}
	}
	fr.Records = idx
	fr.Kept = fr.keys.n
	if fr.hasSteps {
		f, _ := fr.keys.first()
		l, _ := fr.keys.last()
		fr.FirstStep, fr.LastStep = &f, &l
	}
	fr.fmts = s.formats()
	fr.Formats = map[string]string{}
	for q, f := range fr.fmts {
		fr.Formats[q] = f.String()
	}
	fr.units = s.units()
	if kind == "xyz" {
		rep.Atoms = atoms
	}
	fr.Hops = len(s.hops())
	rep.Hops += fr.Hops
	return fr
}

// stateBase is how the logs number electronic states: as the recipe
// says, else 1 when no per-state column or group has index 0 (detected
// and reported as a note), else 0.
func (t *TrajReport) stateBase(opt Options) int {
	if opt.Recipe != nil && opt.Recipe.StateBase != nil {
		return *opt.Recipe.StateBase
	}
	return t.base
}

// unitFor resolves the unit of a kind: the files, then the recipe, then
// the command line.
func (t *TrajReport) unitFor(kind string, opt Options) string {
	for _, f := range t.Files {
		if u := f.units[kind]; u != "" {
			return u
		}
	}
	if opt.Recipe != nil {
		u := opt.Recipe.Units
		if v := map[string]string{"position": u.Position, "velocity": u.Velocity, "force": u.Force, "momentum": u.Momentum,
			"mass": u.Mass, "time": u.Time, "energy": u.Energy}[kind]; v != "" {
			return v
		}
	}
	return opt.Units[kind]
}

var unitDims = map[string]units.Dim{
	"position": units.Length, "velocity": units.Velocity, "force": units.Force, "momentum": units.Momentum,
	"mass": units.Mass, "time": units.Time, "energy": units.Energy,
}

// combine checks the files against each other and fills the summary.
func (t *TrajReport) combine(opt Options) {
	var geo *FileReport
	for _, f := range t.Files {
		if f.Format == "xyz" {
			geo = f
		}
		for q, fm := range f.fmts {
			if old, ok := t.formats[q]; ok {
				t.formats[q] = old.Merge(fm)
			} else {
				t.formats[q] = fm
			}
		}
		for q, v := range f.maxAbs {
			t.maxAbs[q] = math.Max(t.maxAbs[q], v)
		}
	}
	givers := map[string][]string{}
	for _, f := range t.Files {
		for q := range f.fmts {
			if q != "step" && q != "time" {
				givers[q] = append(givers[q], f.File)
			}
		}
	}
	var given []string
	for q := range givers {
		given = append(given, q)
	}
	sort.Strings(given)
	for _, q := range given {
		if g := givers[q]; len(g) > 1 {
			t.add(PConflict, "warning", g[1], 0, "%s is also given by %s; the first file's values are used (map the column to ignore in a recipe to silence this)", q, g[0])
		}
	}
	minState := -1
	for _, f := range t.Files {
		if f.minState >= 0 && (minState < 0 || f.minState < minState) {
			minState = f.minState
		}
	}
	if minState == 1 && (opt.Recipe == nil || opt.Recipe.StateBase == nil) {
		t.base = 1
		t.add(PUnknownFile, "note", "", 0, "states are numbered from 1 in the logs (no state 0 found); set state_base in a recipe if that is wrong")
	}
	base := t.stateBase(opt)
	for _, f := range t.Files {
		t.States = max(t.States, f.states-base, f.maxActive+1-base)
	}
	for q, fm := range t.formats {
		t.Precision[q] = fm.String()
		t.Quantities = append(t.Quantities, q)
	}
	sort.Strings(t.Quantities)
	if len(t.symbols) > 0 {
		zs := make([]int, len(t.symbols))
		for i, s := range t.symbols {
			zs[i] = elements.Number(s)
		}
		t.Formula = elements.Formula(zs)
	}
	if geo == nil {
		return
	}
	t.Frames = geo.Kept
	// Which file gives steps: the geometry, else the first table with them.
	clock := geo
	if !geo.hasSteps {
		for _, f := range t.Files {
			if f != geo && f.hasSteps {
				if f.Kept != geo.Kept {
					t.add(PLength, "error", f.File, 0, "%d records but the geometry file has %d frames and no steps to match them by; the files must cover the same frames", f.Kept, geo.Kept)
				}
				clock = f
				break
			}
		}
	}
	for _, f := range t.Files {
		if f == geo || f == clock || f.Kept == 0 || f.failed || geo.failed {
			continue
		}
		if f.hasSteps && clock.hasSteps {
			if ok, miss := contains(&f.keys, &clock.keys); !ok {
				t.add(PLength, "error", f.File, 0, "no record for step %d, which the geometry has; every frame needs its row", miss)
			}
		} else if f.Kept != geo.Kept {
			t.add(PLength, "error", f.File, 0, "%d records for %d frames, and no steps to match them by", f.Kept, geo.Kept)
		}
	}
	if clock.hasSteps {
		t.FirstStep, _ = clock.keys.first()
		t.LastStep, _ = clock.keys.last()
	} else {
		t.FirstStep, t.LastStep = 0, int64(max(geo.Kept-1, 0))
	}
	// The time span comes from the file that has times (geometry first).
	for _, f := range append([]*FileReport{geo}, t.Files...) {
		if f.hasTime {
			t.TimeFirst, t.TimeLast = f.timeFirst, f.timeLast
			break
		}
	}
	if !geo.hasTime && opt.Dt > 0 {
		t.TimeFirst, t.TimeLast = float64(t.FirstStep)*opt.Dt, float64(t.LastStep)*opt.Dt
	}
	if t.LastStep > t.FirstStep {
		t.TimeStep = (t.TimeLast - t.TimeFirst) / float64(t.LastStep-t.FirstStep)
	}
	// A uniformly sampled clock (no restarts, one stride, linear times)
	// is stored in H5MD fixed mode.
	if tf := t.timeFile(geo); tf != nil && tf == clock && tf.uniform && tf.nUniform == tf.Kept && len(tf.dropped) == 0 && tf.Kept > 1 {
		t.clock = &trajfile.FixedClock{StepOffset: tf.s0, StepIncrement: tf.stride, TimeOffset: tf.t0, TimeIncrement: tf.dt}
	}
	// Units for every quantity present.
	need := map[string]bool{"position": true}
	for _, q := range t.Quantities {
		k := unitKind(q)
		if k == "momentum" {
			// Momenta are stored as velocities (p/m, masses in u): the
			// unit asked for is that of the result.
			k = "velocity"
		}
		if unitDims[k] != (units.Dim{}) {
			need[k] = true
		}
	}
	if _, ok := t.formats["time"]; !ok {
		if opt.Dt > 0 {
			need["time"] = true
		} else {
			t.add(PNoTime, "error", geo.File, 0, "no times in the logs (no time column, no time= on comment lines); give the time per step with --dt and --unit time=fs")
		}
	}
	for k := range need {
		u := t.unitFor(k, opt)
		if u == "" {
			t.add(PUnit, "error", "", 0, "no unit for %s: write it in the table header (e.g. %s[%s]), in the recipe (units: %s: ...), or give --unit %s=%s", k, k, exampleUnit[k], k, k, exampleUnit[k])
			continue
		}
		pu, err := units.Parse(u)
		if err != nil {
			t.add(PUnit, "error", "", 0, "unit of %s: %v", k, err)
			continue
		}
		if !pu.Is(unitDims[k]) {
			t.add(PUnit, "error", "", 0, "unit %q given for %s is a %v", u, k, pu.Dim)
			continue
		}
		t.Units[k] = u
	}
}

var exampleUnit = map[string]string{
	"position": "angstrom", "velocity": "angstrom fs-1", "force": "hartree bohr-1", "momentum": "u angstrom fs-1",
	"mass": "u", "time": "fs", "energy": "hartree",
}

// checkUniform follows whether the records so far are uniformly sampled
// in step and time, so that the clock can be stored in H5MD fixed mode.
func (fr *FileReport) checkUniform(rec *record, key int64, tf textnum.Format) {
	if !rec.hasTime || tf.Exp {
		fr.uniform = false
		fr.nUniform = -1
		return
	}
	switch fr.nUniform {
	case -1:
		return
	case 0:
		fr.s0, fr.t0, fr.uniform = key, rec.time, true
	case 1:
		fr.stride, fr.dt = key-fr.s0, rec.time-fr.t0
		if fr.stride <= 0 || fr.dt <= 0 {
			fr.uniform, fr.nUniform = false, -1
			return
		}
	default:
		k := int64(fr.nUniform)
		want := fr.t0 + float64(k)*fr.dt
		if key != fr.s0+k*fr.stride || math.Abs(rec.time-want) > 0.25*tf.Step() {
			fr.uniform, fr.nUniform = false, -1
			return
		}
	}
	fr.nUniform++
}

// timeFile is the file whose times the frames take: the geometry's, else
// the first other file with times.
func (t *TrajReport) timeFile(geo *FileReport) *FileReport {
	if geo.hasTime {
		return geo
	}
	for _, f := range t.Files {
		if f.hasTime {
			return f
		}
	}
	return nil
}
