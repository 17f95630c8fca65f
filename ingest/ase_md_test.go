package ingest

import (
	"bufio"
	"context"
	"encoding/json"
	"errors"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"

	"trajvault/internal/finding"
	"trajvault/internal/h5"
	"trajvault/internal/testenv"
	"trajvault/internal/textnum"
	"trajvault/internal/trajfile"
	"trajvault/internal/units"
	"trajvault/provenance"
)

// aseMD is what ase.io.read reports for the run ase_md.py writes.
type aseMD struct {
	ASE    string  `json:"ase"`
	FS     float64 `json:"fs"` // ASE's units.fs: 1 fs in ASE's time unit
	Frames []struct {
		Positions [][]float64 `json:"positions"`
		Momenta   [][]float64 `json:"momenta"`
		Velocity  [][]float64 `json:"velocities"`
		Masses    []float64   `json:"masses"`
		Forces    [][]float64 `json:"forces"`
		Energy    float64     `json:"energy"`
		Kinetic   float64     `json:"kinetic"`
		Tags      []float64   `json:"tags"`
		Energies  []float64   `json:"energies"` // per atom
		Step      int64       `json:"step"`
		Time      float64     `json:"time"`
	} `json:"frames"`
}

// aseRun writes an NVE run of a 13-atom copper cluster (ASE's EMT
// calculator, velocity Verlet; Debian python3-ase) into a folder: an
// extended XYZ file with momenta, forces, tags, per-atom energies,
// energy= and time= in Python's repr, and a %.10f energy table with the
// kinetic energy ASE computes.
func aseRun(t *testing.T, frames string) (string, aseMD) {
	t.Helper()
	dir := filepath.Join(t.TempDir(), "ase-md")
	os.MkdirAll(dir, 0o755)
	out, err := exec.Command(testenv.Python(), filepath.Join("testdata", "ase_md.py"), dir, frames).Output()
	if err != nil {
		t.Fatalf("ASE script failed (install python3-ase; make test does): %v", err)
	}
	var ref aseMD
	if err := json.Unmarshal(out, &ref); err != nil {
		t.Fatal(err)
	}
	t.Logf("reference reader: ASE %s", ref.ASE)
	return dir, ref
}

// The units scan asks for on that run (the table header gives time and
// energies; the XYZ file gives none).
var aseAsked = map[string]string{"position": "angstrom", "force": "eV angstrom-1"}

func scanASE(t *testing.T, dir string, opt Options) *TrajReport {
	t.Helper()
	tr, err := TrajectoryFrom([]string{dir}, nil)
	if err != nil {
		t.Fatal(err)
	}
	rep, err := Scan(context.Background(), tr, opt)
	if err != nil {
		t.Fatal(err)
	}
	return rep
}

func problem(rep *TrajReport, code string) *finding.Finding {
	for i, p := range rep.Problems {
		if p.Code == code {
			return &rep.Problems[i]
		}
	}
	return nil
}

// TestASEMolecularDynamics (issue 10): an ASE-written MD run converts
// with no unit beyond what scan asks for; every stored value equals what
// ase.io.read reports; the kinetic energy ASE printed equals 1/2 m v^2
// of the stored data within the printed precision; a wrong velocity unit
// is refused with the factor named; nothing is dropped without a word.
func TestASEMolecularDynamics(t *testing.T) {
	dir, ref := aseRun(t, "12")

	// Scan asks for the momentum unit by name, explaining ASE's unit.
	rep := scanASE(t, dir, Options{Units: aseAsked})
	var asked []string
	for _, p := range rep.Problems {
		if p.Code == PUnit {
			asked = append(asked, p.Quantity)
			if !strings.Contains(p.Message, "amu*angstrom per (angstrom*sqrt(amu/eV)) time unit") {
				t.Errorf("P8 does not explain the ASE unit: %s", p.Message)
			}
		}
	}
	if len(asked) != 1 || asked[0] != "momentum" {
		t.Fatalf("scan asks for %v, want [momentum]: %+v", asked, rep.Problems)
	}
	// The unit the message suggests, taken from the message.
	m := problem(rep, PUnit).Message
	i := strings.LastIndex(m, "--unit momentum='")
	pu := strings.TrimSuffix(m[i+len("--unit momentum='"):], "'")
	// Checked against ASE's own fs (ase.units.fs, CODATA 2014 in ASE
	// 3.22): 1 ASE momentum unit = units.fs u angstrom fs-1; the CODATA
	// 2014 and 2018 values of the dalton differ by 1.6e-8 (half of it in
	// the square root).
	if f, err := units.Factor(pu, "u angstrom fs-1"); err != nil || math.Abs(f/ref.FS-1) > 2e-8 {
		t.Fatalf("suggested momentum unit %q = %v u angstrom fs-1 (%v), ASE's fs %v", pu, f, err, ref.FS)
	}

	opt := ConvertOptions{Options: Options{Units: map[string]string{"position": "angstrom", "force": "eV angstrom-1", "momentum": pu}}}
	rep = scanASE(t, dir, opt.Options)
	if p := rep.Refusal(false); p != nil {
		t.Fatalf("refused: %s", p)
	}
	// The kinetic energy of every checked frame agreed (no P17); the
	// energy= key is read as the potential energy and says so (P15).
	if p := problem(rep, PKinetic); p != nil {
		t.Errorf("P17 on ASE's own kinetic energies: %s", p)
	}
	if p := problem(rep, PAmbiguous); p == nil || p.Quantity != "potential_energy" {
		t.Errorf("energy= read without a note: %+v", p)
	}
	out := filepath.Join(t.TempDir(), "md.h5")
	res, err := Convert(context.Background(), rep, out, opt)
	if err != nil {
		t.Fatal(err)
	}
	// Nothing dropped without a word: the cell keys, free_energy=, and
	// the table's epot (the comment line gives the potential energy too)
	// are listed in the result and the provenance; tags and per-atom
	// energies, which no quantity names, are stored as extra particle
	// elements (checked below against ASE's get_tags and
	// get_potential_energies).
	f, err := h5.Open(out)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	a, err := f.Attr(trajfile.ParametersGroup, trajfile.ProvenanceAttr)
	if err != nil {
		t.Fatal(err)
	}
	var prov provenance.Record
	if err := json.Unmarshal([]byte(a.Strings[0]), &prov); err != nil {
		t.Fatal(err)
	}
	for _, want := range []string{"comment key free_energy", "comment key pbc", "energies.dat: potential_energy"} {
		for name, list := range map[string][]string{"result": res.NotStored, "provenance": prov.NotStored} {
			if !containsPrefix(list, want) {
				t.Errorf("%s does not list %q as not stored: %q", name, want, list)
			}
		}
	}
	for _, col := range []string{"tags", "energies"} {
		for name, list := range map[string][]string{"result": res.NotStored, "provenance": prov.NotStored} {
			if containsPrefix(list, "per-atom column "+col) {
				t.Errorf("%s lists %s as not stored: %q", name, col, list)
			}
		}
		want := "per-atom column " + col + " kept as " + trajfile.Particle(trajfile.OurGroup, col)
		if !strings.Contains(res.Storage[col], want) || !strings.Contains(prov.Storage[col], want) {
			t.Errorf("storage of %s: result %q, provenance %q; want %q", col, res.Storage[col], prov.Storage[col], want)
		}
	}
	if prov.Units["momentum"] != pu || !strings.Contains(strings.Join(prov.Conversions, " "), "momentum in "+pu) {
		t.Errorf("momentum unit not recorded: %v %v", prov.Units, prov.Conversions)
	}

	read := func(el string) []float64 {
		v, _, err := f.ReadFloat64(el)
		if err != nil {
			t.Fatal(err)
		}
		return v
	}
	g := trajfile.OurGroup
	pos := read(trajfile.Particle(g, trajfile.Position) + trajfile.Value)
	vel := read(trajfile.Particle(g, trajfile.Velocity) + trajfile.Value)
	frc := read(trajfile.Particle(g, trajfile.Force) + trajfile.Value)
	epot := read(trajfile.PotentialEnergy + trajfile.Value)
	tags := read(trajfile.Particle(g, "tags") + trajfile.Value)
	eat := read(trajfile.Particle(g, "energies") + trajfile.Value)
	ekin := read(trajfile.KineticEnergy + trajfile.Value)
	n := len(ref.Frames[0].Masses)
	if len(pos) != len(ref.Frames)*n*3 || len(vel) != len(pos) || len(frc) != len(pos) || len(epot) != len(ref.Frames) {
		t.Fatalf("sizes %d %d %d %d for %d frames of %d atoms", len(pos), len(vel), len(frc), len(epot), len(ref.Frames), n)
	}
	vf, err := units.Factor(rep.Units["velocity"], "angstrom fs-1")
	if err != nil {
		t.Fatal(err)
	}
	p8 := textnum.Format{Decimals: 8} // ASE prints per-atom reals %16.8f
	s8 := func(x float64) string { return string(p8.Append(nil, x)) }
	if len(tags) != len(ref.Frames)*n || len(eat) != len(tags) {
		t.Fatalf("%d tags, %d per-atom energies for %d frames of %d atoms", len(tags), len(eat), len(ref.Frames), n)
	}
	for i, fr := range ref.Frames {
		for a := 0; a < n; a++ {
			// Tags are integers (exact); per-atom energies are printed
			// %16.8f, so equal at 8 decimals.
			if tags[i*n+a] != fr.Tags[a] || s8(eat[i*n+a]) != s8(fr.Energies[a]) {
				t.Errorf("frame %d atom %d: tag %v energy %v, ASE %v %v", i, a, tags[i*n+a], eat[i*n+a], fr.Tags[a], fr.Energies[a])
			}
		}
	}
	for i, fr := range ref.Frames {
		// energy= is printed in Python's repr: the shortest round-trip
		// class, stored losslessly, equal bit for bit.
		if epot[i] != fr.Energy {
			t.Errorf("frame %d energy %v, ASE %v", i, epot[i], fr.Energy)
		}
		// The table's %.10f kinetic energy (ASE's, from the unrounded
		// momenta) against ASE's get_kinetic_energy of the momenta read
		// back (printed %.8f: sum |p|/m 0.5e-8 is about 1e-8 eV here).
		if math.Abs(ekin[i]-fr.Kinetic) > 2e-8 {
			t.Errorf("frame %d kinetic energy %v, ASE %v", i, ekin[i], fr.Kinetic)
		}
		for a := 0; a < n; a++ {
			m := fr.Masses[a]
			for k := 0; k < 3; k++ {
				j := (i*n+a)*3 + k
				if s8(pos[j]) != s8(fr.Positions[a][k]) || s8(frc[j]) != s8(fr.Forces[a][k]) {
					t.Errorf("frame %d atom %d: pos %v/%v force %v/%v", i, a, pos[j], fr.Positions[a][k], frc[j], fr.Forces[a][k])
				}
				// Momenta as printed: mass x stored velocity.
				if s8(m*vel[j]) != s8(fr.Momenta[a][k]) {
					t.Errorf("frame %d atom %d momentum %s, ASE %s", i, a, s8(m*vel[j]), s8(fr.Momenta[a][k]))
				}
				// Velocities in angstrom/fs: ASE's velocity times its
				// units.fs (CODATA 2014 vs our 2018: 1e-8 relative),
				// within the stored bound.
				want := fr.Velocity[a][k] * ref.FS
				if d := math.Abs(vel[j]*vf - want); d > 1e-8*math.Abs(want)+1e-11 {
					t.Errorf("frame %d atom %d velocity %v angstrom/fs, ASE %v", i, a, vel[j]*vf, want)
				}
			}
		}
	}
	// Shortest round-trip numbers are stored as printed: the format
	// attribute is the repr class, and printing the stored values in it
	// gives back the text of every energy= on the comment lines.
	fa, err := f.Attr(trajfile.PotentialEnergy+trajfile.Value, trajfile.FormatAttr)
	if err != nil {
		t.Fatal(err)
	}
	fm, err := textnum.ParseFormat(fa.Strings[0])
	if err != nil || fm.Shortest != textnum.ShortRepr {
		t.Fatalf("potential energy stored with format %q (%v), want short:r", fa.Strings[0], err)
	}
	printed := commentValues(t, filepath.Join(dir, "traj.xyz"), "energy")
	for i, s := range printed {
		if got := string(fm.Append(nil, epot[i])); got != s {
			t.Errorf("frame %d: energy=%s printed back as %s", i, s, got)
		}
	}

	// The wrong unit of the P8 hint of old (velocity in angstrom/fs for
	// momentum/mass) is refused, naming ASE's time unit.
	bad := ConvertOptions{Options: Options{Units: map[string]string{"position": "angstrom", "force": "eV angstrom-1", "velocity": "angstrom fs-1"}}}
	_, _, err = ConvertFiles(context.Background(), []string{dir}, filepath.Join(t.TempDir(), "bad.h5"), bad)
	if !errors.Is(err, ErrRefused) {
		t.Fatalf("wrong unit converted: %v", err)
	}
	rep = scanASE(t, dir, bad.Options)
	p := problem(rep, PKinetic)
	if p == nil || p.Severity != finding.Error || !strings.Contains(p.Message, "10.18") || !strings.Contains(p.Message, "angstrom*sqrt(amu/eV)") {
		t.Fatalf("P17 missing or without the factor: %+v", p)
	}
	t.Logf("%s", p)
	// Accepted, it converts and the provenance says so.
	bad.AcceptMismatch = true
	out2 := filepath.Join(t.TempDir(), "accepted.h5")
	if _, _, err := ConvertFiles(context.Background(), []string{dir}, out2, bad); err != nil {
		t.Fatal(err)
	}
	f2, err := h5.Open(out2)
	if err != nil {
		t.Fatal(err)
	}
	defer f2.Close()
	pr, err := provenance.Read(f2, out2)
	if err != nil {
		t.Fatal(err)
	}
	if len(pr.Accepted) != 1 || !strings.Contains(pr.Accepted[0], "P17") {
		t.Errorf("accepted mismatch not recorded: %q", pr.Accepted)
	}
}

func containsPrefix(list []string, s string) bool {
	for _, x := range list {
		if strings.Contains(x, s) {
			return true
		}
	}
	return false
}

// commentValues returns the text of key= on every comment line of an XYZ
// file, in order.
func commentValues(t *testing.T, path, key string) []string {
	t.Helper()
	fh, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer fh.Close()
	var out []string
	sc := bufio.NewScanner(fh)
	for sc.Scan() {
		for _, w := range strings.Fields(sc.Text()) {
			if v, ok := strings.CutPrefix(w, key+"="); ok {
				out = append(out, v)
			}
		}
	}
	return out
}
