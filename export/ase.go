package export

import (
	"bufio"
	"fmt"
	"math"
	"strconv"
	"strings"

	"trajvault/internal/elements"
	"trajvault/internal/textnum"
	"trajvault/internal/trajfile"
	"trajvault/internal/units"
)

// Conventions of the numbers export writes.
const (
	// ConventionStored prints every number in the unit it is stored in,
	// digit for digit as it was printed (the default).
	ConventionStored = "stored"
	// ConventionASE writes extended XYZ in the units of the Python MD
	// toolkits' convention (common practice): lengths in angstrom,
	// energies in eV, forces in eV/angstrom, masses in u and momenta in
	// u angstrom per angstrom*sqrt(u/eV) (units.ASETimeSecond, about
	// 10.1805 fs), with the per-atom columns pos, masses, momenta and
	// forces and the potential energy as energy=, as those toolkits write
	// and read them.
	ConventionASE = "ase"
)

// aseNote says in selection.json what the ASE convention changed.
const aseNote = "numbers converted to the ASE convention: pos in angstrom, energies in eV, forces in eV/angstrom, masses in u, momenta = mass x velocity in u angstrom per angstrom*sqrt(u/eV) (10.1805 fs); numbers whose unit did not change are printed as recorded"

// Conventions lists the accepted values of Options.Convention.
var Conventions = []string{ConventionStored, ConventionASE}

// aseTimeFs is the ASE-convention time unit in fs.
var aseTimeFs = units.ASETimeSecond / 1e-15

// aseFactor returns f such that a value in unit times f is the value in
// the ASE convention's unit of the same dimension: angstrom, eV (also
// for energies stored as wavenumbers, E = h c / lambda), eV/angstrom, u,
// angstrom/t and 1/t with t = angstrom sqrt(u/eV). Dimensionless values
// keep f = 1. The factor is exactly 1 when unit is already the
// convention's unit, so those numbers print as recorded.
func aseFactor(unit string) (float64, error) {
	u, err := units.Parse(unit)
	if err != nil {
		return 0, err
	}
	switch u.Dim {
	case units.Dimensionless:
		return units.Factor(unit, "")
	case units.Length:
		return units.Factor(unit, "angstrom")
	case units.Energy, units.Wavenumber:
		return units.Factor(unit, "eV")
	case units.Force:
		return units.Factor(unit, "eV angstrom-1")
	case units.Mass:
		return units.Factor(unit, "u")
	case units.Velocity:
		f, err := units.Factor(unit, "angstrom fs-1")
		return f * aseTimeFs, err
	case units.InverseTime:
		f, err := units.Factor(unit, "fs-1")
		return f * aseTimeFs, err
	}
	return 0, fmt.Errorf("unit %q (%v) has no unit in the ASE convention (length, energy, force, mass, velocity, inverse time)", unit, u.Dim)
}

// scaled prints q's values multiplied by f: as recorded when f is 1,
// else in the shortest form that reads back to the same float64.
type scaled struct {
	q *quantity
	f float64
}

func (s scaled) append(b []byte, v float64) []byte {
	if s.f == 1 || s.q.integer() {
		return s.q.append(b, v)
	}
	return strconv.AppendFloat(b, v*s.f, 'g', -1, 64)
}

// momenta turns stored velocities into momenta in the ASE convention,
// p = m v f (m in u), printed in the momenta's recorded format when the
// file says the velocities were derived from momenta printed in the
// convention's own unit: then the digits are the source's (convert keeps
// m v within 0.99 of half a unit of the last printed decimal, see
// ingest.momentumStorage).
type momenta struct {
	m      []float64 // per selected atom, u
	f      float64   // stored velocity unit to angstrom/t
	format textnum.Format
	exact  bool
}

func (p *plan) aseMomenta(vel *quantity, atoms []int) (*momenta, error) {
	f, err := aseFactor(vel.el.Unit)
	if err != nil {
		return nil, fmt.Errorf("%s: velocity: %w", p.r.Path, err)
	}
	all, err := p.r.MassesIn("u")
	if err != nil {
		return nil, fmt.Errorf("%s: %w", p.r.Path, err)
	}
	mo := &momenta{f: f}
	for _, a := range atoms {
		mo.m = append(mo.m, all[a])
	}
	par := p.r.Setup().Parameters
	if fm, err := textnum.ParseFormat(par[trajfile.MomentumFormatAttr]); err == nil && fm.Fixed() {
		if pf, err := units.Factor(par[trajfile.MomentumUnitAttr], "u angstrom fs-1"); err == nil && math.Abs(pf*aseTimeFs-1) < 1e-12 {
			mo.format, mo.exact = fm, true
		}
	}
	return mo, nil
}

func (mo *momenta) append(b []byte, atom int, v float64) []byte {
	p := mo.m[atom] * v * mo.f
	if mo.exact {
		return mo.format.Append(b, p)
	}
	return strconv.AppendFloat(b, p, 'g', -1, 64)
}

// writeASE writes the selected frames and atoms as extended XYZ in the
// ASE convention (ConventionASE): per-atom columns species, pos, masses
// and momenta (when velocities are selected) and forces; per-frame
// quantities as key=value in the convention's units; step, time (as
// stored, in time_unit) and the frame index.
func (p *plan) writeASE(w *bufio.Writer) error {
	atoms := p.atomList()
	pos := p.get("position")
	vel, frc := p.get("velocity"), p.get("force")
	var frameQ []*quantity
	for _, q := range p.qs {
		if q.def.kind != perAtom {
			frameQ = append(frameQ, q)
		}
	}
	scale := func(q *quantity) (scaled, error) {
		f, err := aseFactor(q.el.Unit)
		if err != nil {
			return scaled{}, fmt.Errorf("%s: %s: %w", p.r.Path, q.def.name, err)
		}
		return scaled{q, f}, nil
	}
	props := "species:S:1:pos:R:3"
	all := []*quantity{pos}
	sPos, err := scale(pos)
	if err != nil {
		return err
	}
	var mo *momenta
	if vel != nil {
		if mo, err = p.aseMomenta(vel, atoms); err != nil {
			return err
		}
		props += ":masses:R:1:momenta:R:3"
		all = append(all, vel)
	}
	var sFrc scaled
	if frc != nil {
		if sFrc, err = scale(frc); err != nil {
			return err
		}
		props += ":forces:R:3"
		all = append(all, frc)
	}
	sFrame := make([]scaled, len(frameQ))
	for i, q := range frameQ {
		if sFrame[i], err = scale(q); err != nil {
			return err
		}
	}
	all = append(all, frameQ...)
	idx := func(q *quantity) int {
		for i, x := range all {
			if x == q {
				return i
			}
		}
		return -1
	}
	var b []byte
	return p.each(all, func(off int, frames []int, vals [][]float64) error {
		for t, f := range frames {
			b = strconv.AppendInt(b[:0], int64(len(atoms)), 10)
			b = append(b, "\nProperties="...)
			b = append(b, props...)
			for i, q := range frameQ {
				wd := q.width()
				b = append(b, ' ')
				b = append(b, xyzKey(q.def.name)...)
				b = append(b, '=')
				if wd > 1 {
					b = append(b, '"')
				}
				for k, v := range vals[idx(q)][t*wd : (t+1)*wd] {
					if k > 0 {
						b = append(b, ' ')
					}
					b = sFrame[i].append(b, v)
				}
				if wd > 1 {
					b = append(b, '"')
				}
			}
			b = append(b, ` pbc="F F F" step=`...)
			b = strconv.AppendInt(b, p.clock.c.Steps[off+t], 10)
			b = append(b, " time="...)
			b = p.clock.appendTime(b, off+t)
			if u := p.clock.c.TimeUnit; u != "" {
				b = append(b, " time_unit="...)
				b = appendKeyValue(b, u)
			}
			b = append(b, " frame="...)
			b = strconv.AppendInt(b, int64(f), 10)
			b = append(b, '\n')
			for ai, a := range atoms {
				b = append(b, elements.Symbol(p.r.Species[a])...)
				row := func(q *quantity, put func(b []byte, v float64) []byte) {
					base := t*q.width() + ai*3
					for _, v := range vals[idx(q)][base : base+3] {
						b = append(b, ' ')
						b = put(b, v)
					}
				}
				row(pos, sPos.append)
				if vel != nil {
					b = append(b, ' ')
					b = strconv.AppendFloat(b, mo.m[ai], 'g', -1, 64)
					row(vel, func(b []byte, v float64) []byte { return mo.append(b, ai, v) })
				}
				if frc != nil {
					row(frc, sFrc.append)
				}
				b = append(b, '\n')
			}
			w.Write(b)
		}
		return nil
	})
}

// appendKeyValue writes a comment-line value, quoted when it holds a
// space (extended XYZ key=value syntax, common practice).
func appendKeyValue(b []byte, s string) []byte {
	if strings.ContainsAny(s, " \t") {
		return append(append(append(b, '"'), s...), '"')
	}
	return append(b, s...)
}
