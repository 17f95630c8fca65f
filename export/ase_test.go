package export_test

import (
	"context"
	"encoding/json"
	"errors"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"trajvault/export"
	"trajvault/ingest"
	"trajvault/internal/testenv"
	"trajvault/internal/units"
)

// aseFrames is what ase.io.read reports for every frame of a file
// (ingest/testdata/ase_md.py for the original run, testdata/ase_read.py
// for an export); Python's json prints floats in repr, so the numbers
// decode bit for bit.
type aseFrames struct {
	Frames []struct {
		Positions [][]float64 `json:"positions"`
		Momenta   [][]float64 `json:"momenta"`
		Velocity  [][]float64 `json:"velocities"`
		Masses    []float64   `json:"masses"`
		Forces    [][]float64 `json:"forces"`
		Energy    float64     `json:"energy"`
		Kinetic   float64     `json:"kinetic"`
	} `json:"frames"`
}

func runPython(t *testing.T, v any, args ...string) {
	t.Helper()
	out, err := exec.Command(testenv.Python(), args...).Output()
	if err != nil {
		var ee *exec.ExitError
		if errors.As(err, &ee) {
			t.Logf("%s", ee.Stderr)
		}
		t.Fatalf("%s failed (install python3-ase; make test does): %v", args[0], err)
	}
	if err := json.Unmarshal(out, v); err != nil {
		t.Fatal(err)
	}
}

// TestExportASEConvention (issue 10): an MD run written by Debian's
// python3-ase (13-atom copper cluster, EMT calculator, velocity Verlet,
// extended XYZ with momenta, forces and energy) is converted and exported
// with --convention ase; ase.io.read of the export returns what it
// returns for the original file: positions, momenta, velocities, masses,
// forces and energies bit for bit. Converted for common readers (nm, ps,
// kJ/mol, float64), the export gives the same numbers to 1e-12 (the
// round trip through two unit factors).
func TestExportASEConvention(t *testing.T) {
	run := filepath.Join(t.TempDir(), "ase-md")
	os.MkdirAll(run, 0o755)
	var ref aseFrames
	runPython(t, &ref, testenv.Repo("ingest", "testdata", "ase_md.py"), run, "8")

	// The momentum unit scan suggests for such files: u angstrom per
	// angstrom*sqrt(u/eV).
	pu := strconv.FormatFloat(1e-15/units.ASETimeSecond, 'g', -1, 64) + " u angstrom fs-1"
	given := map[string]string{"position": "angstrom", "force": "eV angstrom-1", "momentum": pu}
	for _, c := range []struct {
		name       string
		forReaders bool
		rel        float64 // relative tolerance; 0: bit for bit
	}{
		{"as printed", false, 0},
		{"converted for readers", true, 1e-12},
	} {
		t.Run(c.name, func(t *testing.T) {
			h5 := filepath.Join(t.TempDir(), "md.h5")
			opt := ingest.ConvertOptions{Options: ingest.Options{Units: given}, ForReaders: c.forReaders}
			if _, _, err := ingest.ConvertFiles(context.Background(), []string{run}, h5, opt); err != nil {
				t.Fatal(err)
			}
			dir := filepath.Join(t.TempDir(), "x")
			if _, err := export.ExportSelection(h5, dir, export.Options{Format: export.FormatExtXYZ, Convention: export.ConventionASE}); err != nil {
				t.Fatal(err)
			}
			var got aseFrames
			runPython(t, &got, filepath.Join("testdata", "ase_read.py"), filepath.Join(dir, "traj.extxyz"))
			if len(got.Frames) != len(ref.Frames) {
				t.Fatalf("ASE reads %d frames, the run has %d", len(got.Frames), len(ref.Frames))
			}
			bad := 0
			same := func(what string, i int, g, w float64) {
				d := math.Abs(g - w)
				if (c.rel == 0 && g != w) || d > c.rel*math.Abs(w)+1e-15 {
					if bad++; bad <= 5 {
						t.Errorf("frame %d %s: export %v, original %v (diff %g)", i, what, g, w, d)
					}
				}
			}
			vec := func(what string, i int, g, w [][]float64) {
				if len(g) != len(w) {
					t.Fatalf("frame %d %s: %d atoms, want %d", i, what, len(g), len(w))
				}
				for a := range w {
					for k := range w[a] {
						same(what, i, g[a][k], w[a][k])
					}
				}
			}
			for i, w := range ref.Frames {
				g := got.Frames[i]
				vec("positions", i, g.Positions, w.Positions)
				vec("momenta", i, g.Momenta, w.Momenta)
				vec("velocities", i, g.Velocity, w.Velocity)
				vec("forces", i, g.Forces, w.Forces)
				vec("masses", i, [][]float64{g.Masses}, [][]float64{w.Masses})
				same("energy", i, g.Energy, w.Energy)
				same("kinetic energy", i, g.Kinetic, w.Kinetic)
			}
			// selection.json says what the convention changed.
			b, err := os.ReadFile(filepath.Join(dir, "selection.json"))
			if err != nil || !strings.Contains(string(b), `"convention": "ase"`) {
				t.Errorf("selection.json does not name the convention: %s %v", b, err)
			}
		})
	}
}

// TestExportConventionErrors: the ase convention is extended XYZ only;
// an unknown convention is a selection (usage) error.
func TestExportConventionErrors(t *testing.T) {
	h5 := convertDir(t, testenv.LegacyLogs(t, 5))
	for _, c := range []struct {
		name string
		o    export.Options
		want string
	}{
		{"csv", export.Options{Format: export.FormatCSV, Convention: export.ConventionASE}, "add --format extxyz"},
		{"unknown", export.Options{Format: export.FormatExtXYZ, Convention: "si"}, "unknown convention; want stored or ase"},
	} {
		t.Run(c.name, func(t *testing.T) {
			_, err := export.ExportSelection(h5, filepath.Join(t.TempDir(), "x"), c.o)
			if !errors.Is(err, export.ErrSelection) || !strings.Contains(err.Error(), c.want) {
				t.Fatalf("got %v, want a selection error with %q", err, c.want)
			}
		})
	}
}
