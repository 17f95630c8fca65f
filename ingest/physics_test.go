package ingest

import (
	"math"
	"os/exec"
	"strconv"
	"strings"
	"testing"

	"trajvault/internal/testenv"
	"trajvault/internal/units"
)

// TestASETimeUnit: the momentum time unit derived here from CODATA 2018
// equals 1/ase.units.fs of Debian's python3-ase built with the 2018
// constants (ase.units.create_units("2018")).
func TestASETimeUnit(t *testing.T) {
	out, err := exec.Command(testenv.Python(), "-c", "from ase.units import create_units; print(repr(1/create_units('2018')['fs']))").Output()
	if err != nil {
		t.Fatalf("python3-ase (make test installs it): %v", err)
	}
	want, err := strconv.ParseFloat(strings.TrimSpace(string(out)), 64)
	if err != nil {
		t.Fatal(err)
	}
	if math.Abs(aseTimeFs/want-1) > 1e-14 {
		t.Errorf("ASE time unit %v fs, ASE (CODATA 2018) %v fs", aseTimeFs, want)
	}
}

// TestUnitHint: the ratios a unit mistake produces are named. Factors:
// hartree in eV 27.211386245988 and bohr 0.529177210903 angstrom (CODATA
// 2018, NIST); 1 kcal/mol = 0.0433641 eV (from memory).
func TestUnitHint(t *testing.T) {
	cases := []struct {
		name  string
		ratio float64
		want  string
	}{
		{"ASE momenta read as u angstrom/fs (issue 10)", aseTimeFs * aseTimeFs, "angstrom*sqrt(amu/eV)"},
		{"inverse", 1 / (aseTimeFs * aseTimeFs), "wrong way round"},
		{"hartree column read as eV", 27.211386245988, "hartree/eV"},
		{"kcal/mol column read as eV", 1 / 0.0433641, "kcal/mol per eV"},
		{"bohr velocities read as angstrom", 1 / (0.529177210903 * 0.529177210903), "angstrom per bohr"},
		{"agreement", 1, ""},
		{"unexplained", 3, ""},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			got := unitHint(c.ratio)
			if (c.want == "") != (got == "") || !strings.Contains(got, c.want) {
				t.Errorf("unitHint(%v) = %q, want it to mention %q", c.ratio, got, c.want)
			}
		})
	}
	// The suggested unit parses and is the ASE momentum unit.
	if f, err := units.Factor(aseMomentumUnit(), "u angstrom fs-1"); err != nil || math.Abs(f*aseTimeFs-1) > 1e-15 {
		t.Errorf("%s: %v %v", aseMomentumUnit(), f, err)
	}
}
