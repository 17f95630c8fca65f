// Package trajfile writes trajectories in the trajvault layout
// (schema/layout.md): H5MD 1.1 with the units module and the
// trajvault_electronic module for electronic-state data.
//
// The Writer streams frames: memory use is one chunk of frames per element,
// whatever the length of the run. Output appears atomically: data go to a
// temporary file beside the target, which is linked into place by Close
// only if every write succeeded and the target does not exist.
package trajfile

import (
	"errors"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strings"

	"trajvault/internal/h5"
	"trajvault/internal/outdir"
	"trajvault/internal/units"
)

// Module is the name and version of trajvault's electronic-state module.
const (
	ModuleName = "trajvault_electronic"
	Group      = "all"
)

// ModuleVersion is written as /h5md/modules/trajvault_electronic@version.
var ModuleVersion = []int32{1, 1}

// Units are the unit strings (H5MD grammar, internal/units symbols) of the
// stored numbers. They describe the data as given; the writer converts
// nothing, so stored values stay exactly those of the source.
type Units struct {
	Length, Time, Velocity, Force, Energy, Mass, InverseTime string
}

// DefaultUnits are the units of most quantum-chemistry logs.
var DefaultUnits = Units{
	Length: "angstrom", Time: "fs", Velocity: "angstrom fs-1", Force: "hartree bohr-1",
	Energy: "hartree", Mass: "u", InverseTime: "fs-1",
}

// ReaderUnits are the units Spec.ForReaders stores in. Those of the
// quantities a common Python analysis library's H5MD reader reads (see
// readers_test.go) - time, position,
// velocity, force - are in both the H5MD unit grammar (with this
// project's symbol table) and that reader's fixed unit list: angstrom, fs,
// nm ps-1 and kJ mol-1 nm-1 (no spelling of angstrom fs-1 or
// hartree bohr-1 is in both). The others keep DefaultUnits.
var ReaderUnits = Units{
	Length: "angstrom", Time: "fs", Velocity: "nm ps-1", Force: "kJ mol-1 nm-1",
	Energy: "hartree", Mass: "u", InverseTime: "fs-1",
}

// Spec describes the file to write. Zero values of optional parts leave
// the element out.
type Spec struct {
	Author, Email           string
	Creator, CreatorVersion string

	// ObservablesOnly writes no particle group: a run of energies or
	// electronic states without geometry (H5MD 1.1 makes /particles
	// optional). Species, Masses, Edges, Velocity and Force must then be
	// empty, and the first observable holds the step and time datasets
	// the others link to.
	ObservablesOnly bool

	Species  []int     // atomic numbers, length N
	Masses   []float64 // length N
	Boundary []string  // per axis "periodic" or "none"; nil = all none
	Edges    []float64 // [D], required when any boundary is periodic

	Units Units
	// ForReaders writes for readers with a fixed unit list and per-frame
	// clocks: every number is converted from Units into ReaderUnits before
	// it is stored (units.Factor, CODATA 2018), and the clock is stored in
	// explicit mode even when a Clock is given. The stored values are then
	// not the printed ones: Storage is ignored (lossless float64, no
	// recorded format), and export cannot give back the source's digits.
	// Off by default: a converted log keeps its units, digits and compact
	// clock.
	ForReaders bool

	// Extras are per-atom columns no quantity names, stored as
	// time-dependent particle elements /particles/all/NAME, [T][N][Width],
	// without a unit (ExtraNameProblem says which names can be used).
	Extras []Extra

	Velocity, Force               bool
	Kinetic, Potential, Total     bool
	NStates                       int // > 0 enables the electronic module
	StateEnergies, ActiveState    bool
	Populations, Amplitudes, Hops bool
	Couplings                     bool
	Integrator, Method            string
	TimeStep                      float64 // in Units.Time; 0 = not recorded
	Filters                       h5.Filters
	ChunkFrames                   int // frames per chunk; 0 = chosen from N
	Attrs                         map[string]string
	// Storage says, per element name (position, velocity, force, time,
	// kinetic_energy, ..., state_energies, populations), how the numbers
	// were printed and how to store them; absent = lossless float64.
	Storage map[string]Storage
	// SeriesFrames > 0 chunks per-atom elements (position, velocity,
	// force) as time series: one chunk holds SeriesFrames frames of one
	// coordinate of one atom. With scale-offset this stores each chunk in
	// the bits its own small range needs (an atom moves little within a
	// chunk), at the cost of reading many chunks for one frame. The writer
	// then buffers SeriesFrames frames (memory SeriesFrames x N x 3 x 8
	// bytes per element, independent of the run's length).
	SeriesFrames int
	// File sets the HDF5 file format and chunk-index shape (h5.CreateWith).
	File h5.CreateOptions
	// Clock, when set, is the uniform clock of the run: frame i is at
	// step StepOffset + i StepIncrement and time TimeOffset + i
	// TimeIncrement. WriteFrame checks every frame against it, and it is
	// stored in H5MD fixed mode (scalar step and time with an offset
	// attribute) - unless ForReaders is set: readers that index step[i]
	// and time[i], a common Python analysis library's H5MD reader among them, fail
	// on fixed mode (schema/layout.md, "Written for readers"). Without a
	// Clock the writer stores explicit mode, one step and time per frame.
	Clock *FixedClock
}

// Extra is an extra per-atom element: its name and values per atom.
type Extra struct {
	Name  string
	Width int
}

// FixedClock is a uniformly sampled frame clock (H5MD fixed mode).
type FixedClock struct {
	StepOffset, StepIncrement int64
	TimeOffset, TimeIncrement float64
}

// Storage of one element's numbers.
type Storage struct {
	// Format is the printed precision (textnum.Format.String()), stored
	// as the attribute trajvault_format so that export can print the
	// numbers again digit for digit; "" = not printed text (derived).
	Format string
	// Decimals >= 0 stores the values with the scale-offset filter at that
	// many decimals: exact for numbers printed with at most that many
	// decimals. -1 stores float64 losslessly (shuffle + deflate).
	Decimals int
	// Tolerance > 0 records a lossy storage bound (attribute
	// trajvault_tolerance, in the element's unit).
	Tolerance float64
}

// filtersFor chooses the filters of a float element.
func (w *Writer) filtersFor(name string) (h5.Filters, Storage, bool) {
	st, ok := w.spec.Storage[name]
	fl := w.spec.Filters
	if ok && st.Decimals >= 0 {
		fl = h5.Filters{ScaleOffsetFloat: true, ScaleOffsetDigits: st.Decimals, Deflate: fl.Deflate, Fletcher32: fl.Fletcher32}
	}
	return fl, st, ok
}

func (w *Writer) storageAttrs(path string, st Storage) {
	if st.Format != "" {
		w.do(w.f.SetVarString(path, FormatAttr, st.Format))
	}
	if st.Tolerance > 0 {
		w.do(w.f.SetFloats(path, ToleranceAttr, []float64{st.Tolerance}, true))
	}
}

// DefaultFilters are lossless and decoded by every HDF5 build: byte
// shuffle, deflate and a Fletcher-32 checksum per chunk (fixity inside the
// file, independent of the bag's manifests).
var DefaultFilters = h5.Filters{Shuffle: true, Deflate: 4, Fletcher32: true}

// Frame is one stored time step. Slices are flat, row-major: Position is
// N*3 values, StateEnergies S, Amplitudes S*2 (re, im), Couplings S*S.
type Frame struct {
	Step                      int64
	Time                      float64
	Position                  []float64
	Velocity, Force           []float64
	Extras                    [][]float64 // N*Width values per Spec.Extras entry
	Kinetic, Potential, Total float64
	StateEnergies             []float64
	ActiveState               int
	Populations               []float64
	Amplitudes                []float64
	Couplings                 []float64
}

// Hop is one hop attempt of a surface-hopping run.
type Hop struct {
	Step       int64
	Time       float64
	From, To   int
	Frustrated bool
}

// element is one buffered time-dependent value dataset.
type element struct {
	path string
	row  int
	buf  []float64
	ibuf []int64
	w    *h5.Writer
	// scaled is set for scale-offset float storage, which loses the sign
	// of zero; negZeros then collects the flat indices of negative zeros
	// (written as NegativeZerosAttr by Close).
	scaled   bool
	negZeros []int64
}

// MaxNegativeZeros bounds the negative zeros one element records (64 KiB
// of indices, the attribute size every HDF5 file format stores); convert
// stores a column with more as float64, which keeps the sign itself.
const MaxNegativeZeros = 8192

// Writer writes one trajectory file. Its first error is sticky.
type Writer struct {
	spec  Spec
	final string
	tmp   string
	f     *h5.File
	n     int
	chunk int
	step  *element
	time  *element
	// clockGroup is the element holding the step and time datasets
	// (positions, or the first observable); the others hard-link them.
	clockGroup string
	elems      []*element
	get        []func(*Frame) ([]float64, error)
	hops       []Hop
	frames     int
	lastStep   int64
	err        error
	closed     bool
	// src are the units of the numbers given; spec.Units those stored.
	// tf converts given times to stored ones.
	src Units
	tf  float64
}

// factor is the factor from the given to the stored unit picked by sel.
func (w *Writer) factor(sel func(Units) string) float64 {
	if sel(w.src) == sel(w.spec.Units) {
		return 1
	}
	f, err := units.Factor(sel(w.src), sel(w.spec.Units))
	w.do(err)
	return f
}

func scaled(v []float64, f float64) []float64 {
	if f == 1 {
		return v
	}
	out := make([]float64, len(v))
	for i, x := range v {
		out[i] = x * f
	}
	return out
}

var pgroup = OurGroup

// Create starts a new trajectory file at path; it fails if path exists.
func Create(path string, spec Spec) (*Writer, error) {
	if _, err := os.Lstat(path); err == nil {
		return nil, fmt.Errorf("%s: already exists; trajvault never overwrites an output (remove it or choose another name)", path)
	}
	n := len(spec.Species)
	switch {
	case spec.ObservablesOnly && (n > 0 || len(spec.Masses) > 0 || len(spec.Edges) > 0 || spec.Velocity || spec.Force || len(spec.Extras) > 0):
		return nil, errors.New("trajfile: an observables-only file has no atoms: no species, masses, box, velocities or forces")
	case spec.ObservablesOnly && !(spec.Kinetic || spec.Potential || spec.Total || spec.NStates > 0):
		return nil, errors.New("trajfile: an observables-only file needs an observable (an energy or electronic-state data)")
	case !spec.ObservablesOnly && (n == 0 || len(spec.Masses) != n):
		return nil, fmt.Errorf("trajfile: %d species and %d masses; need N > 0 of each", n, len(spec.Masses))
	}
	if spec.Units == (Units{}) {
		spec.Units = DefaultUnits
	}
	if spec.Creator == "" {
		spec.Creator = "trajvault"
	}
	if spec.CreatorVersion == "" {
		spec.CreatorVersion = "dev"
	}
	if spec.Author == "" {
		spec.Author = "unknown"
	}
	if spec.Filters == (h5.Filters{}) {
		spec.Filters = DefaultFilters
	}
	if spec.Boundary == nil {
		spec.Boundary = []string{"none", "none", "none"}
	}
	chunk := spec.ChunkFrames
	if spec.SeriesFrames > 0 {
		chunk = spec.SeriesFrames
	}
	if chunk <= 0 {
		// About 256 KiB of positions per chunk: large enough to compress
		// well, small enough to read a few frames cheaply.
		chunk = max(1, min(4096, 256*1024/(8*3*max(n, 1))))
	}
	tmp := filepath.Join(filepath.Dir(path), fmt.Sprintf(".%s.partial-%d", filepath.Base(path), os.Getpid()))
	outdir.Clean(filepath.Dir(path)) // leftovers of killed runs, by their markers
	f, err := h5.CreateWith(tmp, spec.File)
	if err != nil {
		return nil, err
	}
	if err := outdir.Mark(tmp); err != nil {
		f.Close()
		os.Remove(tmp)
		return nil, err
	}
	w := &Writer{spec: spec, final: path, tmp: tmp, f: f, n: n, chunk: chunk, src: spec.Units, tf: 1}
	if spec.ForReaders {
		w.spec.Units = ReaderUnits
		w.spec.Storage = nil
		w.tf = w.factor(func(u Units) string { return u.Time })
	}
	w.header()
	w.layout()
	if w.err == nil && w.step == nil {
		w.err = errors.New("trajfile: no time-dependent element to write")
	}
	if w.err != nil {
		err := w.err
		w.Abort()
		return nil, err
	}
	return w, nil
}

func (w *Writer) do(err error) {
	if w.err == nil && err != nil {
		w.err = err
	}
}

func (w *Writer) header() {
	s, f := w.spec, w.f
	w.do(f.CreateGroup(AuthorGroup))
	w.do(f.CreateGroup(CreatorGroup))
	w.do(f.SetInts(H5MDGroup, "version", []int32{1, 1}, false))
	w.do(f.SetVarString(AuthorGroup, "name", s.Author))
	if s.Email != "" {
		w.do(f.SetVarString(AuthorGroup, "email", s.Email))
	}
	w.do(f.SetVarString(CreatorGroup, "name", s.Creator))
	w.do(f.SetVarString(CreatorGroup, "version", s.CreatorVersion))
	w.do(f.CreateGroup(UnitsModule))
	w.do(f.SetInts(UnitsModule, "version", []int32{1, 0}, false))
	w.do(f.SetVarString(UnitsModule, "system", "SI"))
	if s.NStates > 0 {
		m := OurModule
		w.do(f.CreateGroup(m))
		w.do(f.SetInts(m, "version", ModuleVersion, false))
	}
	w.do(f.CreateGroup(ParametersGroup))
	if s.Integrator != "" {
		w.do(f.SetVarString(ParametersGroup, "integrator", s.Integrator))
	}
	if s.Method != "" {
		w.do(f.SetVarString(ParametersGroup, "method", s.Method))
	}
	for _, k := range sortedKeys(s.Attrs) {
		w.do(f.SetVarString(ParametersGroup, k, s.Attrs[k]))
	}
	if s.TimeStep > 0 {
		w.scalarFloat(TimeStep, s.TimeStep*w.tf, s.Units.Time)
	}
	if s.NStates > 0 {
		ww, err := f.CreateDataset(NStates, h5.DatasetSpec{Type: h5.Int32})
		w.do(err)
		if err == nil {
			w.do(ww.Write([]int32{int32(s.NStates)}))
			w.do(ww.Close())
		}
	}
}

func (w *Writer) scalarFloat(path string, v float64, unit string) {
	ww, err := w.f.CreateDataset(path, h5.DatasetSpec{Type: h5.Float64})
	w.do(err)
	if err != nil {
		return
	}
	w.do(ww.Write([]float64{v}))
	w.do(ww.Close())
	w.do(w.f.SetVarString(path, UnitAttr, unit))
}

func (w *Writer) fixed(path string, data any, dims []int, unit string, typ h5.DType) {
	ww, err := w.f.CreateDataset(path, h5.DatasetSpec{Type: typ, Dims: dims})
	w.do(err)
	if err != nil {
		return
	}
	w.do(ww.Write(data))
	w.do(ww.Close())
	if unit != "" {
		w.do(w.f.SetVarString(path, UnitAttr, unit))
	}
}

// timeDep creates a time-dependent element: the group, its value dataset
// with rows of the given shape, and step/time (own for position, hard
// links to position's for the others).
func (w *Writer) timeDep(group string, shape []int, typ h5.DType, unit string) *element {
	w.do(w.f.CreateGroup(group))
	dims := append([]int{0}, shape...)
	maxd := append([]int{h5.Unlimited}, shape...)
	chunk := append([]int{w.chunk}, shape...)
	if w.spec.SeriesFrames > 0 && len(shape) == 2 && typ == h5.Float64 {
		chunk = []int{w.spec.SeriesFrames, 1, 1}
	}
	name := group[strings.LastIndexByte(group, '/')+1:]
	fl, st, stored := w.filtersFor(name)
	if typ != h5.Float64 {
		fl = h5.Filters{ScaleOffsetInt: true, Deflate: w.spec.Filters.Deflate, Fletcher32: w.spec.Filters.Fletcher32}
	}
	ww, err := w.f.CreateDataset(group+Value, h5.DatasetSpec{Type: typ, Dims: dims, MaxDims: maxd, Chunk: chunk, Filters: fl})
	w.do(err)
	if unit != "" {
		w.do(w.f.SetVarString(group+Value, UnitAttr, unit))
	}
	if stored {
		w.storageAttrs(group+Value, st)
	}
	row := 1
	for _, d := range shape {
		row *= d
	}
	e := &element{path: group + Value, row: row, w: ww, scaled: typ == h5.Float64 && fl.ScaleOffsetFloat}
	if w.step == nil && w.spec.Clock != nil && !w.spec.ForReaders {
		c := w.spec.Clock
		sw, err := w.f.CreateDataset(group+Step, h5.DatasetSpec{Type: h5.Int64})
		w.do(err)
		if err == nil {
			w.do(sw.Write([]int64{c.StepIncrement}))
			w.do(sw.Close())
		}
		w.do(w.f.SetInt64s(group+Step, OffsetAttr, []int64{c.StepOffset}, true))
		tw, err := w.f.CreateDataset(group+Time, h5.DatasetSpec{Type: h5.Float64})
		w.do(err)
		if err == nil {
			w.do(tw.Write([]float64{c.TimeIncrement * w.tf}))
			w.do(tw.Close())
		}
		w.do(w.f.SetFloats(group+Time, OffsetAttr, []float64{c.TimeOffset * w.tf}, true))
		w.do(w.f.SetVarString(group+Time, UnitAttr, w.spec.Units.Time))
		if _, tst, ok := w.filtersFor("time"); ok {
			w.storageAttrs(group+Time, tst)
		}
		w.step = &element{path: group + Step, row: 1}
		w.time = &element{path: group + Time, row: 1}
		w.clockGroup = group
	} else if w.step == nil {
		sw, err := w.f.CreateDataset(group+Step, h5.DatasetSpec{Type: h5.Int64, Dims: []int{0}, MaxDims: []int{h5.Unlimited}, Chunk: []int{max(w.chunk, 1024)},
			Filters: h5.Filters{ScaleOffsetInt: true, Deflate: fl.Deflate, Fletcher32: fl.Fletcher32}})
		w.do(err)
		tfl, tst, tstored := w.filtersFor("time")
		tw, err := w.f.CreateDataset(group+Time, h5.DatasetSpec{Type: h5.Float64, Dims: []int{0}, MaxDims: []int{h5.Unlimited}, Chunk: []int{max(w.chunk, 1024)},
			Filters: tfl})
		w.do(err)
		w.do(w.f.SetVarString(group+Time, UnitAttr, w.spec.Units.Time))
		if tstored {
			w.storageAttrs(group+Time, tst)
		}
		w.step = &element{path: group + Step, row: 1, w: sw}
		w.time = &element{path: group + Time, row: 1, w: tw}
		w.clockGroup = group
	} else {
		w.do(w.f.HardLink(w.clockGroup+Step, group+Step))
		w.do(w.f.HardLink(w.clockGroup+Time, group+Time))
	}
	w.elems = append(w.elems, e)
	return e
}

// atoms writes the particle group's time-independent part: box,
// species and masses.
func (w *Writer) atoms() {
	s, n := w.spec, w.n
	d := len(s.Boundary)
	w.do(w.f.CreateGroup(Particle(pgroup, Box)))
	w.do(w.f.SetInts(Particle(pgroup, Box), "dimension", []int32{int32(d)}, true))
	w.do(w.f.SetVarStrings(Particle(pgroup, Box), "boundary", s.Boundary))
	fLen := w.factor(func(u Units) string { return u.Length })
	if len(s.Edges) > 0 {
		w.fixed(Particle(pgroup, BoxEdges), scaled(s.Edges, fLen), []int{len(s.Edges)}, s.Units.Length, h5.Float64)
	}
	sp := make([]int32, n)
	for i, z := range s.Species {
		sp[i] = int32(z)
	}
	w.fixed(Particle(pgroup, Species), sp, []int{n}, "", h5.Int32)
	w.fixed(Particle(pgroup, Mass), scaled(s.Masses, w.factor(func(u Units) string { return u.Mass })), []int{n}, s.Units.Mass, h5.Float64)
}

func (w *Writer) layout() {
	s, n := w.spec, w.n
	if !s.ObservablesOnly {
		w.atoms()
	}

	// add creates an element whose numbers get returns in the given
	// units; sel picks its unit (nil: dimensionless or integer).
	add := func(group string, shape []int, typ h5.DType, sel func(Units) string, get func(*Frame) ([]float64, error)) {
		unit, f := "", 1.0
		if sel != nil {
			unit, f = sel(w.spec.Units), w.factor(sel)
		}
		w.timeDep(group, shape, typ, unit)
		w.get = append(w.get, func(fr *Frame) ([]float64, error) {
			v, err := get(fr)
			return scaled(v, f), err
		})
	}
	var (
		uLength   = func(u Units) string { return u.Length }
		uVelocity = func(u Units) string { return u.Velocity }
		uForce    = func(u Units) string { return u.Force }
		uEnergy   = func(u Units) string { return u.Energy }
		uInvTime  = func(u Units) string { return u.InverseTime }
	)
	vec := func(name string, pick func(*Frame) []float64) func(*Frame) ([]float64, error) {
		return func(fr *Frame) ([]float64, error) {
			v := pick(fr)
			if len(v) != 3*n {
				return nil, fmt.Errorf("%s has %d values, want %d (N=%d atoms x 3)", name, len(v), 3*n, n)
			}
			return v, nil
		}
	}
	scalar := func(pick func(*Frame) float64) func(*Frame) ([]float64, error) {
		return func(fr *Frame) ([]float64, error) { return []float64{pick(fr)}, nil }
	}
	sized := func(name string, want int, pick func(*Frame) []float64) func(*Frame) ([]float64, error) {
		return func(fr *Frame) ([]float64, error) {
			v := pick(fr)
			if len(v) != want {
				return nil, fmt.Errorf("%s has %d values, want %d", name, len(v), want)
			}
			return v, nil
		}
	}
	if !s.ObservablesOnly {
		add(Particle(pgroup, Position), []int{n, 3}, h5.Float64, uLength, vec("position", func(f *Frame) []float64 { return f.Position }))
	}
	if s.Velocity {
		add(Particle(pgroup, Velocity), []int{n, 3}, h5.Float64, uVelocity, vec("velocity", func(f *Frame) []float64 { return f.Velocity }))
	}
	if s.Force {
		add(Particle(pgroup, Force), []int{n, 3}, h5.Float64, uForce, vec("force", func(f *Frame) []float64 { return f.Force }))
	}
	for i, x := range s.Extras {
		if why := ExtraNameProblem(x.Name); why != "" || x.Width < 1 {
			w.do(fmt.Errorf("trajfile: extra element %q (width %d): %s", x.Name, x.Width, why))
			return
		}
		add(Particle(pgroup, x.Name), []int{n, x.Width}, h5.Float64, nil, func(f *Frame) ([]float64, error) {
			if i >= len(f.Extras) || len(f.Extras[i]) != n*x.Width {
				return nil, fmt.Errorf("per-atom column %s missing or not %d x %d values (every frame needs it, with the same width)", x.Name, n, x.Width)
			}
			return f.Extras[i], nil
		})
	}
	if s.Kinetic {
		add(KineticEnergy, nil, h5.Float64, uEnergy, scalar(func(f *Frame) float64 { return f.Kinetic }))
	}
	if s.Potential {
		add(PotentialEnergy, nil, h5.Float64, uEnergy, scalar(func(f *Frame) float64 { return f.Potential }))
	}
	if s.Total {
		add(TotalEnergy, nil, h5.Float64, uEnergy, scalar(func(f *Frame) float64 { return f.Total }))
	}
	ns := s.NStates
	if ns <= 0 {
		return
	}
	if s.StateEnergies {
		add(StateEnergies, []int{ns}, h5.Float64, uEnergy, sized("state energies", ns, func(f *Frame) []float64 { return f.StateEnergies }))
	}
	if s.ActiveState {
		add(ActiveState, nil, h5.Int32, nil, func(f *Frame) ([]float64, error) {
			if f.ActiveState < 0 || f.ActiveState >= ns {
				return nil, fmt.Errorf("active state %d outside 0..%d", f.ActiveState, ns-1)
			}
			return []float64{float64(f.ActiveState)}, nil
		})
	}
	if s.Populations {
		add(Populations, []int{ns}, h5.Float64, nil, sized("populations", ns, func(f *Frame) []float64 { return f.Populations }))
	}
	if s.Amplitudes {
		add(Amplitudes, []int{ns, 2}, h5.Float64, nil, sized("amplitudes", 2*ns, func(f *Frame) []float64 { return f.Amplitudes }))
	}
	if s.Couplings {
		add(Couplings, []int{ns, ns}, h5.Float64, uInvTime, sized("couplings", ns*ns, func(f *Frame) []float64 { return f.Couplings }))
	}
}

// WriteFrame appends one frame. Steps must increase strictly.
func (w *Writer) WriteFrame(fr *Frame) error {
	if w.err != nil {
		return w.err
	}
	if w.closed {
		return errors.New("trajfile: WriteFrame after Close")
	}
	if c := w.spec.Clock; c != nil {
		// Checked in both storage modes: a Clock claims uniform sampling.
		i := int64(w.frames)
		wantT := c.TimeOffset + float64(i)*c.TimeIncrement
		if fr.Step != c.StepOffset+i*c.StepIncrement || math.Abs(fr.Time-wantT) > 1e-9*math.Max(math.Abs(c.TimeIncrement), math.Abs(wantT)) {
			w.err = fmt.Errorf("frame %d: step %d time %g do not follow the fixed clock (step %d, time %g)", w.frames, fr.Step, fr.Time, c.StepOffset+i*c.StepIncrement, wantT)
			return w.err
		}
	}
	if w.frames > 0 && fr.Step <= w.lastStep {
		w.err = fmt.Errorf("frame %d: step %d does not follow step %d; steps must increase", w.frames, fr.Step, w.lastStep)
		return w.err
	}
	w.lastStep = fr.Step
	for i, get := range w.get {
		v, err := get(fr)
		if err != nil {
			w.err = fmt.Errorf("frame %d (step %d): %w", w.frames, fr.Step, err)
			return w.err
		}
		e := w.elems[i]
		if e.scaled {
			for j, x := range v {
				if x == 0 && math.Signbit(x) {
					if len(e.negZeros) == MaxNegativeZeros {
						w.err = fmt.Errorf("frame %d (step %d): %s: more than %d negative zeros; store it as float64 (convert does so when scan counts them)", w.frames, fr.Step, e.path, MaxNegativeZeros)
						return w.err
					}
					e.negZeros = append(e.negZeros, int64(w.frames)*int64(e.row)+int64(j))
				}
			}
		}
		e.buf = append(e.buf, v...)
	}
	w.step.ibuf = append(w.step.ibuf, fr.Step)
	w.time.buf = append(w.time.buf, fr.Time*w.tf)
	w.frames++
	if len(w.step.ibuf) >= w.chunk {
		w.flush()
	}
	return w.err
}

func (w *Writer) flush() {
	if len(w.step.ibuf) == 0 {
		return
	}
	for _, e := range w.elems {
		if e.w == nil {
			continue
		}
		if e.path == ActiveState+Value {
			iv := make([]int32, len(e.buf))
			for i, x := range e.buf {
				iv[i] = int32(x)
			}
			w.do(e.w.Append(iv))
		} else {
			w.do(e.w.Append(e.buf))
		}
		e.buf = e.buf[:0]
	}
	if w.step.w != nil { // explicit mode
		w.do(w.step.w.Append(w.step.ibuf))
		w.do(w.time.w.Append(w.time.buf))
	}
	w.step.ibuf = w.step.ibuf[:0]
	w.time.buf = w.time.buf[:0]
}

// WriteHop records one hop attempt; hops are written by Close.
func (w *Writer) WriteHop(h Hop) error {
	if w.err != nil {
		return w.err
	}
	if !w.spec.Hops {
		w.err = errors.New("trajfile: WriteHop without Spec.Hops")
		return w.err
	}
	if h.From < 0 || h.To < 0 || h.From >= w.spec.NStates || h.To >= w.spec.NStates {
		w.err = fmt.Errorf("hop at step %d: states %d -> %d outside 0..%d", h.Step, h.From, h.To, w.spec.NStates-1)
		return w.err
	}
	w.hops = append(w.hops, h)
	return nil
}

func (w *Writer) writeHops() {
	const g = HopsGroup
	nh := len(w.hops)
	step := make([]int64, nh)
	tm := make([]float64, nh)
	from := make([]int32, nh)
	to := make([]int32, nh)
	kind := make([]int32, nh)
	for i, h := range w.hops {
		step[i], tm[i], from[i], to[i] = h.Step, h.Time*w.tf, int32(h.From), int32(h.To)
		if h.Frustrated {
			kind[i] = 1
		}
	}
	w.do(w.f.CreateGroup(g))
	w.fixed(HopStep, step, []int{nh}, "", h5.Int64)
	w.fixed(HopTime, tm, []int{nh}, w.spec.Units.Time, h5.Float64)
	w.fixed(HopFrom, from, []int{nh}, "", h5.Int32)
	w.fixed(HopTo, to, []int{nh}, "", h5.Int32)
	w.fixed(HopKind, kind, []int{nh}, "", h5.Int32)
	w.do(w.f.SetVarStrings(HopKind, "kind_names", []string{"accepted", "frustrated"}))
}

// SetParameter writes a string attribute on /parameters, e.g. the
// provenance record once the conversion knows it; before Close.
func (w *Writer) SetParameter(name, value string) error {
	if w.err != nil {
		return w.err
	}
	if w.closed {
		return errors.New("trajfile: SetParameter after Close")
	}
	w.do(w.f.SetVarString(ParametersGroup, name, value))
	return w.err
}

// Frames is the number of frames written so far.
func (w *Writer) Frames() int { return w.frames }

// Close flushes, closes and moves the file into place. On any error the
// partial file is removed and the target is left untouched.
func (w *Writer) Close() error {
	if w.closed {
		return w.err
	}
	w.closed = true
	if w.frames == 0 {
		w.do(errors.New("trajfile: no frames written"))
	}
	if w.err == nil {
		w.flush()
		if w.spec.Hops {
			w.writeHops()
		}
		for _, e := range w.elems {
			if len(e.negZeros) > 0 {
				w.do(w.f.SetInt64s(e.path, NegativeZerosAttr, e.negZeros, false))
			}
		}
	}
	for _, e := range append(w.elems, w.step, w.time) {
		if e != nil && e.w != nil {
			w.do(e.w.Close())
		}
	}
	w.do(w.f.Close())
	if w.err == nil {
		// Link, not rename: link fails if the target appeared meanwhile.
		if err := os.Link(w.tmp, w.final); err != nil {
			w.do(fmt.Errorf("%s: cannot move output into place: %w", w.final, err))
		}
	}
	os.Remove(w.tmp)
	outdir.Unmark(w.tmp)
	return w.err
}

// Abort discards the partial file.
func (w *Writer) Abort() {
	if w.closed {
		return
	}
	w.closed = true
	for _, e := range append(w.elems, w.step, w.time) {
		if e != nil && e.w != nil {
			e.w.Close()
		}
	}
	w.f.Close()
	os.Remove(w.tmp)
	outdir.Unmark(w.tmp)
}
