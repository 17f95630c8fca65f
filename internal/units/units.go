// Package units parses H5MD unit strings and converts between the units
// molecular dynamics logs use.
//
// Grammar (H5MD 1.1 units module, nongnu.org/h5md/modules/units.html): a
// unit string is a sequence of factors separated by single spaces. A factor
// is a number (integer or decimal fraction) or a unit symbol, either
// optionally followed by a non-zero signed integer power ("nm+3",
// "um+2 s-1", "60 s", "10+3 m"). At most one number, and only first; each
// symbol at most once. The module requires ASCII.
//
// Symbols are the SI ones with SI prefixes, plus a small documented table
// of non-SI units of this field (see Symbols). "A" is the ampere, as in SI;
// the angstrom is written "angstrom" (or "0.1 nm" in pure SI). Spellings
// of other writers ("Angstrom", "kcal/mol", "amu") are read through the
// alias table (Aliases, Canonicalize) and flagged as such (Unit.Alias).
//
// Constants are CODATA 2018 (Rev. Mod. Phys. 93,
// 025010 (2021), doi:10.1103/RevModPhys.93.025010; physics.nist.gov/cuu)
// and the exact defining constants of the 2019 SI.
package units

import (
	"errors"
	"fmt"
	"math"
	"strconv"
	"strings"
)

// Exact SI defining constants (SI Brochure, 9th edition, 2019).
const (
	Planck        = 6.62607015e-34  // J s
	SpeedOfLight  = 299792458.0     // m/s
	Elementary    = 1.602176634e-19 // C
	Avogadro      = 6.02214076e23   // 1/mol
	BoltzmannSI   = 1.380649e-23    // J/K
	CalorieJoules = 4.184           // thermochemical calorie, J (exact by definition)
)

// CODATA 2018 recommended values.
const (
	HartreeJoule  = 4.3597447222071e-18 // J
	BohrMetre     = 5.29177210903e-11   // m
	AuTimeSecond  = 2.4188843265857e-17 // s
	DaltonKg      = 1.66053906660e-27   // kg
	ElectronMassU = 5.48579909065e-4    // electron mass in u
	// ElectronMass is derived from m_e/u so that mass conversions within
	// atomic units agree with CODATA's own ratio to all digits; it matches
	// the tabulated 9.1093837015e-31 kg to 1e-11.
	ElectronMass  = ElectronMassU * DaltonKg // kg
	AngstromMetre = 1e-10                    // m (exact)
)

// ASETimeSecond is the time unit of the units where length is the
// angstrom, energy the eV and mass the u (common practice in Python MD
// toolkits, whose extended-XYZ momenta are in u angstrom per this unit):
//
//	t = 1 angstrom * sqrt(1 u / 1 eV) = 1e-10 m * sqrt(m_u / e)
//
// so that u angstrom^2 t^-2 = eV exactly; m_u is the CODATA 2018 dalton
// (DaltonKg) and e the exact elementary charge (SI 2019). About
// 1.01805e-14 s (10.1805 fs).
var ASETimeSecond = AngstromMetre * math.Sqrt(DaltonKg/Elementary)

// Dim is a physical dimension: exponents of length, mass, time, electric
// current and temperature. Amount of substance is folded into counts: mol
// is treated as the number N_A, so "kJ mol-1" is an energy per particle.
type Dim [5]int8

// Dimensions used by the layout.
var (
	Dimensionless = Dim{}
	Length        = Dim{1, 0, 0, 0, 0}
	Mass          = Dim{0, 1, 0, 0, 0}
	Time          = Dim{0, 0, 1, 0, 0}
	Temperature   = Dim{0, 0, 0, 0, 1}
	Charge        = Dim{0, 0, 1, 1, 0}
	Velocity      = Dim{1, 0, -1, 0, 0}
	Energy        = Dim{2, 1, -2, 0, 0}
	Force         = Dim{1, 1, -2, 0, 0}
	Wavenumber    = Dim{-1, 0, 0, 0, 0}
	InverseTime   = Dim{0, 0, -1, 0, 0}
	Momentum      = Dim{1, 1, -1, 0, 0}
)

var dimNames = map[Dim]string{
	Dimensionless: "dimensionless", Length: "length", Mass: "mass", Time: "time",
	Temperature: "temperature", Charge: "charge", Velocity: "velocity", Energy: "energy",
	Force: "force", Wavenumber: "wavenumber", InverseTime: "inverse time", Momentum: "momentum",
}

// DimByName maps the names used in the layout spec to dimensions.
func DimByName(name string) (Dim, bool) {
	for d, n := range dimNames {
		if n == name {
			return d, true
		}
	}
	return Dim{}, false
}

func (d Dim) String() string {
	if n, ok := dimNames[d]; ok {
		return n
	}
	base := []string{"L", "M", "T", "I", "Θ"}
	var parts []string
	for i, e := range d {
		if e != 0 {
			parts = append(parts, fmt.Sprintf("%s^%d", base[i], e))
		}
	}
	return strings.Join(parts, " ")
}

func (d Dim) mul(o Dim, p int) Dim {
	for i := range d {
		d[i] += o[i] * int8(p)
	}
	return d
}

// Symbol is one entry of the symbol table.
type Symbol struct {
	Name       string
	Dim        Dim
	SI         float64 // value in SI base units
	Prefixable bool    // accepts SI prefixes
	Note       string
}

// Symbols is the documented symbol table. SI symbols take SI prefixes;
// the field's non-SI units do not (no "kbohr").
var Symbols = []Symbol{
	{"m", Length, 1, true, "metre (SI)"},
	{"g", Mass, 1e-3, true, "gram (SI; kg with prefix)"},
	{"s", Time, 1, true, "second (SI)"},
	{"A", Dim{0, 0, 0, 1, 0}, 1, true, "ampere (SI) - not the angstrom"},
	{"K", Temperature, 1, true, "kelvin (SI)"},
	{"mol", Dimensionless, Avogadro, true, "mole, taken as the count N_A (exact)"},
	{"rad", Dimensionless, 1, false, "radian"},
	{"deg", Dimensionless, math.Pi / 180, false, "degree of angle"},
	{"Hz", InverseTime, 1, true, "hertz (SI)"},
	{"N", Force, 1, true, "newton (SI)"},
	{"J", Energy, 1, true, "joule (SI)"},
	{"W", Dim{2, 1, -3, 0, 0}, 1, true, "watt (SI)"},
	{"Pa", Dim{-1, 1, -2, 0, 0}, 1, true, "pascal (SI)"},
	{"C", Charge, 1, true, "coulomb (SI)"},
	{"V", Dim{2, 1, -3, -1, 0}, 1, true, "volt (SI)"},
	{"eV", Energy, Elementary, true, "electronvolt (exact in SI 2019)"},
	{"e", Charge, Elementary, false, "elementary charge"},
	{"cal", Energy, CalorieJoules, true, "thermochemical calorie, 4.184 J"},
	{"u", Mass, DaltonKg, false, "unified atomic mass unit (CODATA 2018)"},
	{"Da", Mass, DaltonKg, true, "dalton, = u"},
	{"angstrom", Length, AngstromMetre, false, "angstrom, 1e-10 m (trajvault symbol; A is the ampere)"},
	{"bohr", Length, BohrMetre, false, "bohr radius a0, atomic unit of length (CODATA 2018)"},
	{"hartree", Energy, HartreeJoule, false, "hartree energy Eh (CODATA 2018)"},
	{"au_time", Time, AuTimeSecond, false, "atomic unit of time, hbar/Eh (CODATA 2018)"},
	{"me", Mass, ElectronMass, false, "electron mass, atomic unit of mass (CODATA 2018)"},
}

var prefixes = []struct {
	p string
	f float64
}{
	{"da", 1e1}, {"Y", 1e24}, {"Z", 1e21}, {"E", 1e18}, {"P", 1e15}, {"T", 1e12}, {"G", 1e9},
	{"M", 1e6}, {"k", 1e3}, {"h", 1e2}, {"d", 1e-1}, {"c", 1e-2}, {"m", 1e-3}, {"u", 1e-6},
	{"n", 1e-9}, {"p", 1e-12}, {"f", 1e-15}, {"a", 1e-18}, {"z", 1e-21}, {"y", 1e-24},
}

// Hints for strings found in legacy files that are neither symbols nor
// aliases: they are ambiguous, so the user must choose.
var hints = map[string]string{
	"au": "hartree, bohr or au_time", "a.u.": "hartree, bohr or au_time",
}

func lookup(sym string) (Symbol, float64, bool) {
	for _, s := range Symbols {
		if s.Name == sym {
			return s, 1, true
		}
	}
	for _, p := range prefixes {
		if !strings.HasPrefix(sym, p.p) || len(sym) == len(p.p) {
			continue
		}
		for _, s := range Symbols {
			if s.Prefixable && s.Name == sym[len(p.p):] {
				return s, p.f, true
			}
		}
	}
	return Symbol{}, 0, false
}

// Unit is a parsed unit string: value = Scale × (SI base units of Dim).
type Unit struct {
	Text  string
	Scale float64
	Dim   Dim
	// Canonical is the spelling under the H5MD grammar and the symbol
	// table; it equals Text unless Alias is set.
	Canonical string
	// Alias is set when Text is a spelling from the alias table (see
	// Aliases), not the canonical one.
	Alias bool
}

// Errors from Parse. Syntax errors break the H5MD grammar; ErrUnknown is a
// well-formed factor whose symbol is not in the table.
var (
	ErrSyntax  = errors.New("not in the H5MD unit grammar")
	ErrUnknown = errors.New("unknown unit symbol")
)

// ParseError locates a problem in a unit string; Factor counts from 1.
type ParseError struct {
	Text   string
	Factor int
	Err    error
	Detail string
}

func (e *ParseError) Error() string {
	return fmt.Sprintf("unit %q, factor %d: %v: %s", e.Text, e.Factor, e.Err, e.Detail)
}
func (e *ParseError) Unwrap() error { return e.Err }

// splitPower splits "nm+3" into ("nm", 3); a factor without a trailing
// signed integer has power 1.
func splitPower(f string) (string, int, bool) {
	i := strings.LastIndexAny(f, "+-")
	if i <= 0 {
		return f, 1, true
	}
	// "1e-3" style exponents are not part of the grammar.
	p, err := strconv.Atoi(f[i:])
	if err != nil {
		return f, 1, true
	}
	return f[:i], p, p != 0
}

func isNumber(s string) bool {
	if s == "" {
		return false
	}
	dot := false
	for _, r := range s {
		switch {
		case r >= '0' && r <= '9':
		case r == '.' && !dot:
			dot = true
		default:
			return false
		}
	}
	return s != "."
}

// Parse parses a unit string. The empty string is dimensionless with
// scale 1. A string outside the grammar or the symbol table that the
// alias table rewrites to a canonical one (Canonicalize) parses as that
// one, with Unit.Alias set; otherwise the error is the strict parser's.
func Parse(text string) (Unit, error) {
	u, err := parseStrict(text)
	if err == nil {
		u.Canonical = text
		return u, nil
	}
	canon, ok := Canonicalize(text)
	if !ok {
		return u, err
	}
	v, err2 := parseStrict(canon)
	if err2 != nil {
		return u, err
	}
	v.Text, v.Canonical, v.Alias = text, canon, true
	return v, nil
}

// parseStrict parses text under the grammar and the symbol table only.
func parseStrict(text string) (Unit, error) {
	u := Unit{Text: text, Scale: 1}
	if text == "" {
		return u, nil
	}
	for _, r := range text {
		if r > 127 {
			return u, &ParseError{text, 0, ErrSyntax, "non-ASCII character " + strconv.QuoteRune(r) + hint(text)}
		}
	}
	seen := map[string]bool{}
	for i, f := range strings.Split(text, " ") {
		pe := func(err error, detail string) error { return &ParseError{text, i + 1, err, detail} }
		if f == "" {
			return u, pe(ErrSyntax, "factors must be separated by exactly one space")
		}
		base, pow, ok := splitPower(f)
		if !ok {
			return u, pe(ErrSyntax, "power must be a non-zero integer")
		}
		if isNumber(base) {
			if i != 0 {
				return u, pe(ErrSyntax, "a number may only be the first factor")
			}
			v, err := strconv.ParseFloat(base, 64)
			if err != nil || v == 0 {
				return u, pe(ErrSyntax, "bad number "+strconv.Quote(base))
			}
			u.Scale *= math.Pow(v, float64(pow))
			continue
		}
		if seen[base] {
			return u, pe(ErrSyntax, "symbol "+strconv.Quote(base)+" occurs twice")
		}
		seen[base] = true
		sym, pf, ok := lookup(base)
		if !ok {
			return u, pe(ErrUnknown, strconv.Quote(base)+hint(base))
		}
		u.Scale *= math.Pow(sym.SI*pf, float64(pow))
		u.Dim = u.Dim.mul(sym.Dim, pow)
	}
	return u, nil
}

func hint(s string) string {
	if h, ok := hints[s]; ok {
		return "; write " + strconv.Quote(h)
	}
	for k, h := range hints {
		if strings.Contains(s, k) {
			return "; for " + strconv.Quote(k) + " write " + strconv.Quote(h)
		}
	}
	// No file of the source tree: a user of the binary has none.
	return "; write symbols and powers as in \"angstrom fs-1\" or \"kJ mol-1\""
}

// MustParse is Parse for constant unit strings; it panics on error.
func MustParse(text string) Unit {
	u, err := Parse(text)
	if err != nil {
		panic("units: " + err.Error())
	}
	return u
}

// Factor returns f such that a value in unit from times f is the value in
// unit to. The dimensions must agree, except that an energy and a
// wavenumber convert through E = h c / lambda (h, c exact).
func Factor(from, to string) (float64, error) {
	a, err := Parse(from)
	if err != nil {
		return 0, err
	}
	b, err := Parse(to)
	if err != nil {
		return 0, err
	}
	sa, sb := a.Scale, b.Scale
	if a.Dim == Wavenumber && b.Dim == Energy {
		sa *= Planck * SpeedOfLight
	} else if a.Dim == Energy && b.Dim == Wavenumber {
		sb *= Planck * SpeedOfLight
	} else if a.Dim != b.Dim {
		return 0, fmt.Errorf("units: cannot convert %q (%v) to %q (%v)", from, a.Dim, to, b.Dim)
	}
	return sa / sb, nil
}

// Is reports whether u has dimension d. Energies may also be given as
// wavenumbers (cm-1), as spectroscopists do.
func (u Unit) Is(d Dim) bool {
	return u.Dim == d || (d == Energy && u.Dim == Wavenumber)
}
