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

// TestComputedTimeFormat: times computed as step x dt (no printed format
// recorded) print with the decimals of dt, not with float noise (issue
// 10: no 400.00000000000006 fs). The wanted texts are the decimal
// products i x dt done by hand.
func TestComputedTimeFormat(t *testing.T) {
	for _, c := range []struct {
		name  string
		dt    float64
		steps []int
		want  []string
	}{
		{"0.1 fs", 0.1, []int{0, 3, 7, 4000, 4999}, []string{"0.0", "0.3", "0.7", "400.0", "499.9"}},
		{"0.25 fs, dt unknown", 0, []int{1, 2, 3}, []string{"0.25", "0.50", "0.75"}},
		{"whole steps", 2, []int{0, 1, 200}, []string{"0.0", "2.0", "400.0"}},
	} {
		dt := c.dt
		if dt == 0 {
			dt = 0.25
		}
		var times []float64
		for _, i := range c.steps {
			times = append(times, float64(i)*dt)
		}
		fm, ok := computedTimeFormat(times, c.dt)
		if !ok {
			t.Errorf("%s: no format", c.name)
			continue
		}
		for i, x := range times {
			if got := string(fm.Append(nil, x)); got != c.want[i] {
				t.Errorf("%s: %v prints %s, want %s", c.name, x, got, c.want[i])
			}
		}
	}
	// Times with no short decimal form keep the shortest round trip.
	if fm, ok := computedTimeFormat([]float64{0, 1.0 / 3}, 0); ok {
		t.Errorf("1/3 given format %v, want none", fm)
	}
}
