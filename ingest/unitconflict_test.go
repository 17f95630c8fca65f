package ingest

import (
	"context"
	"errors"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// TestGivenUnitVsFile: a unit given with --unit (or the recipe) that
// differs from the unit a file writes is refused with both units and
// where the file writes its own (issue 10: a given unit is honoured or
// refused, never ignored); the same unit, spelled the file's way or by
// the alias table, is fine; UnitsOverFile replaces the file's unit and
// records it. Which spellings are the same unit: internal/units (factor
// exactly 1), e.g. "Angstrom" is the angstrom (common practice). Columns
// count from 1 and point at the unit text.
func TestGivenUnitVsFile(t *testing.T) {
	table := "# step time[fs] Epot[hartree]\n0 0.0 -1.5\n1 0.5 -1.4\n"
	xyz := "1\nPos_unit=Angstrom Properties=species:S:1:pos:R:3 time=0.0 step=0\nH 0.0 0.0 0.0\n" +
		"1\nPos_unit=Angstrom Properties=species:S:1:pos:R:3 time=0.5 step=1\nH 0.1 0.0 0.0\n"
	for _, c := range []struct {
		name      string
		files     map[string]string
		units     map[string]string
		over      bool
		wantErr   string // substring of the UnitConflictError, "" none
		wantUnit  [2]string
		overrides int
	}{
		{"table header vs --unit", map[string]string{"e.dat": table}, map[string]string{"energy": "eV"}, false,
			`e.dat:1 (header column Epot[hartree]) says "hartree" but --unit energy=eV gives "eV"`, [2]string{}, 0},
		{"same unit", map[string]string{"e.dat": table}, map[string]string{"energy": "hartree"}, false, "", [2]string{"energy", "hartree"}, 0},
		{"override", map[string]string{"e.dat": table}, map[string]string{"energy": "eV"}, true, "", [2]string{"energy", "eV"}, 1},
		{"extxyz unit key vs --unit", map[string]string{"g.xyz": xyz}, map[string]string{"position": "bohr", "time": "fs"}, false,
			`g.xyz:2:10 (Pos_unit=Angstrom) says "Angstrom" but --unit position=bohr gives "bohr"`, [2]string{}, 0},
		{"extxyz alias spelling is the same unit", map[string]string{"g.xyz": xyz}, map[string]string{"position": "angstrom", "time": "fs"}, false, "", [2]string{"position", "angstrom"}, 0},
	} {
		t.Run(c.name, func(t *testing.T) {
			dir := t.TempDir()
			for n, text := range c.files {
				if err := os.WriteFile(filepath.Join(dir, n), []byte(text), 0o644); err != nil {
					t.Fatal(err)
				}
			}
			tr, err := TrajectoryFrom([]string{dir}, nil)
			if err != nil {
				t.Fatal(err)
			}
			rep, err := Scan(context.Background(), tr, Options{Units: c.units, UnitsOverFile: c.over})
			var ue *UnitConflictError
			if c.wantErr != "" {
				if !errors.As(err, &ue) || !strings.Contains(err.Error(), c.wantErr) || !strings.Contains(err.Error(), "--units-over-file") {
					t.Fatalf("got %v; want a UnitConflictError containing %q and naming --units-over-file", err, c.wantErr)
				}
				return
			}
			if err != nil {
				t.Fatal(err)
			}
			if got := rep.Units[c.wantUnit[0]]; got != c.wantUnit[1] {
				t.Errorf("unit of %s %q, want %q", c.wantUnit[0], got, c.wantUnit[1])
			}
			if len(rep.Overrides) != c.overrides {
				t.Errorf("overrides %q, want %d", rep.Overrides, c.overrides)
			}
		})
	}
}
