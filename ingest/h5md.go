package ingest

import (
	"fmt"
	"io"
	"path"
	"slices"
	"strings"

	"trajvault/internal/elements"
	"trajvault/internal/finding"
	"trajvault/internal/h5"
	"trajvault/internal/quantity"
	"trajvault/internal/textnum"
	"trajvault/internal/trajfile"
)

// KindH5MD is an existing H5MD file (H5MD 1.0 or 1.1, any writer),
// repacked into the layout: every value is kept as stored (float64,
// lossless), units are checked and stored in their canonical spelling,
// and the provenance records the file's SHA-256 like any source.
const KindH5MD SourceKind = "h5md"

// h5mdFormat reads H5MD files as one geometry source: the frames of one
// particle group (positions, and velocities and forces when stored on
// the same clock) with the scalar energies under /observables on that
// clock. What the layout does not hold (other groups, the box, other
// observables, ...) is listed as not stored (P16), never dropped
// silently.
var h5mdFormat = Reader{
	Kind: KindH5MD, Role: RoleGeometry, Extensions: []string{".h5", ".h5md", ".hdf5"}, ProvenanceRole: "repacked H5MD file",
	Probe: probeH5MD,
	Open:  func(p string, _ any, _ *Recipe) (source, error) { return openH5MD(p) },
}

// ProbeH5MD reports why p is not an H5MD file convert can read, or nil.
func ProbeH5MD(p string) error { return probeH5MD(p) }

// probeH5MD accepts HDF5 files with /h5md (H5MD 1.1: a file is H5MD by
// that group and its version, never by its name).
func probeH5MD(p string) error {
	f, err := h5.Open(p)
	if err != nil {
		return err
	}
	defer f.Close()
	if f.Kind(trajfile.H5MDGroup) != h5.Group {
		return fmt.Errorf("%s: an HDF5 file without %s, so not H5MD", p, trajfile.H5MDGroup)
	}
	return nil
}

// h5mdBlockValues bounds the values one block of frames holds (8 MiB of
// float64 per element).
const h5mdBlockValues = 1 << 20

type h5mdSource struct {
	path  string
	r     *trajfile.Reader
	clock *trajfile.Clock
	// atoms are the per-atom elements read, with their quantity names.
	atoms   []*trajfile.Element
	atomQ   []string
	scalars []h5mdScalar
	symbols []string
	masses  []float64
	unitsOf map[string]string
	fmts    formatSet
	block   int         // frames per block
	start   int         // first frame of the loaded block
	buf     [][]float64 // per atom element, the loaded block
	frame   int
	notes
}

// h5mdScalar is one per-frame energy of /observables.
type h5mdScalar struct {
	index  int // into record.scalar (quantity.ScalarNames)
	values []float64
}

// short is the format of values read from binary files: no printed
// digits exist, so they are stored losslessly and printed in the
// shortest form that reads back to the same float64.
var short, _ = textnum.ParseFormat("short:" + string(textnum.ShortG))

func openH5MD(p string) (*h5mdSource, error) {
	if err := probeH5MD(p); err != nil {
		return nil, err
	}
	groups, err := trajfile.Groups(p)
	if err != nil {
		return nil, err
	}
	switch {
	case len(groups) == 0:
		return nil, fmt.Errorf("%s: no particle group with positions under %s; nothing to convert", p, trajfile.ParticlesGroup)
	case len(groups) > 1:
		return nil, fmt.Errorf("%s: %d particle groups (%s); the layout holds one: write each group's atoms to a file of its own, or audit and export the file as it is (--group NAME)", p, len(groups), strings.Join(groups, ", "))
	}
	r, err := trajfile.OpenWindowReaderWith(p, trajfile.ReadOptions{Group: groups[0]})
	if err != nil {
		return nil, err
	}
	s := &h5mdSource{path: p, r: r, unitsOf: map[string]string{}, fmts: formatSet{}}
	if err := s.init(); err != nil {
		r.Close()
		return nil, fmt.Errorf("%s: %w", p, err)
	}
	return s, nil
}

func (s *h5mdSource) init() error {
	r := s.r
	if r.Species == nil {
		return fmt.Errorf("%s; the layout needs each atom's chemical element (species as atomic numbers); the file can be validated, audited and exported as it is", r.NoSpecies)
	}
	for i, z := range r.Species {
		sym := elements.Symbol(z)
		if elements.Number(sym) != z || z < 1 {
			return fmt.Errorf("%s: atom %d has species %d, not an atomic number; the layout reads species as atomic numbers", r.Particle(trajfile.Species), i, z)
		}
		s.symbols = append(s.symbols, sym)
	}
	s.add("species", sourceNote{code: PAmbiguous, sev: finding.Note,
		msg: fmt.Sprintf("%s read as atomic numbers (H5MD leaves the meaning of species to the writer)", r.Particle(trajfile.Species))})
	pos := r.Particle(trajfile.Position)
	c, err := r.Clock(pos)
	if err != nil {
		return err
	}
	s.clock = c
	s.unitsOf[string(quantity.Time)] = c.TimeUnit
	s.fmts.merge(quantity.TimeQ, short)
	for _, a := range []struct{ el, q string }{{trajfile.Position, quantity.PositionQ}, {trajfile.Velocity, quantity.VelocityQ}, {trajfile.Force, quantity.ForceQ}} {
		p := r.Particle(a.el)
		if !r.IsElement(p) {
			continue
		}
		if a.el != trajfile.Position && !s.sameClock(p) {
			s.notStored(p, "sampled on another clock than the positions")
			continue
		}
		e, err := r.Element(p)
		if err != nil {
			return err
		}
		if e.Shape.Rank != 3 || e.Shape.Dims[1] != r.N || e.Shape.Dims[2] != 3 {
			return fmt.Errorf("%s%s: shape %v, want [%d][%d][3]", p, trajfile.Value, e.Shape.Dims, r.T, r.N)
		}
		s.atoms, s.atomQ = append(s.atoms, e), append(s.atomQ, a.q)
		s.unitsOf[string(quantity.Kind(a.q))] = e.Unit
		s.fmts.merge(a.q, short)
	}
	if m, unit, err := r.Static(trajfile.Mass); err == nil && len(m) == r.N {
		s.masses = m // as stored; scan asks for a unit when it has none
		s.fmts.merge(quantity.MassQ, short)
		s.unitsOf[string(quantity.Mass)] = unit
	}
	if err := s.observables(); err != nil {
		return err
	}
	s.others()
	s.block = max(1, h5mdBlockValues/(3*r.N))
	s.start = -1
	return nil
}

// sameClock reports whether element el has the positions' steps.
func (s *h5mdSource) sameClock(el string) bool {
	c, err := s.r.Clock(el)
	return err == nil && slices.Equal(c.Steps, s.clock.Steps)
}

// observables takes the scalar energies on the positions' clock, in one
// energy unit; every other observable is listed as not stored.
func (s *h5mdSource) observables() error {
	r := s.r
	energyUnit := ""
	for _, name := range r.Members(trajfile.ObservablesGroup) {
		el := trajfile.ObservablesGroup + "/" + name
		q, k := quantity.Column(name)
		idx := slices.Index(quantity.ScalarNames[:], q)
		switch {
		case !r.IsElement(el):
			s.notStored(el, "not a time-dependent element the layout reads")
			continue
		case idx < 0 || k >= 0:
			s.notStored(el, "no place in the layout for it")
			continue
		case !s.sameClock(el):
			s.notStored(el, "sampled on another clock than the positions")
			continue
		}
		e, err := r.Element(el)
		if err != nil {
			return err
		}
		if e.Shape.Rank != 1 {
			s.notStored(el, fmt.Sprintf("shape %v, not one number per frame", e.Shape.Dims))
			continue
		}
		if energyUnit != "" && e.Unit != energyUnit {
			return fmt.Errorf("%s%s: unit %q differs from the other energies' %q; the layout stores all energies in one unit", el, trajfile.Value, e.Unit, energyUnit)
		}
		energyUnit = e.Unit
		v, err := r.Raw(e, 0, r.T)
		if err != nil {
			return err
		}
		s.scalars = append(s.scalars, h5mdScalar{index: idx, values: v})
		s.fmts.merge(q, short)
	}
	if energyUnit != "" {
		s.unitsOf[string(quantity.Energy)] = energyUnit
	}
	return nil
}

// others lists what the file holds beyond what is read: other particle
// group members, and the groups beside /particles and /observables.
func (s *h5mdSource) others() {
	r := s.r
	read := map[string]bool{trajfile.Position: true, trajfile.Species: true}
	for _, e := range s.atoms {
		read[path.Base(e.Path)] = true
	}
	if s.masses != nil {
		read[trajfile.Mass] = true
	}
	for _, m := range r.Members(r.Group) {
		if !read[m] {
			s.notStored(r.Particle(m), "no place for it in the layout")
		}
	}
	for _, g := range []string{trajfile.ParametersGroup, trajfile.ConnectivityGroup} {
		for _, m := range r.Members(g) {
			s.notStored(g+"/"+m, "no place for it in the layout")
		}
	}
	for _, m := range r.Members(trajfile.ParticlesGroup) {
		if g := trajfile.ParticleGroup(m); g != r.Group {
			s.notStored(g, "a particle group without positions")
		}
	}
	known := map[string]bool{}
	for _, g := range []string{trajfile.H5MDGroup, trajfile.ParticlesGroup, trajfile.ObservablesGroup, trajfile.ParametersGroup, trajfile.ConnectivityGroup} {
		known[path.Base(g)] = true
	}
	for _, m := range r.Members(trajfile.Root) {
		if !known[m] {
			s.notStored(trajfile.Root+m, "outside what H5MD 1.1 defines")
		}
	}
}

func (s *h5mdSource) notStored(p, why string) {
	s.add(p, sourceNote{code: PNotStored, sev: finding.Note, msg: fmt.Sprintf("%s not stored: %s", p, why), notStored: p + " (" + why + ")"})
}

func (s *h5mdSource) file() string                        { return s.path }
func (s *h5mdSource) provides() map[string]textnum.Format { return s.fmts }
func (s *h5mdSource) timeFormat() textnum.Format          { return short }
func (s *h5mdSource) units() map[string]string {
	out := map[string]string{}
	for k, u := range s.unitsOf {
		if u != "" {
			out[k] = u
		}
	}
	return out
}
func (s *h5mdSource) hops() []hop { return nil }
func (s *h5mdSource) close()      { s.r.Close() }

// next yields frame by frame, reading blocks of frames per element.
func (s *h5mdSource) next() (*record, error) {
	r := s.r
	if s.frame >= r.T {
		return nil, io.EOF
	}
	if s.start < 0 || s.frame >= s.start+s.block {
		s.start = s.frame
		n := min(s.block, r.T-s.start)
		s.buf = s.buf[:0]
		for _, e := range s.atoms {
			v, err := r.Raw(e, s.start, n)
			if err != nil {
				return nil, err
			}
			s.buf = append(s.buf, v)
		}
	}
	i, w := s.frame-s.start, 3*r.N
	rec := &record{step: s.clock.Steps[s.frame], hasStep: true, time: s.clock.Times[s.frame], hasTime: true, symbols: s.symbols}
	for k, q := range s.atomQ {
		rec.atoms = append(rec.atoms, atomColumn{quantity: q, values: s.buf[k][i*w : (i+1)*w]})
	}
	if s.masses != nil {
		rec.atoms = append(rec.atoms, atomColumn{quantity: quantity.MassQ, values: s.masses})
	}
	for _, sc := range s.scalars {
		rec.scalar[sc.index], rec.hasScalar[sc.index] = sc.values[s.frame], true
	}
	s.frame++
	return rec, nil
}
