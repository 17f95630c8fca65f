package trajfile

import (
	"fmt"

	"trajvault/internal/h5"
	"trajvault/internal/units"
)

// Reader reads a trajectory file in the layout for analysis, converting
// every quantity to atomic units (bohr, au_time, hartree, electron mass),
// whatever units the file stores.
type Reader struct {
	f       *h5.File
	Path    string
	N       int       // atoms
	T       int       // frames
	Species []int     // atomic numbers
	Masses  []float64 // electron masses
	Steps   []int64   // per frame
	Times   []float64 // per frame, au_time
	States  int
	// TimeStep is the integration step in au_time (/parameters/time_step),
	// or 0 when the file does not record it.
	TimeStep float64
}

const pg = "/particles/" + Group

// OpenReader opens a trajectory file for analysis.
func OpenReader(path string) (*Reader, error) {
	f, err := h5.Open(path)
	if err != nil {
		return nil, err
	}
	r := &Reader{f: f, Path: path}
	if err := r.init(); err != nil {
		f.Close()
		return nil, fmt.Errorf("%s: %w", path, err)
	}
	return r, nil
}

// Close releases the file.
func (r *Reader) Close() error { return r.f.Close() }

func (r *Reader) unitFactor(path, to string) (float64, error) {
	a, err := r.f.Attr(path, "unit")
	if err != nil || len(a.Strings) != 1 {
		return 0, fmt.Errorf("%s has no unit attribute; run trajvault validate", path)
	}
	return units.Factor(a.Strings[0], to)
}

func (r *Reader) init() error {
	sp, _, err := r.f.ReadInt64(pg + "/species")
	if err != nil {
		return fmt.Errorf("no species: %v", err)
	}
	r.N = len(sp)
	for _, z := range sp {
		r.Species = append(r.Species, int(z))
	}
	m, _, err := r.f.ReadFloat64(pg + "/mass")
	if err != nil || len(m) != r.N {
		return fmt.Errorf("no masses for %d atoms", r.N)
	}
	mf, err := r.unitFactor(pg+"/mass", "me")
	if err != nil {
		return err
	}
	for _, x := range m {
		r.Masses = append(r.Masses, x*mf)
	}
	info, err := r.f.Info(pg + "/position/value")
	if err != nil || info.Shape.Rank != 3 {
		return fmt.Errorf("no positions [T][N][3]")
	}
	r.T = info.Shape.Dims[0]
	r.Steps, r.Times, err = r.clock(pg + "/position")
	if err != nil {
		return err
	}
	if v, _, err := r.f.ReadInt64("/parameters/n_states"); err == nil && len(v) == 1 {
		r.States = int(v[0])
	}
	if v, _, err := r.f.ReadFloat64("/parameters/time_step"); err == nil && len(v) == 1 {
		if fct, err := r.unitFactor("/parameters/time_step", "au_time"); err == nil {
			r.TimeStep = v[0] * fct
		}
	}
	return nil
}

// clock reads an element's steps and times (au_time), explicit or fixed.
func (r *Reader) clock(el string) ([]int64, []float64, error) {
	st, shape, err := r.f.ReadInt64(el + "/step")
	if err != nil {
		return nil, nil, fmt.Errorf("no step for %s", el)
	}
	tm, tshape, err := r.f.ReadFloat64(el + "/time")
	if err != nil {
		return nil, nil, fmt.Errorf("no time for %s", el)
	}
	tf, err := r.unitFactor(el+"/time", "au_time")
	if err != nil {
		return nil, nil, err
	}
	info, _ := r.f.Info(el + "/value")
	T := 0
	if info.Shape.Rank > 0 {
		T = info.Shape.Dims[0]
	}
	steps := make([]int64, T)
	times := make([]float64, T)
	if shape.Rank == 0 {
		var so int64
		var to float64
		if a, err := r.f.Attr(el+"/step", "offset"); err == nil && len(a.Ints) == 1 {
			so = a.Ints[0]
		}
		if a, err := r.f.Attr(el+"/time", "offset"); err == nil && len(a.Floats) == 1 {
			to = a.Floats[0]
		}
		for i := range steps {
			steps[i] = so + int64(i)*st[0]
			times[i] = (to + float64(i)*tm[0]) * tf
		}
		return steps, times, nil
	}
	if len(st) != T || tshape.Rank != 1 || len(tm) != T {
		return nil, nil, fmt.Errorf("%s: step/time lengths differ from value", el)
	}
	for i := range steps {
		steps[i], times[i] = st[i], tm[i]*tf
	}
	return steps, times, nil
}

// Has reports whether the time-dependent element exists (e.g.
// "/particles/all/velocity", "/observables/total_energy").
func (r *Reader) Has(el string) bool { return r.f.Kind(el+"/value") == h5.Dataset }

// Values reads a whole time-dependent element converted to unit ("" for
// dimensionless or integer data), with its shape.
func (r *Reader) Values(el, unit string) ([]float64, h5.Shape, error) {
	v, shape, err := r.f.ReadFloat64(el + "/value")
	if err != nil {
		return nil, shape, err
	}
	if unit != "" {
		fct, err := r.unitFactor(el+"/value", unit)
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
	info, err := r.f.Info(el + "/value")
	if err != nil {
		return nil, err
	}
	v, err := r.f.ReadRows(el+"/value", info.Shape, start, count)
	if err != nil {
		return nil, err
	}
	fct, err := r.unitFactor(el+"/value", unit)
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
	const g = "/observables/electronic/hops"
	if r.f.Kind(g) != h5.Group {
		return nil, nil
	}
	st, _, err := r.f.ReadInt64(g + "/step")
	if err != nil {
		return nil, err
	}
	from, _, _ := r.f.ReadInt64(g + "/from_state")
	to, _, _ := r.f.ReadInt64(g + "/to_state")
	kind, _, _ := r.f.ReadInt64(g + "/kind")
	if len(from) != len(st) || len(to) != len(st) || len(kind) != len(st) {
		return nil, fmt.Errorf("hops table columns differ in length")
	}
	out := make([]Hop, len(st))
	for i := range st {
		out[i] = Hop{Step: st[i], From: int(from[i]), To: int(to[i]), Frustrated: kind[i] == 1}
	}
	return out, nil
}
