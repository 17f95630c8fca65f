package trajfile

import (
	"errors"
	"fmt"
	"math"
	"slices"
	"sort"
	"strings"

	"trajvault/internal/elements"
	"trajvault/internal/h5"
	"trajvault/internal/textnum"
	"trajvault/internal/units"
)

// Reader reads a trajectory file in the layout. It is the one reader of
// the layout: inspect, export, audit and validate's data checks go through
// it. Analysis methods (Values, Frames) convert every quantity to atomic
// units (bohr, au_time, hartree, electron mass), whatever units the file
// stores; Element and Raw give the numbers as stored, with their recorded
// printed format, for export.
type Reader struct {
	f     *h5.File
	Path  string
	Group string // particle group path, e.g. /particles/all
	N     int    // atoms
	T     int    // frames
	// Species are atomic numbers; Masses are in electron masses. Both
	// are optional in H5MD: nil when the group lacks them, and then
	// NoSpecies and NoMasses say why (for "not run" reasons).
	Species   []int
	Masses    []float64
	NoSpecies string
	NoMasses  string
	Steps     []int64   // per frame
	Times     []float64 // per frame, au_time
	States    int
	// TimeStep is the integration step in au_time (/parameters/time_step),
	// or 0 when the file does not record it.
	TimeStep float64
	// ObservablesOnly is set for a file read without a particle group
	// (ReadOptions.ObservablesOnly).
	ObservablesOnly bool
	clockEl         string
	// negZeros caches each value dataset's NegativeZerosAttr.
	negZeros map[string][]int64
}

// negativeZeros is the NegativeZerosAttr list of the dataset at path
// (nil when it has none), read once and sorted: block reads of a long
// run look up their span by binary search instead of walking the list
// once per block (the writer lists up to MaxNegativeZeros, a foreign or
// edited file any number within the read budget, in any order).
func (r *Reader) negativeZeros(path string) []int64 {
	idx, ok := r.negZeros[path]
	if !ok {
		if a, err := r.f.Attr(path, NegativeZerosAttr); err == nil {
			idx = slices.Clone(a.Ints)
			slices.Sort(idx)
		}
		if r.negZeros == nil {
			r.negZeros = map[string][]int64{}
		}
		r.negZeros[path] = idx
	}
	return idx
}

// signZeros gives back the sign of the values of the dataset at path
// (value of an element) that were printed as negative zeros
// (NegativeZerosAttr): v holds the flat values from index first on. Only
// zeros are touched: a listed index whose value is not zero (a damaged
// or edited file) is left as stored.
func (r *Reader) signZeros(path string, v []float64, first int64) {
	idx := r.negativeZeros(path)
	lo, _ := slices.BinarySearch(idx, first)
	negZero := math.Copysign(0, -1)
	for _, i := range idx[lo:] {
		j := i - first
		if j >= int64(len(v)) {
			break
		}
		if v[j] == 0 {
			v[j] = negZero
		}
	}
}

// ClockElement is the element whose step and time are the frames' clock:
// the particle group's positions, or (observables only) the first
// observable.
func (r *Reader) ClockElement() string {
	if r.ObservablesOnly {
		return r.clockEl
	}
	return r.Particle(Position)
}

// observablesOnly sets r up for a file without a particle group: its
// frames are those of the first time-dependent observable in name order,
// and every other observable must have as many.
func (r *Reader) observablesOnly() error {
	names, err := r.f.Links(ObservablesGroup)
	if err != nil {
		return err
	}
	sort.Strings(names)
	for _, n := range names {
		el := ObservablesGroup + "/" + n
		if r.f.Kind(el+Value) != h5.Dataset {
			continue
		}
		info, err := r.f.Info(el + Value)
		if err != nil {
			return err
		}
		if info.Shape.Rank < 1 {
			return fmt.Errorf("%s%s: scalar, want one value per frame", el, Value)
		}
		if r.clockEl == "" {
			r.clockEl, r.T = el, info.Shape.Dims[0]
		} else if info.Shape.Dims[0] != r.T {
			return fmt.Errorf("%s%s: %d frames, but %s has %d; every observable needs one value per frame", el, Value, info.Shape.Dims[0], r.clockEl, r.T)
		}
	}
	if r.clockEl == "" {
		return fmt.Errorf("no particle group and no time-dependent observable under %s", ObservablesGroup)
	}
	r.ObservablesOnly = true
	return checkFrames(r.T)
}

// ErrObservablesOnly is returned by OpenReader for a file without a
// particle group that holds observables (energies, electronic states):
// valid H5MD 1.1, but with no atoms to analyse per frame.
var ErrObservablesOnly = errors.New("the file holds observables only (no atoms)")

// ReadOptions choose what a Reader opens.
type ReadOptions struct {
	// Group is the name of the particle group under /particles (e.g.
	// "water"); "" picks ours when present, else the first group in name
	// order that holds positions (Groups lists them all).
	Group string
	// ObservablesOnly accepts a file without a particle group that holds
	// observables (H5MD 1.1 makes /particles optional): the Reader then
	// has N = 0, Group "" and the clock of the first observable in name
	// order (ClockElement); only observables can be read. Without it such
	// a file gives ErrObservablesOnly.
	ObservablesOnly bool
}

// OpenReader opens a trajectory file for analysis, its default particle
// group (see ReadOptions.Group).
func OpenReader(path string) (*Reader, error) { return OpenReaderWith(path, ReadOptions{}) }

// OpenReaderWith opens a trajectory file for analysis, the particle
// group o names.
func OpenReaderWith(path string, o ReadOptions) (*Reader, error) { return open(path, o, true) }

func open(path string, o ReadOptions, withClock bool) (*Reader, error) {
	f, err := h5.Open(path)
	if err != nil {
		return nil, err
	}
	r := &Reader{f: f, Path: path}
	if err := r.init(o, withClock); err != nil {
		f.Close()
		return nil, fmt.Errorf("%s: %w", path, err)
	}
	return r, nil
}

// OpenReaderImage opens a trajectory file held in memory (a member of an
// archive read without unpacking it); name is used in messages.
func OpenReaderImage(name string, img []byte) (*Reader, error) {
	f, err := h5.OpenImage(name, img)
	if err != nil {
		return nil, err
	}
	r := &Reader{f: f, Path: name}
	if err := r.init(ReadOptions{}, true); err != nil {
		f.Close()
		return nil, fmt.Errorf("%s: %w", name, err)
	}
	return r, nil
}

// Close releases the file.
func (r *Reader) Close() error { return r.f.Close() }

// Particle is the path of element el (Position, Velocity, ...) of the
// file's particle group.
func (r *Reader) Particle(el string) string { return Particle(r.Group, el) }

func (r *Reader) unitFactor(path, to string) (float64, error) {
	a, err := r.f.Attr(path, UnitAttr)
	if err != nil || len(a.Strings) != 1 {
		return 0, fmt.Errorf("%s has no unit attribute; run trajvault validate", path)
	}
	return units.Factor(a.Strings[0], to)
}

// Groups lists the names of the particle groups of the file at path
// that hold positions (H5MD 1.1 "particles group": any name, any number
// of groups), in name order.
func Groups(path string) ([]string, error) {
	f, err := h5.Open(path)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	return groups(f), nil
}

// Groups lists the file's particle groups that hold positions (as the
// function Groups does).
func (r *Reader) Groups() []string { return groups(r.f) }

func groups(f *h5.File) []string {
	names, _ := f.Links(ParticlesGroup)
	var out []string
	for _, n := range names {
		if f.Kind(Particle(ParticleGroup(n), Position)+Value) == h5.Dataset {
			out = append(out, n)
		}
	}
	sort.Strings(out)
	return out
}

// findGroup picks the particle group: the one named, else ours when
// present, else the first (in name order) that holds positions.
func findGroup(f *h5.File, name string) (string, error) {
	have := groups(f)
	if name != "" {
		if strings.Contains(name, "/") || name == "." || name == ".." {
			return "", fmt.Errorf("particle group %q: give the name of a group under %s, without slashes, e.g. all", name, ParticlesGroup)
		}
		if slices.Contains(have, name) {
			return ParticleGroup(name), nil
		}
		return "", fmt.Errorf("no particle group %q with positions under %s; the file has: %s", name, ParticlesGroup, groupList(have))
	}
	if f.Kind(Particle(OurGroup, Position)+Value) == h5.Dataset {
		return OurGroup, nil
	}
	if len(have) > 0 {
		return ParticleGroup(have[0]), nil
	}
	if f.Kind(ParticlesGroup) != h5.Group && f.Kind(ObservablesGroup) == h5.Group {
		return "", fmt.Errorf("%w: no %s group, only %s; inspect lists them and export --format csv writes them", ErrObservablesOnly, ParticlesGroup, ObservablesGroup)
	}
	return "", fmt.Errorf("no particle group with positions under %s", ParticlesGroup)
}

func groupList(names []string) string {
	if len(names) == 0 {
		return "none with positions"
	}
	return strings.Join(names, ", ")
}

// init reads what every use needs and checks the shapes; withClock also
// loads every frame's step and time (OpenWindowReader leaves them out:
// on long runs with an explicit clock they cost more than a window).
func (r *Reader) init(o ReadOptions, withClock bool) error {
	var err error
	if r.Group, err = findGroup(r.f, o.Group); errors.Is(err, ErrObservablesOnly) && o.ObservablesOnly && o.Group == "" {
		r.Group = ""
		if err := r.observablesOnly(); err != nil {
			return err
		}
	} else if err != nil {
		return err
	} else {
		info, err := r.f.Describe(r.Particle(Position) + Value)
		if err != nil {
			return fmt.Errorf("no positions [T][N][3]: %w", err)
		}
		if d := info.Shape.Dims; info.Shape.Rank != 3 || d[0] < 1 || d[1] < 1 || d[2] != 3 {
			return fmt.Errorf("%s%s: shape %v, want [T][N][3] with T >= 1 frames and N >= 1 atoms", r.Particle(Position), Value, info.Shape.Dims)
		}
		r.T, r.N = info.Shape.Dims[0], info.Shape.Dims[1]
		if err := r.atoms(); err != nil {
			return err
		}
		if err := checkFrames(r.T); err != nil {
			return fmt.Errorf("%s%s: %w", r.Particle(Position), Value, err)
		}
	}
	if withClock {
		c, err := readClock(r.f, r.ClockElement())
		if err != nil {
			return err
		}
		tf, err := r.unitFactor(r.ClockElement()+Time, "au_time")
		if err != nil {
			return err
		}
		r.Steps = c.Steps
		r.Times = make([]float64, len(c.Times))
		for i, t := range c.Times {
			r.Times[i] = t * tf
		}
	}
	if err := r.states(); err != nil {
		return err
	}
	if v, _, err := r.f.ReadFloat64(TimeStep); err == nil && len(v) == 1 {
		if fct, err := r.unitFactor(TimeStep, "au_time"); err == nil {
			r.TimeStep = v[0] * fct
		}
	}
	return nil
}

// MassesIn returns the stored masses in unit (e.g. "u"): the stored
// numbers themselves when the file stores them in unit (factor exactly 1).
func (r *Reader) MassesIn(unit string) ([]float64, error) {
	m, _, err := r.f.ReadFloat64(r.Particle(Mass))
	if err != nil || len(m) != r.N {
		return nil, fmt.Errorf("no masses for %d atoms", r.N)
	}
	f, err := r.unitFactor(r.Particle(Mass), unit)
	if err != nil {
		return nil, err
	}
	if f != 1 {
		for i := range m {
			m[i] *= f
		}
	}
	return m, nil
}

// atoms reads species and masses, both optional in H5MD 1.1: a group
// without them leaves them nil with the reason in NoSpecies or NoMasses.
// Present but wrong (shape, unit) is an error, as everywhere else.
func (r *Reader) atoms() error {
	if p := r.Particle(Species); r.f.Kind(p) == h5.Missing {
		r.NoSpecies = fmt.Sprintf("%s has no %s (chemical elements unknown)", r.Group, Species)
	} else {
		sp, shape, err := r.f.ReadInt64(p)
		if err != nil {
			return fmt.Errorf("%s: %w", p, err)
		}
		if shape.Rank != 1 || len(sp) != r.N {
			return fmt.Errorf("%s: shape %v, want [%d] (one per atom of the positions)", p, shape.Dims, r.N)
		}
		for _, z := range sp {
			r.Species = append(r.Species, int(z))
		}
	}
	p := r.Particle(Mass)
	if r.f.Kind(p) == h5.Missing {
		r.NoMasses = fmt.Sprintf("%s has no %s", r.Group, Mass)
		return nil
	}
	m, shape, err := r.f.ReadFloat64(p)
	if err != nil {
		return fmt.Errorf("%s: %w", p, err)
	}
	if shape.Rank != 1 || len(m) != r.N {
		return fmt.Errorf("%s: shape %v, want [%d] (one per atom of the positions)", p, shape.Dims, r.N)
	}
	mf, err := r.unitFactor(p, "me")
	if err != nil {
		// Unusable rather than wrong: the analyses that need masses say
		// they did not run, and why.
		r.NoMasses = err.Error()
		return nil
	}
	for _, x := range m {
		r.Masses = append(r.Masses, x*mf)
	}
	return nil
}

// Symbol is atom i's chemical symbol, or "X" when the group stores no
// species (common practice for an unknown element in XYZ files).
func (r *Reader) Symbol(i int) string {
	if i < 0 || i >= len(r.Species) {
		return "X"
	}
	return elements.Symbol(r.Species[i])
}

// MaxStates bounds /parameters/n_states: per frame the couplings hold
// S*S numbers, so S is kept where S*S fits a read of any sensible frame
// count (common practice: surface hopping uses a handful of states).
const MaxStates = 4096

// maxClockBytes bounds the per-frame clock (step and time, 16 bytes a
// frame) that the reader holds: the HDF5 layer's read budget.
const maxClockBytes = h5.DefaultMaxReadBytes

// checkFrames checks a declared frame count before anything per frame is
// allocated.
func checkFrames(T int) error {
	if T < 0 || uint64(T) > uint64(maxClockBytes)/16 {
		return fmt.Errorf("%d frames declared: the clock alone would need more than %d bytes", T, maxClockBytes)
	}
	return nil
}

// states reads /parameters/n_states (when present) and checks that every
// electronic element present has S columns: state_energies and
// populations [T][S], amplitudes [T][S][2], couplings [T][S][S]. Analysis
// indexes rows by S, so a mismatch is an error here, never an index out
// of range later (issue 12).
func (r *Reader) states() error {
	if r.f.Kind(NStates) == h5.Missing {
		return nil
	}
	v, shape, err := r.f.ReadInt64(NStates)
	if err != nil || shape.Rank != 0 || len(v) != 1 {
		return fmt.Errorf("%s: want an integer scalar (the number of electronic states)", NStates)
	}
	if v[0] < 1 || v[0] > MaxStates {
		return fmt.Errorf("%s = %d: want 1..%d", NStates, v[0], MaxStates)
	}
	S := int(v[0])
	for _, e := range []struct {
		el   string
		tail []int
	}{{StateEnergies, []int{S}}, {Populations, []int{S}}, {Amplitudes, []int{S, 2}}, {Couplings, []int{S, S}}} {
		if !r.Has(e.el) {
			continue
		}
		info, err := r.f.Describe(r.at(e.el) + Value)
		if err != nil {
			return err
		}
		want := append([]int{r.T}, e.tail...)
		if !slices.Equal(info.Shape.Dims, want) {
			return fmt.Errorf("%s%s: shape %v, want %v for %s = %d over %d frames", e.el, Value, info.Shape.Dims, want, NStates, S, r.T)
		}
	}
	r.States = S
	return nil
}

// Clock is an element's steps and times, per frame, as stored.
type Clock struct {
	Steps    []int64
	Times    []float64
	TimeUnit string
	// Fixed is true for H5MD fixed mode (scalar step and time with an
	// offset attribute: value i = offset + i increment).
	Fixed bool
}

// Clock reads the steps and times (in the stored time unit) of a
// time-dependent element.
func (r *Reader) Clock(el string) (*Clock, error) { return readClock(r.f, r.at(el)) }

// at is where the file keeps el: el itself, or for files of the
// electronic module version 1.0 the nested path (Legacy).
func (r *Reader) at(el string) string {
	if r.f.Kind(el) != h5.Missing {
		return el
	}
	if old, ok := Legacy(el); ok && r.f.Kind(old) != h5.Missing {
		return old
	}
	return el
}

// readClock reads el/step and el/time, explicit or fixed (H5MD 1.1,
// "time-dependent data"), for every frame of el/value.
func readClock(f *h5.File, el string) (*Clock, error) {
	st, shape, err := f.ReadInt64(el + Step)
	if err != nil {
		return nil, fmt.Errorf("no step for %s", el)
	}
	tm, tshape, err := f.ReadFloat64(el + Time)
	if err != nil {
		return nil, fmt.Errorf("no time for %s", el)
	}
	info, err := f.Describe(el + Value)
	T := 0
	if err == nil && info.Shape.Rank > 0 {
		T = info.Shape.Dims[0]
	}
	if err := checkFrames(T); err != nil {
		return nil, fmt.Errorf("%s: %w", el, err)
	}
	c := &Clock{Steps: make([]int64, T), Times: make([]float64, T), Fixed: shape.Rank == 0}
	if a, err := f.Attr(el+Time, UnitAttr); err == nil && len(a.Strings) == 1 {
		c.TimeUnit = a.Strings[0]
	}
	if c.Fixed {
		if len(st) != 1 || tshape.Rank != 0 || len(tm) != 1 {
			return nil, fmt.Errorf("%s: fixed-mode step and time must both be scalars", el)
		}
		so, to := int64(numAttr(f, el+Step, OffsetAttr)), numAttr(f, el+Time, OffsetAttr)
		for i := range c.Steps {
			c.Steps[i] = so + int64(i)*st[0]
			c.Times[i] = to + float64(i)*tm[0]
		}
		return c, nil
	}
	if len(st) != T || tshape.Rank != 1 || len(tm) != T {
		return nil, fmt.Errorf("%s: step/time lengths differ from value", el)
	}
	copy(c.Steps, st)
	copy(c.Times, tm)
	return c, nil
}

// numAttr reads a numeric scalar attribute, integer or float; 0 when absent.
func numAttr(f *h5.File, path, name string) float64 {
	a, err := f.Attr(path, name)
	switch {
	case err != nil:
		return 0
	case len(a.Floats) == 1:
		return a.Floats[0]
	case len(a.Ints) == 1:
		return float64(a.Ints[0])
	}
	return 0
}

// TimeFormat is the printed format recorded for el's times, if any.
func (r *Reader) TimeFormat(el string) (textnum.Format, bool) { return r.format(r.at(el) + Time) }

func (r *Reader) format(path string) (textnum.Format, bool) {
	a, err := r.f.Attr(path, FormatAttr)
	if err != nil || len(a.Strings) != 1 {
		return textnum.Format{}, false
	}
	fm, err := textnum.ParseFormat(a.Strings[0])
	return fm, err == nil
}

// Element describes a time-dependent element as stored.
type Element struct {
	Path  string // the element, e.g. /observables/total_energy
	Shape h5.Shape
	Unit  string // "" when dimensionless
	// Format is the printed format recorded at conversion; Exact says
	// whether one was recorded.
	Format textnum.Format
	Exact  bool
}

// Width is the number of values per frame.
func (e *Element) Width() int {
	w := 1
	for _, d := range e.Shape.Dims[1:] {
		w *= d
	}
	return w
}

// Element returns the stored description of el, or nil when the file has
// no such time-dependent element.
func (r *Reader) Element(el string) (*Element, error) {
	if !r.Has(el) {
		return nil, nil
	}
	el = r.at(el)
	info, err := r.f.Describe(el + Value)
	if err != nil {
		return nil, err
	}
	if info.Shape.Rank == 0 || info.Shape.Dims[0] != r.T {
		return nil, fmt.Errorf("%s%s: %v values, want one row per frame (%d)", el, Value, info.Shape.Dims, r.T)
	}
	e := &Element{Path: el, Shape: info.Shape}
	if a, err := r.f.Attr(el+Value, UnitAttr); err == nil && len(a.Strings) == 1 {
		e.Unit = a.Strings[0]
	}
	e.Format, e.Exact = r.format(el + Value)
	return e, nil
}

// Raw reads frames [start, start+count) of e's values as stored.
func (r *Reader) Raw(e *Element, start, count int) ([]float64, error) {
	v, err := r.f.ReadRows(e.Path+Value, e.Shape, start, count)
	if err == nil {
		r.signZeros(e.Path+Value, v, int64(start)*int64(e.Width()))
	}
	return v, err
}

// Has reports whether the time-dependent element exists (e.g.
// r.Particle(Velocity), TotalEnergy).
func (r *Reader) Has(el string) bool { return r.f.Kind(r.at(el)+Value) == h5.Dataset }

// Values reads a whole time-dependent element converted to unit ("" for
// dimensionless or integer data), with its shape.
//
// The element must have one row per frame of the positions' clock
// (Dims[0] == T); a shorter or longer one is an error, checked before the
// read.
func (r *Reader) Values(el, unit string) ([]float64, h5.Shape, error) {
	el = r.at(el)
	info, err := r.f.Describe(el + Value)
	if err != nil {
		return nil, h5.Shape{}, err
	}
	if info.Shape.Rank == 0 || info.Shape.Dims[0] != r.T {
		return nil, info.Shape, fmt.Errorf("%s: %s%s: shape %v, want one row per frame (%d)", r.Path, el, Value, info.Shape.Dims, r.T)
	}
	v, shape, err := r.f.ReadFloat64(el + Value)
	if err != nil {
		return nil, shape, err
	}
	r.signZeros(el+Value, v, 0)
	if unit != "" {
		fct, err := r.unitFactor(el+Value, unit)
		if err != nil {
			return nil, shape, err
		}
		for i := range v {
			v[i] *= fct
		}
	}
	return v, shape, nil
}

// Frames reads frames [start, start+count) of a per-atom element
// ([T][N][3]) converted to unit: the streaming path for long runs.
func (r *Reader) Frames(el, unit string, start, count int) ([]float64, error) {
	return r.FramesInto(el, unit, start, count, nil)
}

// FramesInto is Frames into dst's memory when it is large enough (else
// a new slice), so that a pass over a long run in blocks reuses one
// buffer per element.
func (r *Reader) FramesInto(el, unit string, start, count int, dst []float64) ([]float64, error) {
	el = r.at(el)
	info, err := r.f.Describe(el + Value)
	if err != nil {
		return nil, err
	}
	if d := info.Shape.Dims; info.Shape.Rank != 3 || d[0] != r.T || d[1] != r.N || d[2] != 3 {
		return nil, fmt.Errorf("%s: %s%s: shape %v, want [%d][%d][3]", r.Path, el, Value, info.Shape.Dims, r.T, r.N)
	}
	if start < 0 || count < 0 || start > r.T || count > r.T-start {
		return nil, fmt.Errorf("%s: %s%s: frames [%d, %d+%d) outside 0..%d", r.Path, el, Value, start, start, count, r.T)
	}
	v, err := r.f.ReadRowsInto(el+Value, info.Shape, start, count, dst)
	if err != nil {
		return nil, err
	}
	r.signZeros(el+Value, v, int64(start)*int64(r.N)*3)
	fct, err := r.unitFactor(el+Value, unit)
	if err != nil {
		return nil, err
	}
	for i := range v {
		v[i] *= fct
	}
	return v, nil
}

// Hops are the hop attempts of the file (nil when none are stored).
func (r *Reader) Hops() ([]Hop, error) {
	if r.f.Kind(r.at(HopsGroup)) != h5.Group {
		return nil, nil
	}
	st, _, err := r.f.ReadInt64(r.at(HopStep))
	if err != nil {
		return nil, err
	}
	from, _, _ := r.f.ReadInt64(r.at(HopFrom))
	to, _, _ := r.f.ReadInt64(r.at(HopTo))
	kind, _, _ := r.f.ReadInt64(r.at(HopKind))
	if len(from) != len(st) || len(to) != len(st) || len(kind) != len(st) {
		return nil, fmt.Errorf("hops table columns differ in length")
	}
	out := make([]Hop, len(st))
	for i := range st {
		out[i] = Hop{Step: st[i], From: int(from[i]), To: int(to[i]), Frustrated: kind[i] == 1}
	}
	return out, nil
}
