package ingest

import (
	"fmt"
	"math"
	"strconv"
	"strings"

	"trajvault/internal/elements"
	"trajvault/internal/finding"
	"trajvault/internal/quantity"
	"trajvault/internal/textnum"
	"trajvault/internal/units"
)

// aseTimeFs is the time unit of extended-XYZ momenta written by ASE-style
// tools (units.ASETimeSecond: angstrom sqrt(u/eV)), in fs; about 10.1805.
var aseTimeFs = units.ASETimeSecond / 1e-15

// aseMomentumUnit is that momentum unit, u angstrom per aseTimeFs, in the
// unit grammar: a numeric factor times u angstrom fs-1.
func aseMomentumUnit() string { return formatFactor(1/aseTimeFs) + " u angstrom fs-1" }

// formatFactor prints x as the shortest decimal that reads back to x.
func formatFactor(x float64) string { return strconv.FormatFloat(x, 'g', -1, 64) }

// momentumUnits resolves the units of momenta (stored as velocities p/m,
// masses in u): the momentum unit when given, from which the velocity
// unit follows (the unit of p/m); else a velocity unit given as the unit
// of p/m; else a problem (P8) asking for the momentum unit by name. Both
// given and disagreeing is refused; a given unit is never ignored.
func (t *TrajReport) momentumUnits(geo *FileReport, opt Options) {
	if _, ok := t.formats[quantity.MomentumQ]; !ok {
		return
	}
	if _, ok := t.formats[quantity.VelocityQ]; ok {
		t.add(PNotStored, finding.Note, geo.File, 0, "momenta are not stored: the file gives velocities too, which are stored")
		t.NotStored = append(t.NotStored, geo.File+": momenta: velocities are given too and stored")
		return
	}
	pu, vu := t.unitFor(quantity.Momentum, opt), t.unitFor(quantity.Velocity, opt)
	if pu == "" && vu == "" {
		t.addUnit(quantity.Momentum, "no unit for momentum: give --unit momentum=UNIT (e.g. u angstrom fs-1) or units: momentum: in the recipe. Extended-XYZ momenta written by ASE-style tools are in amu*angstrom per (angstrom*sqrt(amu/eV)) time unit (%.4f fs, CODATA 2018): --unit momentum='%s'", aseTimeFs, aseMomentumUnit())
		return
	}
	if pu == "" { // a velocity unit for p/m, masses in u
		u, err := units.Parse(vu)
		switch {
		case err != nil:
			t.addUnit(quantity.Velocity, "unit of velocity (momentum/mass): %v", err)
		case !u.Is(units.Velocity):
			t.addUnit(quantity.Velocity, "unit %q given for velocity (momentum/mass) is a %v", vu, u.Dim)
		default:
			t.Units[string(quantity.Velocity)] = vu
		}
		return
	}
	u, err := units.Parse(pu)
	if err != nil {
		t.addUnit(quantity.Momentum, "unit of momentum: %v", err)
		return
	}
	if !u.Is(units.Momentum) {
		t.addUnit(quantity.Momentum, "unit %q given for momentum is a %v", pu, u.Dim)
		return
	}
	f, err := units.Factor(pu, "u angstrom fs-1")
	if err != nil {
		t.addUnit(quantity.Momentum, "unit of momentum: %v", err)
		return
	}
	derived := "angstrom fs-1"
	if f != 1 {
		derived = formatFactor(f) + " " + derived
	}
	if vu != "" {
		fv, err := units.Factor(vu, "angstrom fs-1")
		if err != nil || math.Abs(fv/f-1) > 1e-12 {
			t.addUnit(quantity.Velocity, "--unit velocity=%s and --unit momentum=%s disagree: momentum/mass (masses in u) is in %s; give only the momentum unit", vu, pu, derived)
			return
		}
		derived = vu
	}
	t.Units[string(quantity.Momentum)] = pu
	t.Units[string(quantity.Velocity)] = derived
}

// keFrames is how many frames (the first) the kinetic-energy cross-check
// looks at: enough to see a unit mistake, which affects every frame,
// without keeping per-frame state for the whole run.
const keFrames = 16

// keFrame is one checked frame: mass-weighted sums of the velocities as
// read (masses in the file's unit, or standard atomic weights in u).
type keFrame struct {
	key  int64
	line int
	// momenta: sum2 = sum p^2/m and s1 = sum |p|/m; velocities: sum2 =
	// sum m v^2 and s1 = sum m |v|.
	momenta  bool
	sum2, s1 float64
	hasKE    bool
	ke       float64
	keLine   int
}

// sampleKinetic keeps the sums of the first keFrames geometry frames and
// the kinetic energies the files give for them (joined by step when the
// geometry has steps, else by record order).
func (t *TrajReport) sampleKinetic(rec *record, role Role, key int64) {
	if role == RoleGeometry && len(t.ke) < keFrames {
		v, p := rec.atom(quantity.VelocityQ), rec.atom(quantity.MomentumQ)
		if v != nil || p != nil {
			if len(t.ke) == 0 {
				t.geoSteps = rec.hasStep
			}
			kf := &keFrame{key: key, line: rec.line, momenta: v == nil}
			ok := true
			for i := range rec.symbols {
				m, found := t.massAsRead(i)
				if !found || m <= 0 {
					ok = false
					break
				}
				for k := 0; k < 3 && 3*i+k < max(len(v), len(p)); k++ {
					if v != nil {
						x := v[3*i+k]
						kf.sum2 += m * x * x
						kf.s1 += m * math.Abs(x)
					} else {
						x := p[3*i+k]
						kf.sum2 += x * x / m
						kf.s1 += math.Abs(x) / m
					}
				}
			}
			if ok {
				t.ke = append(t.ke, kf)
				t.keByKey[key] = kf
			}
		}
	}
	if !rec.hasScalar[0] || len(t.ke) == 0 || (role != RoleGeometry && rec.hasStep != t.geoSteps) {
		return
	}
	// A repeated step (restart) overwrites: the later occurrence is the
	// one kept (P5).
	if kf := t.keByKey[key]; kf != nil {
		kf.ke, kf.hasKE, kf.keLine = rec.scalar[0], true, rec.line
	}
}

// massAsRead is atom i's mass as the file gives it, else its standard
// atomic weight in u.
func (t *TrajReport) massAsRead(i int) (float64, bool) {
	if t.masses != nil {
		if i < len(t.masses) {
			return t.masses[i], true
		}
		return 0, false
	}
	if i >= len(t.symbols) {
		return 0, false
	}
	return elements.Mass(elements.Number(t.symbols[i]))
}

// halfStep is half the resolution of a number x printed in format f: the
// largest rounding error of the printed value.
func halfStep(f textnum.Format, x float64) float64 {
	switch {
	case f.Fixed():
		return 0.5 * f.Step()
	case f.Shortest != 0:
		return math.Abs(x) * 0x1p-53
	case x == 0:
		return 0
	}
	e := math.Floor(math.Log10(math.Abs(x)))
	return 0.5 * math.Pow(10, e-float64(max(f.Sig-1, 0)))
}

// checkKinetic compares, for each sampled frame with a kinetic energy,
// 1/2 sum m v^2 (from the stored masses and velocities, or sum p^2/2m)
// with the kinetic-energy column (P17). The tolerance is what the printed
// precision allows: half a unit of the last printed digit of the kinetic
// energy plus sum m |v| dv (dv half a unit of the velocities' or momenta's
// last digit), plus 1e-12 relative for the arithmetic. A mismatch names
// both numbers, the factor on the velocities and the units that would
// explain it.
func (t *TrajReport) checkKinetic(opt Options) {
	vu, eu := t.Units[string(quantity.Velocity)], t.Units[string(quantity.Energy)]
	if vu == "" || eu == "" || len(t.ke) == 0 {
		return
	}
	fv, err1 := units.Factor(vu, "m s-1")
	fe, err2 := units.Factor(eu, "J")
	mf := 1.0
	var err3 error
	if t.masses != nil {
		mf, err3 = units.Factor(t.Units[string(quantity.Mass)], "u")
	}
	if err1 != nil || err2 != nil || err3 != nil {
		return
	}
	conv := units.DaltonKg * fv * fv / fe // u (vu)^2 -> energy unit
	vq := quantity.VelocityQ
	if t.ke[0].momenta {
		vq = quantity.MomentumQ
	}
	dv := halfStep(t.formats[vq], t.maxAbs[vq])
	kfmt := t.formats[quantity.KineticEnergy]
	checked, bad := 0, 0
	var worst *keFrame
	var worstCalc, worstRel float64
	for _, kf := range t.ke {
		if !kf.hasKE {
			continue
		}
		checked++
		sum2, s1 := kf.sum2*mf, kf.s1*mf
		if kf.momenta {
			sum2, s1 = kf.sum2/mf, kf.s1/mf
		}
		calc := 0.5 * sum2 * conv
		tol := s1*dv*conv + halfStep(kfmt, kf.ke) + 1e-12*math.Abs(kf.ke)
		if d := math.Abs(calc - kf.ke); d > tol {
			bad++
			rel := d / math.Max(math.Abs(kf.ke), 1e-300)
			if worst == nil || rel > worstRel {
				worst, worstCalc, worstRel = kf, calc, rel
			}
		}
	}
	if bad == 0 {
		return
	}
	what := "velocities"
	if worst.momenta {
		what = "momenta"
	}
	msg := fmt.Sprintf("1/2 m v^2 from the masses and %s is %s %s at frame line %d, the kinetic-energy column says %s %s (%d of %d checked frames differ beyond the printed precision)",
		what, formatFactor(worstCalc), eu, worst.line, formatFactor(worst.ke), eu, bad, checked)
	if worst.ke != 0 && worstCalc/worst.ke > 0 {
		r := worstCalc / worst.ke
		f := math.Sqrt(r)
		msg += fmt.Sprintf("; the velocities are %.4gx what the column implies", f)
		if hint := unitHint(r); hint != "" {
			msg += "; " + hint
		}
		if worst.momenta && t.Units[string(quantity.Momentum)] != "" {
			if fp, err := units.Factor(t.Units[string(quantity.Momentum)], "u angstrom fs-1"); err == nil {
				msg += fmt.Sprintf("; a momentum unit of '%s u angstrom fs-1' would explain it", formatFactor(fp/f))
			}
		} else if fa, err := units.Factor(vu, "angstrom fs-1"); err == nil {
			kind := "velocity"
			if worst.momenta {
				kind = "velocity (momentum/mass)"
			}
			msg += fmt.Sprintf("; a %s unit of '%s angstrom fs-1' would explain it", kind, formatFactor(fa/f))
		}
	}
	sev := finding.Error
	if opt.AcceptMismatch {
		sev = finding.Warning
		msg += " (accepted with --accept-mismatch)"
	} else {
		msg += "; fix the unit, or convert with --accept-mismatch to store the numbers anyway (recorded)"
	}
	t.Problems = append(t.Problems, finding.Finding{Code: PKinetic, Severity: sev, Location: finding.Location{File: t.geometry().File, Line: worst.line}, Quantity: quantity.KineticEnergy, Message: msg})
}

// unitHint names a common unit mistake that explains a ratio r of the
// kinetic energy computed to the one given, within 0.5 %: a time unit
// (ASE's angstrom sqrt(u/eV), the atomic unit of time), a length unit
// (bohr, angstrom) in the velocities, or an energy unit (hartree, eV,
// kcal/mol, kJ/mol) of the column. Factors from CODATA 2018
// (internal/units).
func unitHint(r float64) string {
	f := math.Sqrt(r)
	bohr, _ := units.Factor("bohr", "angstrom")
	aut, _ := units.Factor("fs", "au_time")
	ha, _ := units.Factor("hartree", "eV")
	kcal, _ := units.Factor("eV", "kcal mol-1")
	kj, _ := units.Factor("eV", "kJ mol-1")
	near := func(x, y float64) bool { return math.Abs(x/y-1) < 0.005 }
	var hints []string
	for _, c := range []struct {
		x   float64
		why string
	}{
		{aseTimeFs, fmt.Sprintf("a factor of about %.4g is the time unit angstrom*sqrt(amu/eV) (%.4f fs): momenta or velocities written by ASE-style tools use it (--unit momentum='%s')", aseTimeFs, aseTimeFs, aseMomentumUnit())},
		{1 / aseTimeFs, fmt.Sprintf("a factor of about 1/%.4g is the time unit angstrom*sqrt(amu/eV) (%.4f fs) applied the wrong way round", aseTimeFs, aseTimeFs)},
		{aut, "a factor of about 41.34 is fs per atomic unit of time: velocities in bohr/au_time or angstrom/fs mixed up?"},
		{1 / aut, "a factor of about 1/41.34 is the atomic unit of time per fs: velocities in bohr/au_time or angstrom/fs mixed up?"},
		{1 / bohr, "a factor of about 1.89 is angstrom per bohr: the length unit of the velocities?"},
		{bohr, "a factor of about 0.529 is bohr per angstrom: the length unit of the velocities?"},
	} {
		if near(f, c.x) {
			hints = append(hints, c.why)
		}
	}
	for _, c := range []struct {
		x    float64
		name string
	}{{ha, "hartree/eV"}, {1 / ha, "eV/hartree"}, {kcal, "kcal/mol per eV"}, {1 / kcal, "eV per kcal/mol"}, {kj, "kJ/mol per eV"}, {1 / kj, "eV per kJ/mol"}} {
		if near(r, c.x) {
			hints = append(hints, fmt.Sprintf("the energies differ by %.5g, %s: the energy unit of the kinetic-energy column?", c.x, c.name))
		}
	}
	return strings.Join(hints, "; ")
}
