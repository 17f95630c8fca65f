package ingest

import (
	"encoding/json"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"testing"

	"trajvault/internal/h5"
	"trajvault/internal/testenv"
	"trajvault/internal/textnum"
	"trajvault/internal/units"
)

// TestASEExtendedXYZ: an extended XYZ trajectory written by ASE (Debian
// python3-ase 3.22) reads identically to what ASE itself reports:
// positions, forces and energy bit for bit (with --bit-exact storage, and
// digit for digit at the printed precision by default); velocities, which
// ASE stores as momenta, equal ASE's momenta/masses to rounding.
func TestASEExtendedXYZ(t *testing.T) {
	for _, bitExact := range []bool{true, false} {
		t.Run(map[bool]string{true: "bit-exact", false: "default"}[bitExact], func(t *testing.T) { aseCase(t, bitExact) })
	}
}

func aseCase(t *testing.T, bitExact bool) {
	script := testenv.Repo("testdata", "interop", "ase_extxyz.py")
	dir := filepath.Join(t.TempDir(), "ase-run")
	os.MkdirAll(dir, 0o755)
	xyz := filepath.Join(dir, "traj.xyz")
	out, err := exec.Command(testenv.Python(), script, xyz).Output()
	if err != nil {
		t.Fatalf("ASE script failed (install python3-ase; make test does): %v", err)
	}
	var ref struct {
		ASE    string `json:"ase"`
		Frames []struct {
			Positions  [][]float64 `json:"positions"`
			Velocities [][]float64 `json:"velocities"`
			Forces     [][]float64 `json:"forces"`
			Energy     float64     `json:"energy"`
			Masses     []float64   `json:"masses"`
		} `json:"frames"`
	}
	if err := json.Unmarshal(out, &ref); err != nil {
		t.Fatal(err)
	}
	t.Logf("reference reader: ASE %s", ref.ASE)

	// ASE's unit of velocity is angstrom per (angstrom sqrt(u/eV)); in
	// fs: 1e-10 m sqrt(u/eV) = 10.1805... fs (derived from CODATA 2018 u
	// and the exact eV).
	aseTime := 1e-10 * math.Sqrt(units.DaltonKg/units.Elementary) / 1e-15
	opt := ConvertOptions{BitExact: bitExact, Options: Options{Dt: 1, Units: map[string]string{
		"position": "angstrom", "force": "eV angstrom-1", "energy": "eV", "time": "fs",
		"velocity": formatFactor(1/aseTime) + " angstrom fs-1",
	}}}
	path := convertDir(t, dir, opt)
	f, err := h5.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	pos, _, _ := f.ReadFloat64("/particles/all/position/value")
	vel, _, _ := f.ReadFloat64("/particles/all/velocity/value")
	frc, _, _ := f.ReadFloat64("/particles/all/force/value")
	epot, _, _ := f.ReadFloat64("/observables/potential_energy/value")
	if len(pos) != len(ref.Frames)*9 || len(vel) != len(pos) || len(frc) != len(pos) || len(epot) != len(ref.Frames) {
		t.Fatalf("sizes: %d %d %d %d for %d frames", len(pos), len(vel), len(frc), len(epot), len(ref.Frames))
	}
	for i, fr := range ref.Frames {
		if epot[i] != fr.Energy { // printed in full by ASE: stored losslessly
			t.Errorf("frame %d energy %v, ASE %v", i, epot[i], fr.Energy)
		}
		for a := 0; a < 3; a++ {
			for k := 0; k < 3; k++ {
				j := (i*3+a)*3 + k
				same := pos[j] == fr.Positions[a][k] && frc[j] == fr.Forces[a][k]
				if !bitExact {
					// ASE prints %16.8f: compare at that precision.
					p8 := textnum.Format{Decimals: 8}
					same = string(p8.Append(nil, pos[j])) == string(p8.Append(nil, fr.Positions[a][k])) &&
						string(p8.Append(nil, frc[j])) == string(p8.Append(nil, fr.Forces[a][k]))
				}
				if !same {
					t.Errorf("frame %d atom %d: pos %v/%v force %v/%v", i, a, pos[j], fr.Positions[a][k], frc[j], fr.Forces[a][k])
				}
				tol := 1e-15 * math.Max(1, math.Abs(fr.Velocities[a][k]))
				if !bitExact {
					// Stored at the decimals that give back the printed
					// momenta (%.8f): mass x velocity at 8 decimals.
					tol = 0.5e-10
					p8 := textnum.Format{Decimals: 8}
					m := fr.Masses[a]
					if got, want := string(p8.Append(nil, m*vel[j])), string(p8.Append(nil, m*fr.Velocities[a][k])); got != want {
						t.Errorf("frame %d atom %d momentum %s, ASE %s", i, a, got, want)
					}
				}
				if d := math.Abs(vel[j] - fr.Velocities[a][k]); d > tol {
					t.Errorf("frame %d atom %d velocity %v, ASE %v", i, a, vel[j], fr.Velocities[a][k])
				}
			}
		}
	}
}
