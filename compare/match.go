package compare

import (
	"fmt"
	"math"
	"sort"
	"strings"

	"trajvault/internal/trajfile"
	"trajvault/internal/units"
)

// How a pair was matched (Pair.MatchedBy).
const (
	ByName   = "name"
	ByStart  = "initial conditions"
	BySingle = "only trajectory on each side"
)

// start is what identifies a trajectory's initial conditions: its atoms
// and the first frame's positions (angstrom) and velocities (angstrom/fs,
// nil when not stored), each value with its printed precision.
type start struct {
	species        []int
	pos, posTol    []float64
	vel, velTol    []float64
	posFmt, velFmt string
}

// readStart reads the first frame of element el of r in unit, with the
// tolerance of each value (tolerance: one unit in the last printed place).
func readFirst(r *trajfile.Reader, el, unit string) (v, tol []float64, err error) {
	e, err := r.Element(r.Particle(el))
	if err != nil || e == nil {
		return nil, nil, err
	}
	f, err := units.Factor(e.Unit, unit)
	if err != nil {
		return nil, nil, fmt.Errorf("%s: %s unit %q: %w", r.Path, el, e.Unit, err)
	}
	raw, err := r.Raw(e, 0, 1)
	if err != nil {
		return nil, nil, fmt.Errorf("%s: %w", r.Path, err)
	}
	v, tol = make([]float64, len(raw)), make([]float64, len(raw))
	for i, x := range raw {
		if math.IsNaN(x) || math.IsInf(x, 0) {
			return nil, nil, fmt.Errorf("%s: %s of the first frame not finite; run trajvault validate", r.Path, el)
		}
		v[i], tol[i] = x*f, tolerance(e, x)*f
	}
	return v, tol, nil
}

func readStart(r *trajfile.Reader) (*start, error) {
	s := &start{species: r.Species}
	var err error
	if s.pos, s.posTol, err = readFirst(r, trajfile.Position, "angstrom"); err != nil {
		return nil, err
	}
	if s.vel, s.velTol, err = readFirst(r, trajfile.Velocity, "angstrom fs-1"); err != nil {
		return nil, err
	}
	return s, nil
}

// sameStart: the same atoms, and every position (and every velocity
// where both store them) equal within the printed precision of either
// side. Positions are required: a file without them has no start.
func sameStart(a, b *start) bool {
	if len(a.species) != len(b.species) || a.pos == nil || len(a.pos) != len(b.pos) {
		return false
	}
	for i := range a.species {
		if a.species[i] != b.species[i] {
			return false
		}
	}
	within := func(x, y, tx, ty []float64) bool {
		for i := range x {
			if math.Abs(x[i]-y[i]) > math.Max(tx[i], ty[i]) {
				return false
			}
		}
		return true
	}
	if !within(a.pos, b.pos, a.posTol, b.posTol) {
		return false
	}
	if a.vel != nil && b.vel != nil && len(a.vel) == len(b.vel) && !within(a.vel, b.vel, a.velTol, b.velTol) {
		return false
	}
	return true
}

// matchByStart pairs trajectories left unmatched by name whose initial
// conditions agree within printed precision (sameStart), comparing every
// unmatched start of A with every one of B (the first frame only, read
// once per file; quadratic in the unmatched counts). Only one-to-one
// matches are paired; a trajectory that starts like several on the other
// side is left unmatched, and ambiguous says why (by name, A and B).
func matchByStart(sa *side, onlyA []string, sb *side, onlyB []string) (pairs map[string]string, ambiguous map[string]string, err error) {
	read := func(s *side, names []string) (map[string]*start, error) {
		out := map[string]*start{}
		for _, n := range names {
			r, err := s.open(n)
			if err != nil {
				return nil, err
			}
			st, err := readStart(r)
			r.Close()
			if err != nil {
				return nil, err
			}
			out[n] = st
		}
		return out, nil
	}
	stA, err := read(sa, onlyA)
	if err != nil {
		return nil, nil, err
	}
	stB, err := read(sb, onlyB)
	if err != nil {
		return nil, nil, err
	}
	candA, candB := map[string][]string{}, map[string][]string{}
	for _, a := range onlyA {
		for _, b := range onlyB {
			if sameStart(stA[a], stB[b]) {
				candA[a] = append(candA[a], b)
				candB[b] = append(candB[b], a)
			}
		}
	}
	pairs, ambiguous = map[string]string{}, map[string]string{}
	for _, a := range onlyA {
		c := candA[a]
		switch {
		case len(c) == 1 && len(candB[c[0]]) == 1:
			pairs[a] = c[0]
		case len(c) > 1:
			ambiguous["A:"+a] = "starts like " + strings.Join(c, ", ") + " of B; not paired"
		case len(c) == 1:
			others := append([]string(nil), candB[c[0]]...)
			sort.Strings(others)
			ambiguous["A:"+a] = fmt.Sprintf("starts like %s of B, as do %s of A; not paired", c[0], strings.Join(others, ", "))
		}
	}
	for _, b := range onlyB {
		if c := candB[b]; len(c) > 1 {
			ambiguous["B:"+b] = "starts like " + strings.Join(c, ", ") + " of A; not paired"
		}
	}
	return pairs, ambiguous, nil
}
