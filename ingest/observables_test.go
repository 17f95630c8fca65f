package ingest

import (
	"context"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"

	"trajvault/internal/finding"
	"trajvault/internal/testenv"
)

// energyTable writes a table of energies and per-state energies without
// geometry: 1001 records, with printed negative numbers and a state
// column numbered from 0.
func energyTable(t *testing.T) string {
	t.Helper()
	dir := filepath.Join(t.TempDir(), "energies-only")
	if err := os.MkdirAll(dir, 0o755); err != nil {
		t.Fatal(err)
	}
	var b strings.Builder
	b.WriteString("# step time[fs] Epot[hartree] Ekin[hartree] Etot[hartree] E_0[hartree] E_1[hartree] state\n")
	for i := 0; i <= 1000; i++ {
		epot := -76.4 - 1e-5*float64(i%37)
		ekin := 0.001 + 1e-6*float64(i%53)
		fmt.Fprintf(&b, "%6d %8.3f %14.8f %12.8f %14.8f %12.6f %12.6f %d\n", 10*i, 0.5*float64(i), epot, ekin, epot+ekin, epot, epot+0.2, 0)
	}
	if err := os.WriteFile(filepath.Join(dir, "energies.dat"), []byte(b.String()), 0o644); err != nil {
		t.Fatal(err)
	}
	return dir
}

// obsCheck is read by Debian's h5py (python3-h5py), independently of
// our HDF5 layer: it prints whether /particles exists, then compares
// every stored energy with the table's text. Compared as printed (the
// stored value formatted at the column's decimals gives the text back,
// the scale-offset promise) and, with exact=1, as float64 (float(text)
// is the stored value bit for bit, --bit-exact).
const obsCheck = `
import sys, h5py
path, table, exact = sys.argv[1], sys.argv[2], sys.argv[3] == "1"
rows = [l.split() for l in open(table) if not l.startswith("#")]
cols = {"potential_energy": (2, 8), "kinetic_energy": (3, 8), "total_energy": (4, 8)}
bad = 0
with h5py.File(path, "r") as f:
    print("particles" in f, f["parameters/n_states"][()])
    for name, (c, d) in sorted(cols.items()):
        v = f["observables/" + name + "/value"][:]
        assert len(v) == len(rows), (name, len(v), len(rows))
        for x, r in zip(v, rows):
            if exact:
                bad += float(x) != float(r[c])
            else:
                bad += "%.*f" % (d, x) != r[c]
    e = f["observables/state_energies/value"][:]
    for x, r in zip(e, rows):
        bad += ["%.6f" % y for y in x] != [r[5], r[6]]
    s = f["observables/active_state/value"][:]
    bad += sum(int(x) != int(r[7]) for x, r in zip(s, rows))
print(bad)
`

// TestObservablesOnly: a table of energies and states without geometry
// (issue 10, item 8) converts to a file with observables and the
// electronic module and no particle group - valid H5MD 1.1, where only
// the h5md group is mandatory at the root (H5MD 1.1.0 specification,
// "General organization") - and h5py reads every energy as printed.
func TestObservablesOnly(t *testing.T) {
	dir := energyTable(t)
	tr, err := TrajectoryFrom([]string{dir}, nil)
	if err != nil {
		t.Fatal(err)
	}
	rep, err := Scan(context.Background(), tr, Options{})
	if err != nil {
		t.Fatal(err)
	}
	for _, p := range rep.Problems {
		if p.Severity != finding.Note {
			t.Errorf("unexpected problem: %v", p)
		}
	}
	if !rep.ObservablesOnly || rep.Frames != 1001 || rep.Atoms != 0 || rep.States != 2 {
		t.Fatalf("observables only %v, %d frames, %d atoms, %d states; want true, 1001, 0, 2", rep.ObservablesOnly, rep.Frames, rep.Atoms, rep.States)
	}
	for _, exact := range []bool{false, true} {
		t.Run(fmt.Sprintf("bit-exact=%v", exact), func(t *testing.T) {
			out := convertDir(t, dir, ConvertOptions{BitExact: exact})
			arg := map[bool]string{true: "1", false: "0"}[exact]
			got, err := exec.Command(testenv.Python(), "-c", obsCheck, out, filepath.Join(dir, "energies.dat"), arg).CombinedOutput()
			if err != nil {
				t.Fatalf("h5py (install python3-h5py; make test does): %v\n%s", err, got)
			}
			if want := "False 2\n0\n"; string(got) != want {
				t.Errorf("h5py says %q, want %q (no /particles, 2 states, 0 values differing from the text)", got, want)
			}
		})
	}
}

// TestNoGeometryRefused: P11 keeps its meaning where geometry is
// required: without a geometry file, a table with nothing to store but
// its clock is refused, naming what to add.
func TestNoGeometryRefused(t *testing.T) {
	for _, c := range []struct{ name, table string }{
		{"clock only", "# step time[fs]\n0 0.0\n10 5.0\n"},
		{"time only", "# time[fs]\n0.0\n5.0\n"},
	} {
		t.Run(c.name, func(t *testing.T) {
			dir := t.TempDir()
			if err := os.WriteFile(filepath.Join(dir, "clock.dat"), []byte(c.table), 0o644); err != nil {
				t.Fatal(err)
			}
			tr, err := TrajectoryFrom([]string{dir}, nil)
			if err != nil {
				t.Fatal(err)
			}
			rep, err := Scan(context.Background(), tr, Options{})
			if err != nil {
				t.Fatal(err)
			}
			p := rep.Refusal(false)
			if p == nil || p.Code != PNoGeometry || rep.ObservablesOnly {
				t.Fatalf("refusal %v, observables only %v; want P11 and false", p, rep.ObservablesOnly)
			}
			if !strings.Contains(p.Message, "add the geometry file or a table with energy or state columns") {
				t.Errorf("message %q does not say what to add", p.Message)
			}
		})
	}
}
