package units

import (
	"errors"
	"fmt"
	"math"
	"testing"
)

// TestCODATA2018 compares derived factors with CODATA 2018 as tabulated by
// NIST (physics.nist.gov/cuu/Constants; Rev. Mod. Phys. 93, 025010 (2021),
// doi:10.1103/RevModPhys.93.025010), to all published digits: the factor
// must round to the published value, |got-want| <= half a unit in the last
// published digit.
func TestCODATA2018(t *testing.T) {
	cases := []factorCase{
		{"hartree", "eV", "27.211386245988", "CODATA 2018, hartree-electron volt relationship"},
		{"hartree", "kJ mol-1", "2625.4996394798", "derived from CODATA 2018 Eh with exact N_A"},
		{"hartree", "kcal mol-1", "627.5094740631", "derived, 1 kcal = 4.184 kJ"},
		{"bohr", "angstrom", "0.529177210903", "CODATA 2018, Bohr radius"},
		{"au_time", "s", "2.4188843265857e-17", "CODATA 2018, atomic unit of time"},
		{"fs", "au_time", "41.34137333518", "derived, 1 fs / (hbar/Eh)"},
		{"me", "u", "5.48579909065e-4", "CODATA 2018, electron mass in u"},
		{"u", "me", "1822.888486209", "derived, 1 u in electron masses"},
		{"hartree bohr-1", "eV angstrom-1", "51.422067476", "derived, atomic unit of force"},
		{"hartree", "cm-1", "219474.6313632", "CODATA 2018, hartree-inverse meter relationship /100"},
		{"hartree K-1", "hartree K-1", "1", "identity"},
		{"eV", "J", "1.602176634e-19", "SI 2019 exact elementary charge"},
		{"kcal", "kJ", "4.184", "thermochemical calorie, exact"},
		{"Da", "kg", "1.66053906660e-27", "CODATA 2018, atomic mass constant"},
		{"me", "kg", "9.1093837015e-31", "CODATA 2018, electron mass"},
	}
	checkFactors(t, cases)
}

// TestBoltzmann checks k_B in hartree/K and eV/K against CODATA 2018.
func TestBoltzmann(t *testing.T) {
	if got := BoltzmannSI / HartreeJoule; !roundsTo(got, "3.1668115634556e-6") {
		t.Errorf("k_B = %.15g hartree/K, want 3.1668115634556e-6 (CODATA 2018)", got)
	}
	if got := BoltzmannSI / Elementary; !roundsTo(got, "8.617333262e-5") {
		t.Errorf("k_B = %.15g eV/K, want 8.617333262e-5 (CODATA 2018, exact digits)", got)
	}
}

// roundsTo reports whether got rounds to the decimal string want.
func roundsTo(got float64, want string) bool {
	w, digits, exp := parseDecimal(want)
	half := 0.5 * math.Pow(10, float64(exp-digits))
	return math.Abs(got-w) <= half*(1+1e-9)
}

// parseDecimal returns the value, the number of digits after the decimal
// point in the mantissa, and the exponent.
func parseDecimal(s string) (float64, int, int) {
	var v float64
	exp := 0
	mant := s
	for i := range s {
		if s[i] == 'e' {
			mant = s[:i]
			var e int
			sign := 1
			rest := s[i+1:]
			if rest[0] == '-' {
				sign, rest = -1, rest[1:]
			}
			for _, r := range rest {
				e = e*10 + int(r-'0')
			}
			exp = sign * e
			break
		}
	}
	digits := 0
	if i := indexByte(mant, '.'); i >= 0 {
		digits = len(mant) - i - 1
	}
	v = mustFloat(s)
	return v, digits, exp
}

func indexByte(s string, c byte) int {
	for i := 0; i < len(s); i++ {
		if s[i] == c {
			return i
		}
	}
	return -1
}

func mustFloat(s string) float64 {
	var v float64
	_, err := fmt.Sscan(s, &v)
	if err != nil {
		panic(err)
	}
	return v
}

func TestParse(t *testing.T) {
	cases := []struct {
		in      string
		dim     Dim
		scale   float64
		wantErr error
	}{
		// Examples from the H5MD units module (nongnu.org/h5md/modules/units.html).
		{"nm+3", Dim{3, 0, 0, 0, 0}, 1e-27, nil},
		{"um+2 s-1", Dim{2, 0, -1, 0, 0}, 1e-12, nil},
		{"60 s", Time, 60, nil},
		{"10+3 m", Length, 1e3, nil},
		{"angstrom", Length, 1e-10, nil},
		{"0.1 nm", Length, 1e-10, nil},
		{"angstrom fs-1", Velocity, 1e5, nil},
		{"kJ mol-1", Energy, 1e3 / Avogadro, nil},
		{"g mol-1", Mass, 1e-3 / Avogadro, nil},
		{"", Dimensionless, 1, nil},
		{"A", Dim{0, 0, 0, 1, 0}, 1, nil}, // ampere, not angstrom
		{"Angstrom", Length, 1e-10, nil},  // alias, see TestAliases
		{"Å", Length, 1e-10, nil},         // alias
		{"furlong", Dim{}, 0, ErrUnknown},
		{"é", Dim{}, 0, ErrSyntax},
		{"s 60", Dim{}, 0, ErrSyntax},
		{"nm nm", Dim{}, 0, ErrSyntax},
		{"nm+0", Dim{}, 0, ErrSyntax},
		{"nm  s", Dim{}, 0, ErrSyntax},
		{"kcal/mol", Energy, CalorieJoules * 1e3 / Avogadro, nil}, // alias
		{"kJ/mol/nm", Dim{}, 0, ErrUnknown},                       // a/b/c is ambiguous
		{"kbohr", Dim{}, 0, ErrUnknown},
	}
	for _, c := range cases {
		u, err := Parse(c.in)
		if c.wantErr != nil {
			if !errors.Is(err, c.wantErr) {
				t.Errorf("Parse(%q) err = %v, want %v", c.in, err, c.wantErr)
			}
			continue
		}
		if err != nil {
			t.Errorf("Parse(%q): %v", c.in, err)
			continue
		}
		if u.Dim != c.dim || math.Abs(u.Scale-c.scale) > 1e-12*math.Abs(c.scale) {
			t.Errorf("Parse(%q) = %v %g, want %v %g", c.in, u.Dim, u.Scale, c.dim, c.scale)
		}
	}
}

func TestFactorDimensionMismatch(t *testing.T) {
	if _, err := Factor("angstrom", "fs"); err == nil {
		t.Error("length to time converted")
	}
	if !MustParse("cm-1").Is(Energy) || MustParse("A").Is(Length) {
		t.Error("Is: wavenumber should count as energy, ampere not as length")
	}
}

// TestAliases: spellings found in other writers' files and what they mean
// (the alias table, schema/layout.md). Rows are common practice of MD and
// quantum-chemistry files; the canonical forms follow the H5MD units
// module grammar (nongnu.org/h5md/modules/units.html).
func TestAliases(t *testing.T) {
	cases := []struct{ in, canonical string }{
		{"Angstrom", "angstrom"},
		{"Angstrom ps-1", "angstrom ps-1"},
		{"kJ mol-1 Angstrom-1", "kJ mol-1 angstrom-1"},
		{"kJ/(mol*nm)", "kJ mol-1 nm-1"},
		{"kcal/mol", "kcal mol-1"},
		{"kJ/mol", "kJ mol-1"},
		{"ANGSTROMS", "angstrom"},
		{"Bohr", "bohr"},
		{"Hartree/Bohr", "hartree bohr-1"},
		{"amu", "u"},
		{"cm^-1", "cm-1"},
		{"1/cm", "cm-1"},
		{"nm^3", "nm+3"},
		{"1/ps", "ps-1"},
		{"Newton", "N"},
		{"Å", "angstrom"},
	}
	for _, c := range cases {
		u, err := Parse(c.in)
		if err != nil {
			t.Errorf("Parse(%q): %v", c.in, err)
			continue
		}
		if !u.Alias || u.Canonical != c.canonical {
			t.Errorf("Parse(%q): alias %v canonical %q, want %q", c.in, u.Alias, u.Canonical, c.canonical)
		}
		w := MustParse(c.canonical)
		if w.Alias || w.Dim != u.Dim || w.Scale != u.Scale {
			t.Errorf("%q = %v %g, canonical %q = %v %g", c.in, u.Dim, u.Scale, c.canonical, w.Dim, w.Scale)
		}
	}
	// Canonical strings and SI symbols are not aliases; case is never
	// folded for SI symbols (Ms is a megasecond, not ms).
	for _, in := range []string{"nm", "ps", "fs", "eV", "bohr", "Da", "u", "kJ mol-1", "A", "Ms"} {
		if u, err := Parse(in); err != nil || u.Alias {
			t.Errorf("Parse(%q): alias %v, err %v; want canonical", in, u.Alias, err)
		}
	}
	if u := MustParse("Ms"); u.Scale != 1e6 {
		t.Errorf("Ms = %g s, want 1e6 (megasecond)", u.Scale)
	}
}

// TestAliasFactors converts spellings of other writers with published
// values: CODATA 2018 (NIST, physics.nist.gov/cuu/Constants; Rev. Mod.
// Phys. 93, 025010 (2021)) for the Bohr radius, hartree and atomic mass
// constant; the SI Brochure, 9th ed. (2019) for the exact electronvolt
// and Faraday constant F = N_A e; NIST SP 811 (2008), appendix B, for the
// thermochemical calorie, 1 cal_th = 4.184 J exactly.
func TestAliasFactors(t *testing.T) {
	cases := []factorCase{
		{"Bohr", "m", "5.29177210903e-11", "CODATA 2018, Bohr radius"},
		{"Angstrom", "bohr", "1.889726124626", "derived, 1/(0.529177210903) from the CODATA 2018 Bohr radius"},
		{"Hartree", "eV", "27.211386245988", "CODATA 2018, hartree-electron volt relationship"},
		{"amu", "kg", "1.66053906660e-27", "CODATA 2018, atomic mass constant"},
		{"Da", "kg", "1.66053906660e-27", "CODATA 2018, atomic mass constant"},
		{"eV", "J", "1.602176634e-19", "SI Brochure 2019, exact"},
		{"eV", "kJ/mol", "96.48533212", "F/1000, F = 96 485.332 12... C mol-1 (exact, SI 2019; CODATA 2018)"},
		{"kcal/mol", "kJ/mol", "4.184", "NIST SP 811, thermochemical calorie"},
		{"kcal/mol", "kJ mol-1", "4.184", "NIST SP 811, thermochemical calorie"},
		{"Hartree/Bohr", "kJ/(mol*nm)", "49614.7525892", "derived: 2625.4996394798 kJ mol-1 (Eh N_A) / 0.0529177210903 nm (a0), CODATA 2018"},
		{"Angstrom/ps", "nm ps-1", "0.1", "exact, 1 angstrom = 0.1 nm"},
	}
	checkFactors(t, cases)
}

// factorCase is a conversion with its published value (want, digits as
// published) and where the value comes from.
type factorCase struct{ from, to, want, source string }

// checkFactors compares Factor with published values, digit for digit.
func checkFactors(t *testing.T, cases []factorCase) {
	t.Helper()
	for _, c := range cases {
		got, err := Factor(c.from, c.to)
		if err != nil {
			t.Errorf("%s -> %s: %v", c.from, c.to, err)
			continue
		}
		if !roundsTo(got, c.want) {
			t.Errorf("%s -> %s = %.15g, want %s (%s)", c.from, c.to, got, c.want, c.source)
		}
	}
}

// TestASETime: the time unit angstrom sqrt(u/eV) against the CODATA 2018
// electron volt-atomic mass unit relationship, 1 eV = 1.07354410233e-9 u
// c^2 (physics.nist.gov/cuu), so t = 1e-10 m / (c sqrt(1.07354410233e-9));
// 10.1805 fs (common practice, the Python MD toolkits' time unit).
func TestASETime(t *testing.T) {
	want := 1e-10 / (SpeedOfLight * math.Sqrt(1.07354410233e-9))
	if d := ASETimeSecond/want - 1; math.Abs(d) > 1e-10 {
		t.Errorf("ASETimeSecond = %.12g s, want %.12g s (diff %g)", ASETimeSecond, want, d)
	}
	if got := fmt.Sprintf("%.4f", ASETimeSecond/1e-15); got != "10.1805" {
		t.Errorf("ASETimeSecond = %s fs, want 10.1805", got)
	}
}
