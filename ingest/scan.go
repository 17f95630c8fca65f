package ingest

import (
	"context"
	"errors"
	"fmt"
	"io"
	"math"
	"sort"
	"strings"

	"trajvault/internal/elements"
	"trajvault/internal/finding"
	"trajvault/internal/quantity"
	"trajvault/internal/textnum"
	"trajvault/internal/trajfile"
	"trajvault/internal/units"
	"trajvault/provenance"
)

// Problem codes of scan (README, "Problems scan reports"): one code per
// rule, never reused.
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
	PNoGeometry  = "P11" // geometry needed but absent (per-atom data, or nothing else to store)
	PNoTime      = "P12" // no times
	PConflict    = "P13" // two files give the same quantity
	PStateBase   = "P14" // states numbered from 1 (detected)
	PAmbiguous   = "P15" // a name read by its source's convention (note)
	PNotStored   = "P16" // a column or key read but not stored (note)
	PKinetic     = "P17" // 1/2 m v^2 disagrees with the kinetic-energy column
	PStateCount  = "P18" // number of states from the active states only (note)
)

// FileReport describes one source file after the first pass.
type FileReport struct {
	File      string            `json:"file"`
	Format    SourceKind        `json:"format"`
	Records   int               `json:"records"`
	Kept      int               `json:"kept"`
	FirstStep *int64            `json:"first_step,omitempty"`
	LastStep  *int64            `json:"last_step,omitempty"`
	Formats   map[string]string `json:"precision"`
	Hops      int               `json:"hops,omitempty"`

	reader    *Reader
	hopEvents []hop  // the hop events the source logged (one per hop)
	keys      keySeq // kept (index, step); steps are indices when the file has none
	hasSteps  bool
	dropped   [][2]int
	partial   int // record index of a cut last frame (-1 none)
	fmts      map[string]textnum.Format
	units     map[string]string
	unitAt    map[string]string // where each of units is written
	maxAbs    map[string]float64
	negZeros  map[string]int // values printed as negative zeros ("-0.00"), by quantity
	states    int            // per-state columns: highest index + 1, as written
	minState  int            // lowest per-state index with a value (-1 none)
	maxActive int
	minActive int // lowest active state seen (-1 none)
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
	activity            activeTrack // changes of the active state (P20, matches.go)
	// digest is the file's SHA-256 as the scan read it to its end (nil:
	// not read to the end, or by a reader that does not hash).
	digest *provenance.Source
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
	Problems   []finding.Finding `json:"problems"`
	// ObservablesOnly is set for a run without a geometry file whose
	// records (energies, states) are stored as observables alone, with
	// no particle group (H5MD 1.1 makes particles optional); Frames then
	// counts those records.
	ObservablesOnly bool `json:"observables_only,omitempty"`
	// Overrides lists the file units replaced by given ones
	// (Options.UnitsOverFile), for convert's output and the provenance.
	Overrides []string `json:"unit_overrides,omitempty"`
	// NotStored lists what the files hold that convert does not store,
	// each with its file and reason (also in convert's output and the
	// provenance).
	NotStored []string `json:"not_stored"`

	traj     *Trajectory
	base     int
	clock    *trajfile.FixedClock
	symbols  []string
	masses   []float64
	formats  map[string]textnum.Format
	maxAbs   map[string]float64
	negZeros map[string]int
	// extraWidth is the values per atom of each extra per-atom column
	// (by column name), as first seen.
	extraWidth map[string]int
	// kinetic-energy cross-check: the first frames' sums, by join key
	ke       []*keFrame
	keByKey  map[int64]*keFrame
	geoSteps bool
	// spool holds the records the scan read, for Convert (nil: none).
	spool *spoolFile
}

// Options control reading; zero values are the defaults.
type Options struct {
	Recipe *Recipe
	// Units given on the command line (--unit kind=unit); they fill in
	// what neither the files nor the recipe say. One that differs from a
	// file's own unit is refused (UnitConflictError) unless UnitsOverFile.
	Units map[string]string
	// DropPartial drops a cut last frame instead of failing.
	DropPartial bool
	// Dt is the time per step, in Units["time"], when the logs give no
	// times.
	Dt float64
	// UnitsOverFile lets a unit given in Units (or the recipe) replace a
	// different unit written in a file (its label is wrong); without it
	// that conflict is a UnitConflictError. Each override is recorded
	// (TrajReport.Overrides, provenance).
	UnitsOverFile bool
	// AcceptMismatch turns a failed physics cross-check (P17) from an
	// error into a warning, so that convert goes ahead; the accepted
	// findings are recorded in the provenance.
	AcceptMismatch bool
	// SpoolDir, when set, makes Scan keep every record it parsed in a
	// temporary file (the spool, spool.go) in that folder, so that
	// Convert replays the records instead of parsing the text again.
	// Give the output's folder (not /tmp: the spool holds 3 to 8 bytes
	// per number, about a third of the text for numbers printed in
	// decimals). Convert removes the spool; a caller that scans with a
	// SpoolDir and does not convert calls TrajReport.Discard. Empty (the
	// default, and for scan alone): no spool, Convert reads the text.
	SpoolDir string
}

func (t *TrajReport) add(code string, sev finding.Severity, file string, line int, format string, args ...any) {
	t.Problems = append(t.Problems, finding.Finding{Code: code, Severity: sev, Location: finding.Location{File: file, Line: line}, Message: fmt.Sprintf(format, args...)})
}

// addUnit records a unit problem (P8) about one unit kind.
func (t *TrajReport) addUnit(kind quantity.Kind, format string, args ...any) {
	t.Problems = append(t.Problems, finding.Finding{Code: PUnit, Severity: finding.Error, Quantity: string(kind), Message: fmt.Sprintf(format, args...)})
}

// Refusal is the first problem that forbids converting this trajectory,
// or nil: any error, except a cut last frame when dropPartial is set
// (that frame is then dropped and recorded). Convert and pack refuse by
// this one rule, all or nothing.
func (t *TrajReport) Refusal(dropPartial bool) *finding.Finding {
	for i, p := range t.Problems {
		if p.Severity == finding.Error && !(dropPartial && p.Code == PTruncated) {
			return &t.Problems[i]
		}
	}
	return nil
}

// Errors counts problems of severity error.
func (t *TrajReport) Errors() int { return finding.Count(t.Problems, finding.Error) }

// Findings counts errors and warnings (notes excluded).
func (t *TrajReport) Findings() int {
	return finding.Count(t.Problems, finding.Error) + finding.Count(t.Problems, finding.Warning)
}

// openSources opens every input of t with its reader, in order.
func openSources(t *Trajectory, opt Options) ([]source, error) {
	var srcs []source
	for _, in := range t.Inputs {
		s, err := in.reader.Open(in.Path, in.spec, opt.Recipe)
		if err != nil {
			for _, s := range srcs {
				s.close()
			}
			return nil, err
		}
		srcs = append(srcs, s)
	}
	return srcs, nil
}

// checkEvery is how many records pass between looks at the context.
const checkEvery = 64

// Scan reads every file of a trajectory once (streaming) and reports what
// it holds and what is wrong with it. It stops early with ctx.Err() when
// ctx is cancelled; problems in the logs are findings in the report, not
// errors.
func Scan(ctx context.Context, t *Trajectory, opt Options) (*TrajReport, error) {
	rep := &TrajReport{Name: t.Name, traj: t, Units: map[string]string{}, Precision: map[string]string{},
		formats: map[string]textnum.Format{}, maxAbs: map[string]float64{}, negZeros: map[string]int{}, extraWidth: map[string]int{}, Quantities: []string{}, Problems: []finding.Finding{},
		NotStored: []string{}, keByKey: map[int64]*keFrame{}}
	for _, m := range t.missing {
		rep.add(PMissing, finding.Error, t.Dir, 0, "no file matches the recipe pattern %q", m)
	}
	for _, u := range t.unknown {
		rep.add(PUnknownFile, finding.Note, u, 0, "not read (no reader takes its extension: %s); name it in a recipe to use it", knownExtensions())
	}
	// Files that fail their reader's probe are skipped with a note, not
	// fatal.
	var kept []Input
	for _, in := range t.Inputs {
		if in.reader.Probe != nil {
			if err := in.reader.Probe(in.Path); err != nil {
				rep.add(PUnknownFile, finding.Note, in.Path, 0, "not read as a %s: %v", in.reader.Kind, err)
				continue
			}
		}
		kept = append(kept, in)
	}
	t.Inputs = kept
	srcs, err := openSources(t, opt)
	if err != nil {
		rep.add(PUnreadable, finding.Error, t.Dir, 0, "%v", err)
		return rep, nil
	}
	defer func() {
		for _, s := range srcs {
			s.close()
		}
	}()
	var sw *spoolWriter
	if opt.SpoolDir != "" {
		if sw, err = newSpool(opt.SpoolDir, t.Name); err != nil {
			return nil, err
		}
	}
	for i, s := range srcs {
		if sw != nil {
			sw.begin()
		}
		fr, err := scanSource(ctx, rep, s, t.Inputs[i].reader, sw)
		if err != nil {
			if sw != nil {
				sw.abort()
			}
			return nil, err
		}
		if sw != nil {
			sw.end()
		}
		rep.Files = append(rep.Files, fr)
	}
	if sw != nil {
		if rep.spool, err = sw.finish(); err != nil {
			return nil, err
		}
	}
	if err := rep.checkGivenUnits(opt); err != nil {
		rep.Discard()
		return nil, err
	}
	rep.combine(opt)
	rep.checkRecipeRules(srcs)
	rep.checkHopEvents()
	if rep.Refusal(opt.DropPartial) != nil {
		rep.Discard() // not converted as scanned: no need to keep it
	}
	return rep, nil
}

// Discard removes the spool of t (Options.SpoolDir), if any: for callers
// that scanned with a spool and do not convert t. Convert calls it
// itself; later calls do nothing.
func (t *TrajReport) Discard() {
	if t != nil {
		t.spool.remove() // Convert then reads the text again
	}
}

// scanSource reads s to its end or first error; every record read goes
// to sw too, when not nil.
func scanSource(ctx context.Context, rep *TrajReport, s source, r *Reader, sw *spoolWriter) (*FileReport, error) {
	// The report keeps no reference to s: a closed source still holds its
	// line buffer (1 MiB), and an ensemble's reports live until the
	// conversion ends.
	fr := &FileReport{File: s.file(), Format: r.Kind, reader: r, partial: -1, maxAbs: map[string]float64{}, negZeros: map[string]int{}, minState: -1, maxActive: -1, minActive: -1}
	idx := 0
	var prevTime float64
	var prevStep int64
	havePrev := false
	atoms := 0
	for ; ; idx++ {
		if idx%checkEvery == 0 {
			if err := ctx.Err(); err != nil {
				return nil, err
			}
		}
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
			p := finding.Finding{Code: code, Severity: finding.Error, Location: finding.Location{File: s.file()}, Message: msg}
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
		if sw != nil {
			if err := sw.write(rec); err != nil {
				return nil, sw.failure()
			}
		}
		if rec.symbols != nil {
			if atoms == 0 {
				atoms = len(rec.symbols)
				if len(rep.symbols) == 0 {
					rep.symbols = append([]string(nil), rec.symbols...)
					if m := rec.atom(quantity.MassQ); m != nil {
						rep.masses = append([]float64(nil), m...)
					}
				}
			}
			for _, c := range rec.atoms {
				fr.noteAll(c.quantity, c.values)
			}
			for _, c := range rec.extras {
				if _, ok := rep.extraWidth[c.quantity]; !ok && len(rec.symbols) > 0 {
					rep.extraWidth[c.quantity] = len(c.values) / len(rec.symbols)
				}
				fr.noteAll(ExtraPrefix+c.quantity, c.values)
			}
		}
		for i, ok := range rec.hasScalar {
			if ok {
				fr.note(quantity.ScalarNames[i], rec.scalar[i])
			}
		}
		if rec.hasTime {
			fr.note(quantity.TimeQ, rec.time)
		}
		for _, v := range rec.stateE {
			if !math.IsNaN(v) { // NaN marks a state index the log skipped
				fr.note(quantity.StateEnergy, v)
			}
		}
		for _, v := range rec.pop {
			if !math.IsNaN(v) {
				fr.note(quantity.Population, v)
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
			if fr.minActive < 0 || rec.active < fr.minActive {
				fr.minActive = rec.active
			}
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
			rep.add(PRestart, finding.Warning, s.file(), rec.line, "step %d %s %d earlier record(s) (a restart); the later occurrence is kept and the earlier dropped", key, what, n)
		} else if havePrev && rec.hasTime && (!rec.hasStep || rec.step > prevStep) && rec.time < prevTime {
			rep.add(PTime, finding.Error, s.file(), rec.line, "time %g after %g while the step advances: the clock goes backwards; check the log", rec.time, prevTime)
		}
		rep.sampleKinetic(rec, r.Role, key)
		fr.keys.push(idx, key)
		if rec.hasActive {
			fr.activity.noteActive(rec.active, key, rec.line)
		}
		fr.checkUniform(rec, key, s.timeFormat())
		if rec.hasTime {
			prevTime, prevStep, havePrev = rec.time, rec.step, true
		}
		if rc, ok := s.(recycler); ok {
			rc.recycle() // nothing of rec is kept (copies only)
		}
	}
	fr.Records = idx
	fr.Kept = fr.keys.n
	if fr.hasSteps {
		f, _ := fr.keys.first()
		l, _ := fr.keys.last()
		fr.FirstStep, fr.LastStep = &f, &l
	}
	fr.fmts = s.provides()
	fr.Formats = map[string]string{}
	for q, f := range fr.fmts {
		fr.Formats[q] = f.String()
	}
	fr.units = s.units()
	if w, ok := s.(unitLocator); ok {
		fr.unitAt = map[string]string{}
		for k := range fr.units {
			fr.unitAt[k] = w.unitWhere(k)
		}
	}
	if r.Role == RoleGeometry {
		rep.Atoms = atoms
	}
	if d, ok := s.(digester); ok {
		if src, ok := d.digest(); ok {
			fr.digest = &src
		}
	}
	fr.hopEvents = s.hops()
	fr.Hops = len(fr.hopEvents)
	rep.Hops += fr.Hops
	if rp, ok := s.(reporter); ok {
		for _, n := range rp.report() {
			rep.Problems = append(rep.Problems, finding.Finding{Code: n.code, Severity: n.sev, Location: finding.Location{File: s.file(), Line: n.line, Column: n.col}, Quantity: n.quantity, Message: n.msg})
			if n.notStored != "" {
				rep.NotStored = append(rep.NotStored, s.file()+": "+n.notStored)
			}
		}
	}
	return fr, nil
}

// note keeps what storage needs to know of a value of q: the largest
// magnitude, and the count of negative zeros (scale-offset storage
// records where they are, trajfile.NegativeZerosAttr).
func (fr *FileReport) note(q string, v float64) {
	fr.maxAbs[q] = math.Max(fr.maxAbs[q], math.Abs(v))
	if v == 0 && math.Signbit(v) {
		fr.negZeros[q]++
	}
}

// noteAll is note for every value of vs, with one map access per
// quantity instead of one per value (a NaN sticks, as with math.Max).
func (fr *FileReport) noteAll(q string, vs []float64) {
	if len(vs) == 0 {
		return
	}
	m, neg := fr.maxAbs[q], 0
	for _, v := range vs {
		if a := math.Abs(v); a > m || a != a {
			m = a
		}
		if v == 0 && math.Signbit(v) {
			neg++
		}
	}
	fr.maxAbs[q] = m
	if neg > 0 {
		fr.negZeros[q] += neg
	}
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
// the command line (checkGivenUnits has refused a given unit that
// contradicts a file's, unless UnitsOverFile puts the given one first).
func (t *TrajReport) unitFor(kind quantity.Kind, opt Options) string {
	k := string(kind)
	if opt.UnitsOverFile {
		if g, _ := givenUnit(k, opt); g != "" {
			return g
		}
	}
	for _, f := range t.Files {
		if u := f.units[k]; u != "" {
			return u
		}
	}
	if opt.Recipe != nil {
		if v := opt.Recipe.Units[k]; v != "" {
			return v
		}
	}
	return opt.Units[k]
}

// unitLocator is a source that says where each unit it gives is written
// (file:line[:column] and the text), for messages.
type unitLocator interface{ unitWhere(kind string) string }

// UnitConflictError is a unit given on the command line or in the
// recipe that differs from the unit a file writes for the same kind of
// quantity. A given unit is honoured or refused, never ignored: the
// caller treats it as a usage error (exit 2).
type UnitConflictError struct {
	Kind       string // unit kind, e.g. "energy"
	Given      string // the given unit
	GivenBy    string // "--unit" or "the recipe"
	FileUnit   string // the unit the file writes
	Where      string // file:line[:column] (text) of the file's unit
	Trajectory string // trajectory name
}

func (e *UnitConflictError) Error() string {
	// Quoted when it holds a space, so that it works when pasted.
	flag := "--unit " + e.Kind + "=" + e.Given
	if strings.Contains(e.Given, " ") {
		flag = "--unit '" + e.Kind + "=" + e.Given + "'"
	}
	if e.GivenBy != "--unit" {
		flag = e.GivenBy + " (units: " + e.Kind + ": " + e.Given + ")"
	}
	return fmt.Sprintf("%s: unit of %s: %s says %q but %s gives %q; a given unit is honoured or refused, never ignored. Drop %s to keep the file's unit, or add --units-over-file if the file's label is wrong (the override is recorded in the provenance)",
		e.Trajectory, e.Kind, e.Where, e.FileUnit, flag, e.Given, flag)
}

// givenUnit is the unit given for kind k and who gave it: the command
// line, else the recipe.
func givenUnit(k string, opt Options) (unit, by string) {
	if u := opt.Units[k]; u != "" {
		return u, "--unit"
	}
	if opt.Recipe != nil && opt.Recipe.Units[k] != "" {
		return opt.Recipe.Units[k], "the recipe"
	}
	return "", ""
}

// sameUnit reports whether a and b name the same unit (spellings that
// convert with factor exactly 1, e.g. "Angstrom" and "angstrom").
func sameUnit(a, b string) bool {
	if a == b {
		return true
	}
	f, err := units.Factor(a, b)
	return err == nil && f == 1
}

// checkGivenUnits compares every unit given (--unit, the recipe) with
// the units the files write: a different unit is a UnitConflictError,
// or with UnitsOverFile an override recorded in t.Overrides.
func (t *TrajReport) checkGivenUnits(opt Options) error {
	for _, ki := range quantity.Kinds() {
		k := string(ki.Kind)
		given, by := givenUnit(k, opt)
		if given == "" {
			continue
		}
		for _, f := range t.Files {
			fu := f.units[k]
			if fu == "" || sameUnit(fu, given) {
				continue
			}
			where := f.unitAt[k]
			if where == "" {
				where = f.File
			}
			if !opt.UnitsOverFile {
				return &UnitConflictError{Kind: k, Given: given, GivenBy: by, FileUnit: fu, Where: where, Trajectory: t.Name}
			}
			t.Overrides = append(t.Overrides, fmt.Sprintf("unit of %s: %s says %q; %s gives %q, used (--units-over-file)", k, where, fu, by, given))
		}
	}
	return nil
}

// combine checks the files against each other and fills the summary.
func (t *TrajReport) combine(opt Options) {
	geo := t.frameFile()
	for _, f := range t.Files {
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
		for q, n := range f.negZeros {
			t.negZeros[q] += n
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
			for _, other := range g[1:] {
				t.add(PConflict, finding.Warning, other, 0, "%s is also given by %s; the first file's values are used and these are not stored (map the column to ignore in a recipe to silence this)", q, g[0])
				t.NotStored = append(t.NotStored, fmt.Sprintf("%s: %s: %s gives it too; its values are stored", other, q, g[0]))
			}
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
		t.add(PStateBase, finding.Note, "", 0, "states are numbered from 1 in the logs (no state 0 found); set state_base in a recipe if that is wrong")
	}
	// Active states alone (no per-state columns): numbered from 1 when
	// no state 0 is seen, and the count is the highest state seen.
	minActive, perState := -1, 0
	for _, f := range t.Files {
		if f.minActive >= 0 && (minActive < 0 || f.minActive < minActive) {
			minActive = f.minActive
		}
		perState = max(perState, f.states)
	}
	if minState < 0 && minActive >= 1 && (opt.Recipe == nil || opt.Recipe.StateBase == nil) {
		t.base = 1
		t.add(PStateBase, finding.Note, "", 0, "active states are numbered from 1 in the logs (no state 0 seen); set state_base in a recipe if that is wrong")
	}
	base := t.stateBase(opt)
	for _, f := range t.Files {
		t.States = max(t.States, f.states-base, f.maxActive+1-base)
	}
	if perState == 0 && minActive >= 0 {
		t.add(PStateCount, finding.Note, "", 0, "%d electronic states: the highest active state seen, numbered from %d; no populations or state energies give the number of states, so states never active are not counted", t.States, base)
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
	if !t.checkObservablesOnly(geo) {
		return
	}
	t.Frames = geo.Kept
	// Which file gives steps: the geometry, else the first table with them.
	clock := geo
	if !geo.hasSteps {
		for _, f := range t.Files {
			if f != geo && f.hasSteps {
				if f.Kept != geo.Kept {
					t.add(PLength, finding.Error, f.File, 0, "%d records but %s has %d frames and no steps to match them by; the files must cover the same frames", f.Kept, t.frameName(geo), geo.Kept)
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
				t.add(PLength, finding.Error, f.File, 0, "no record for step %d, which %s has; every frame needs its row", miss, t.frameName(geo))
			}
		} else if f.Kept != geo.Kept {
			t.add(PLength, finding.Error, f.File, 0, "%d records for %d frames, and no steps to match them by", f.Kept, geo.Kept)
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
	need := map[quantity.Kind]bool{quantity.Position: !t.ObservablesOnly}
	for _, q := range t.Quantities {
		if k := quantity.StoredUnit(q); k != "" && q != quantity.MomentumQ {
			need[k] = true
		}
	}
	if _, ok := t.formats[quantity.TimeQ]; !ok {
		if opt.Dt > 0 {
			need[quantity.Time] = true
		} else {
			t.add(PNoTime, finding.Error, geo.File, 0, "no times in the logs (no time column, no time= on comment lines); give the time per step with --dt and --unit time=fs")
		}
	}
	for _, ki := range quantity.Kinds() {
		k := ki.Kind
		if !need[k] {
			continue
		}
		u := t.unitFor(k, opt)
		if u == "" {
			// Quoted when it holds a space, so the hint works when pasted.
			flag := string(k) + "=" + ki.Example
			if strings.Contains(flag, " ") {
				flag = "'" + flag + "'"
			}
			t.addUnit(k, "no unit for %s: write it in the table header (e.g. %s[%s]), in the recipe (units: %s: ...), or give --unit %s", k, k, ki.Example, k, flag)
			continue
		}
		pu, err := units.Parse(u)
		if err != nil {
			t.addUnit(k, "unit of %s: %v", k, err)
			continue
		}
		if !pu.Is(ki.Dim) {
			t.addUnit(k, "unit %q given for %s is a %v", u, k, pu.Dim)
			continue
		}
		// Files store the canonical spelling (kcal/mol -> kcal mol-1), so
		// that what trajvault writes never draws its own alias warning.
		if c, ok := units.Canonicalize(u); ok {
			u = c
		}
		t.Units[string(k)] = u
	}
	t.momentumUnits(geo, opt)
	t.checkKinetic(opt)
}

// frameFile is the file whose records are the stored frames: the
// geometry file, else (observables only) the first file of records that
// kept any.
func (t *TrajReport) frameFile() *FileReport {
	if g := t.geometry(); g != nil {
		return g
	}
	for _, f := range t.Files {
		if f.Kept > 0 {
			return f
		}
	}
	return nil
}

// checkObservablesOnly decides, for a run without a geometry file,
// whether its records can be stored as observables alone (H5MD 1.1,
// "General organization": only the h5md group is mandatory at the root,
// so a file without /particles is valid). That needs something per
// frame to store (an energy or electronic-state quantity) and no
// per-atom quantity, which has no place without positions: otherwise
// P11. It reports whether combine goes on with frames from frames.
func (t *TrajReport) checkObservablesOnly(frames *FileReport) bool {
	if t.geometry() != nil {
		return frames != nil
	}
	var perAtom, stored []string
	for _, q := range t.Quantities {
		x, _ := quantity.Lookup(q)
		switch {
		case x.PerAtom:
			perAtom = append(perAtom, q)
		case x.Element != "" && q != quantity.TimeQ:
			stored = append(stored, q)
		}
	}
	if t.hasActive() {
		stored = append(stored, quantity.ActiveState)
	}
	switch {
	case len(perAtom) > 0:
		t.add(PNoGeometry, finding.Error, t.traj.Dir, 0, "%s given per atom but no geometry file (.xyz or extended .xyz): per-atom data needs positions; add the geometry file", strings.Join(perAtom, ", "))
		return false
	case frames == nil || len(stored) == 0:
		t.add(PNoGeometry, finding.Error, t.traj.Dir, 0, "no geometry file (.xyz or extended .xyz) and no energies or states to store as observables; add the geometry file or a table with energy or state columns")
		return false
	}
	t.ObservablesOnly = true
	return true
}

// frameName names the frame file in messages.
func (t *TrajReport) frameName(f *FileReport) string {
	if t.ObservablesOnly {
		return f.File + " (the first table, whose rows are the frames)"
	}
	return "the geometry file"
}

// geometry is the report of the geometry file (found by its reader's
// role), or nil.
func (t *TrajReport) geometry() *FileReport {
	for _, f := range t.Files {
		if f.reader.Role == RoleGeometry {
			return f
		}
	}
	return nil
}

// checkUniform follows whether the records so far are uniformly sampled
// in step and time, so that the clock can be stored in H5MD fixed mode.
func (fr *FileReport) checkUniform(rec *record, key int64, tf textnum.Format) {
	if !rec.hasTime || !tf.Fixed() {
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
