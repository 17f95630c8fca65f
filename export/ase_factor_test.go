package export

import (
	"math"
	"strings"
	"testing"
)

// TestASEFactor: factors to the ASE convention's units, against CODATA
// 2018 relationships (physics.nist.gov/cuu; Rev. Mod. Phys. 93, 025010
// (2021)), values from those tables, not from our constants.
func TestASEFactor(t *testing.T) {
	// CODATA 2018 electron volt-atomic mass unit relationship:
	// 1 eV = 1.07354410233e-9 u c^2, so t = angstrom sqrt(u/eV) =
	// 1e-10 m / (c sqrt(1.07354410233e-9)), in fs.
	tASE := 1e-10 / (299792458 * math.Sqrt(1.07354410233e-9)) / 1e-15
	for _, c := range []struct {
		unit string
		want float64
		tol  float64 // relative
		note string
	}{
		{"angstrom", 1, 0, "the convention's length: exactly 1, printed digits kept"},
		{"eV", 1, 0, "the convention's energy: exactly 1"},
		{"eV angstrom-1", 1, 0, "the convention's force: exactly 1"},
		{"u", 1, 0, "the convention's mass: exactly 1"},
		{"", 1, 0, "dimensionless"},
		{"nm", 10, 1e-15, "SI prefix"},
		{"hartree", 27.211386245988, 1e-12, "CODATA 2018 Hartree energy in eV"},
		{"hartree bohr-1", 27.211386245988 / 0.529177210903, 1e-12, "CODATA 2018 Eh in eV over a0 in angstrom"},
		{"kJ mol-1", 1 / 96.48533212, 1e-10, "CODATA 2018 Faraday constant 96485.33212 C/mol: 1 eV = 96.48533212 kJ/mol"},
		{"cm-1", 1.239841984e-4, 1e-9, "CODATA 2018 electron volt-inverse metre relationship 8065.543937 cm-1"},
		{"angstrom fs-1", tASE, 1e-10, "velocity in angstrom per t, t from the eV-u relationship"},
		{"fs-1", tASE, 1e-10, "inverse time"},
	} {
		got, err := aseFactor(c.unit)
		if err != nil {
			t.Errorf("%q: %v", c.unit, err)
			continue
		}
		if (c.tol == 0 && got != c.want) || math.Abs(got/c.want-1) > c.tol {
			t.Errorf("%q: factor %v, want %v (%s), diff %g", c.unit, got, c.want, c.note, got/c.want-1)
		}
	}
	if _, err := aseFactor("K"); err == nil || !strings.Contains(err.Error(), "no unit in the ASE convention") {
		t.Errorf("temperature: %v, want an error", err)
	}
}
