package main

import (
	"crypto/sha256"
	"encoding/binary"
	"encoding/hex"
	"encoding/json"
	"fmt"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"runtime"
	"strings"
	"testing"

	"trajvault/internal/h5"
	"trajvault/internal/testenv"
	"trajvault/internal/trajfile"
)

func repo(parts ...string) string {
	_, self, _, _ := runtime.Caller(0)
	return filepath.Join(append([]string{filepath.Dir(self), "..", ".."}, parts...)...)
}

// TestTextToDepositFile runs the job end to end on the invented demo logs:
// demo --text, scan, convert, validate (clean), export (digit for digit),
// and an independent read of the converted file with h5py.
func TestTextToDepositFile(t *testing.T) {
	dir := filepath.Join(t.TempDir(), "logs")
	recipe := repo("testdata", "recipes", "tarnol.yaml")
	if code, _, errs := runCLI("demo", "--text", "--trajectories", "2", "--steps", "300", dir); code != 0 {
		t.Fatalf("demo: %s", errs)
	}
	code, out, errs := runCLI("scan", "--recipe", recipe, dir)
	if code != 0 || !strings.Contains(out, "2 trajectories, 0 problems") {
		t.Fatalf("scan: exit %d\n%s%s", code, out, errs)
	}
	h5path := filepath.Join(t.TempDir(), "traj-001.h5")
	code, out, errs = runCLI("convert", "--recipe", recipe, filepath.Join(dir, "traj-001"), "-o", h5path)
	if code != 0 {
		t.Fatalf("convert: exit %d\n%s%s", code, out, errs)
	}
	if code, out, _ = runCLI("convert", "--recipe", recipe, filepath.Join(dir, "traj-001"), "-o", h5path); code != 2 {
		t.Errorf("second convert over an existing output: exit %d", code)
	}
	code, out, _ = runCLI("validate", h5path)
	if code != 0 || !strings.Contains(out, "ok, 0 errors, 0 warnings") {
		t.Fatalf("validate: %s", out)
	}
	exp := filepath.Join(t.TempDir(), "back")
	if code, _, errs := runCLI("export", h5path, "-o", exp, "--format", "extxyz"); code != 0 {
		t.Fatalf("export: %s", errs)
	}
	src, _ := os.ReadFile(filepath.Join(dir, "traj-001", "geom.xyz"))
	back, _ := os.ReadFile(filepath.Join(exp, "traj.extxyz"))
	if a, b := atomLines(src), atomLines(back); a != b || len(a) < 1000 {
		t.Error("exported atom lines differ from the source log (after collapsing spaces)")
	}

	// h5py (Debian python3-h5py) reads the converted positions to the
	// same bytes trajvault reads.
	raw, err := exec.Command(testenv.Python(), testenv.Repo("testdata", "interop", "h5py_dump.py"), h5path).Output()
	if err != nil {
		t.Fatalf("h5py: %v", err)
	}
	var dump struct {
		Objects map[string]struct {
			SHA256 string `json:"sha256"`
		} `json:"objects"`
	}
	json.Unmarshal(raw, &dump)
	f, err := h5.Open(h5path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	for _, p := range []string{"/particles/all/position/value", trajfile.Populations + trajfile.Value, "/particles/all/position/time"} {
		v, _, _ := f.ReadFloat64(p)
		b := make([]byte, 8*len(v))
		for i, x := range v {
			binary.LittleEndian.PutUint64(b[8*i:], math.Float64bits(x))
		}
		sum := sha256.Sum256(b)
		if got := hex.EncodeToString(sum[:]); got != dump.Objects[p].SHA256 {
			t.Errorf("%s: h5py reads other bytes", p)
		}
	}
}

// atomLines keeps the atom lines of an (extended) XYZ file, spaces
// collapsed: species and every number as printed.
func atomLines(b []byte) string {
	var out []string
	for _, l := range strings.Split(string(b), "\n") {
		if f := strings.Fields(l); len(f) >= 4 && !strings.Contains(l, "=") {
			out = append(out, strings.Join(f, " "))
		}
	}
	return strings.Join(out, "\n")
}

// TestScanExitCodes: scan exits 1 on planted problems, 0 on clean logs,
// and --json prints the reports.
func TestScanExitCodes(t *testing.T) {
	if code, out, _ := runCLI("scan", "--unit", "position=angstrom", repo("testdata", "ensembles", "clean")); code != 0 || !strings.Contains(out, "0 problems") {
		t.Errorf("clean: exit %d\n%s", code, out)
	}
	code, out, _ := runCLI("scan", "--json", "--unit", "position=angstrom", repo("testdata", "ensembles", "problems"))
	var res struct{ Trajectories []map[string]any }
	if env := readEnvelope(t, out, &res); code != 1 || len(res.Trajectories) < 12 || len(env.Findings) == 0 {
		t.Errorf("problems: exit %d, %d reports", code, len(res.Trajectories))
	}
}

// TestConvertUnitMismatch (issue 10): on an MD run written by Debian's
// python3-ase (EMT, velocity Verlet; ingest/testdata/ase_md.py), giving
// the velocity unit angstrom/fs for momentum/mass makes convert exit 1
// naming ASE's time unit (10.18 fs); --accept-mismatch converts and says
// so; the right momentum unit converts cleanly, lists what is not
// stored, and the file validates.
func TestConvertUnitMismatch(t *testing.T) {
	dir := filepath.Join(t.TempDir(), "ase-md")
	os.MkdirAll(dir, 0o755)
	if out, err := exec.Command(testenv.Python(), repo("ingest", "testdata", "ase_md.py"), dir, "6").CombinedOutput(); err != nil {
		t.Fatalf("ASE script: %v\n%s", err, out)
	}
	base := []string{"convert", dir, "--unit", "position=angstrom", "--unit", "force=eV angstrom-1"}
	out1 := filepath.Join(t.TempDir(), "bad.h5")
	code, out, errs := runCLI(append(base, "--unit", "velocity=angstrom fs-1", "-o", out1)...)
	if code != 1 || !strings.Contains(out, "P17") || !strings.Contains(out, "10.18") {
		t.Fatalf("wrong unit: exit %d\n%s%s", code, out, errs)
	}
	if _, err := os.Stat(out1); err == nil {
		t.Error("refused conversion left a file")
	}
	code, out, errs = runCLI(append(base, "--unit", "velocity=angstrom fs-1", "--accept-mismatch", "-o", out1)...)
	if code != 0 || !strings.Contains(out, "accepted: ") {
		t.Fatalf("--accept-mismatch: exit %d\n%s%s", code, out, errs)
	}
	out2 := filepath.Join(t.TempDir(), "good.h5")
	code, out, errs = runCLI(append(base, "--unit", "momentum=0.09822694750253276 u angstrom fs-1", "-o", out2)...)
	if code != 0 || !strings.Contains(out, "not stored: ") || !strings.Contains(out, "tags") {
		t.Fatalf("momentum unit: exit %d\n%s%s", code, out, errs)
	}
	if code, out, _ = runCLI("validate", out2); code != 0 {
		t.Errorf("validate: exit %d\n%s", code, out)
	}
}

// TestOutputsNeverTouchUserPartial: convert (ensemble), export and demo
// build their output folder under a name of their own; a user's folder
// NAME.partial survives, and convert --json reports the files where they
// are after the rename (issue 12 and 15).
func TestOutputsNeverTouchUserPartial(t *testing.T) {
	dir := t.TempDir()
	logs := filepath.Join(dir, "logs")
	if code, _, errs := runCLI("demo", "--text", "--trajectories", "2", "--steps", "60", logs); code != 0 {
		t.Fatalf("demo: %s", errs)
	}
	keep := func(name string) string {
		p := filepath.Join(dir, name+".partial")
		os.MkdirAll(p, 0o755)
		os.WriteFile(filepath.Join(p, "mine.txt"), []byte("mine"), 0o644)
		return p
	}
	parts := []string{keep("h5"), keep("text"), keep("more")}
	code, out, errs := runCLI("convert", "--recipe", repo("testdata", "recipes", "tarnol.yaml"), logs, "-o", filepath.Join(dir, "h5"), "--json")
	if code != 0 {
		t.Fatalf("convert: %s", errs)
	}
	var res struct{ Trajectories []struct{ Output string } }
	readEnvelope(t, out, &res)
	results := res.Trajectories
	if len(results) != 2 {
		t.Fatalf("convert --json: %s", out)
	}
	for _, r := range results {
		if _, err := os.Stat(r.Output); err != nil {
			t.Errorf("convert --json names %s, which does not exist", r.Output)
		}
	}
	if code, _, errs := runCLI("export", results[0].Output, "-o", filepath.Join(dir, "text")); code != 0 {
		t.Fatalf("export: %s", errs)
	}
	if code, _, errs := runCLI("demo", "--trajectories", "1", "--steps", "20", filepath.Join(dir, "more")); code != 0 {
		t.Fatalf("demo: %s", errs)
	}
	for _, p := range parts {
		if b, err := os.ReadFile(filepath.Join(p, "mine.txt")); err != nil || string(b) != "mine" {
			t.Errorf("%s was touched", p)
		}
	}
}

// TestConvertForReaders: convert --for-readers writes a file that a common
// Python analysis library's H5MD reader (the Debian package in
// .ci/deps.sh; script testdata/interop/mda_read.py) opens: every frame, with positions equal
// to trajvault's own reading at that library's float32 precision; the
// file validates with no findings (its provenance records the converted
// units) (issue 11).
func TestConvertForReaders(t *testing.T) {
	dir := t.TempDir()
	logs := filepath.Join(dir, "logs")
	if code, _, errs := runCLI("demo", "--text", "--trajectories", "1", "--steps", "120", logs); code != 0 {
		t.Fatalf("demo: %s", errs)
	}
	out := filepath.Join(dir, "r.h5")
	if code, _, errs := runCLI("convert", "--recipe", repo("testdata", "recipes", "tarnol.yaml"), filepath.Join(logs, "traj-001"), "-o", out, "--for-readers"); code != 0 {
		t.Fatalf("convert: %s", errs)
	}
	if code, o, _ := runCLI("validate", out); code != 0 || !strings.Contains(o, "0 errors, 0 warnings") {
		t.Errorf("validate: exit %d\n%s", code, o)
	}
	res, err := exec.Command(testenv.Python(), repo("testdata", "interop", "mda_read.py"), out).Output()
	if err != nil {
		t.Fatalf("the analysis library cannot read the file: %v", err)
	}
	var got struct {
		Frames []struct {
			Positions []float64 `json:"positions"` // flattened [atoms][3]
		} `json:"frames"`
	}
	if err := json.Unmarshal(res, &got); err != nil {
		t.Fatal(err)
	}
	r, err := trajfile.OpenReader(out)
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	if len(got.Frames) != r.T || r.T != 121 {
		t.Fatalf("library reads %d frames, trajvault %d (want 121)", len(got.Frames), r.T)
	}
	x, err := r.Frames(r.Particle(trajfile.Position), "angstrom", r.T-1, 1)
	if err != nil {
		t.Fatal(err)
	}
	p := got.Frames[r.T-1].Positions
	if len(p) != len(x) {
		t.Fatalf("library gives %d coordinates, trajvault %d", len(p), len(x))
	}
	for i := range p {
		if float32(x[i]) != float32(p[i]) {
			t.Errorf("last frame, coordinate %d: library %v, trajvault %v", i, p[i], x[i])
		}
	}
}

// TestHintsWorkWhenPasted (issue 15): the unit hints of scan are flags
// that work when pasted into a shell (a unit with a space was unquoted:
// "accepts 1 arg(s), received 3"); an HDF5 file given to convert is named
// as such instead of "bad header: column ...".
func TestHintsWorkWhenPasted(t *testing.T) {
	logs := filepath.Join(t.TempDir(), "logs")
	if code, _, errs := runCLI("demo", "--text", "--trajectories", "1", "--steps", "30", logs); code != 0 {
		t.Fatalf("demo: %s", errs)
	}
	traj := filepath.Join(logs, "traj-001")
	code, out, _ := runCLI("scan", "--json", traj)
	env := readEnvelope(t, out, nil)
	args := []string{"scan", traj}
	for _, f := range env.Findings {
		if f.Code != "P8" {
			continue
		}
		_, pasted, ok := strings.Cut(f.Message, "give ")
		if !ok {
			t.Fatalf("P8 without a hint: %s", f.Message)
		}
		args = append(args, shellWords(pasted)...)
	}
	if code != 1 || len(args) < 6 {
		t.Fatalf("expected P8 for position, velocity and force: exit %d, args %v", code, args)
	}
	code, out, errs := runCLI(args...)
	if strings.Contains(out, "P8") || strings.Contains(errs, "accepts") {
		t.Errorf("hints pasted %v: exit %d\n%s%s", args, code, out, errs)
	}
	// An HDF5 file that is not H5MD (H5MD files are repacked).
	plain := filepath.Join(t.TempDir(), "plain.h5")
	f, err := h5.Create(plain)
	if err != nil {
		t.Fatal(err)
	}
	f.Close()
	code, _, errs = runCLI("convert", plain, "-o", filepath.Join(t.TempDir(), "x.h5"))
	if code != 2 || !strings.Contains(errs, "is an HDF5 file but not H5MD") || strings.Contains(errs, "bad header") {
		t.Errorf("convert of an HDF5 file: exit %d, %q", code, errs)
	}
}

// shellWords splits s as a POSIX shell splits an unquoted command line
// with single quotes (IEEE Std 1003.1, Shell Command Language, 2.2.2
// Single-Quotes, 2.6.5 Field Splitting).
func shellWords(s string) []string {
	var words []string
	var cur strings.Builder
	in, quoted := false, false
	for _, r := range s {
		switch {
		case r == '\'':
			quoted, in = !quoted, true
		case r == ' ' && !quoted:
			if in {
				words = append(words, cur.String())
				cur.Reset()
				in = false
			}
		default:
			cur.WriteRune(r)
			in = true
		}
	}
	if in {
		words = append(words, cur.String())
	}
	return words
}

// TestObservablesOnlyCLI: a table of energies without geometry (issue
// 10, item 8) goes through scan, convert, validate, inspect and export
// --format csv with exit 0; the file has no /particles group, which the
// H5MD 1.1.0 specification ("General organization") makes optional, and
// the csv gives back every printed digit. Exports that need atoms exit 2
// and say why.
func TestObservablesOnlyCLI(t *testing.T) {
	dir := filepath.Join(t.TempDir(), "energies")
	os.MkdirAll(dir, 0o755)
	var b strings.Builder
	var want strings.Builder
	b.WriteString("# step time[fs] Epot[eV] Ekin[eV] Etot[eV]\n")
	want.WriteString("step,time[fs],kinetic_energy[eV],potential_energy[eV],total_energy[eV]\n")
	for i := 0; i <= 1000; i++ {
		ep, ek := -3.25+0.001*float64(i%17), 0.5-0.001*float64(i%17)
		row := []string{fmt.Sprint(5 * i), fmt.Sprintf("%.2f", 0.25*float64(i)), fmt.Sprintf("%.6f", ep), fmt.Sprintf("%.6f", ek), fmt.Sprintf("%.6f", ep+ek)}
		b.WriteString(strings.Join(row, " ") + "\n")
		want.WriteString(strings.Join([]string{row[0], row[1], row[3], row[2], row[4]}, ",") + "\n")
	}
	os.WriteFile(filepath.Join(dir, "energies.dat"), []byte(b.String()), 0o644)
	code, out, errs := runCLI("scan", dir)
	if code != 0 || !strings.Contains(out, "energies: 1001 records, observables only, steps 0..5000") {
		t.Fatalf("scan: exit %d\n%s%s", code, out, errs)
	}
	h5path := filepath.Join(t.TempDir(), "energies.h5")
	if code, out, errs := runCLI("convert", dir, "-o", h5path); code != 0 {
		t.Fatalf("convert: exit %d\n%s%s", code, out, errs)
	}
	if code, out, _ := runCLI("validate", h5path); code != 0 || !strings.Contains(out, "ok, 0 errors, 0 warnings") {
		t.Fatalf("validate: exit %d\n%s", code, out)
	}
	if code, out, errs := runCLI("inspect", h5path); code != 0 || !strings.Contains(out, "potential_energy") || strings.Contains(out, "/particles") {
		t.Errorf("inspect: exit %d\n%s%s", code, out, errs)
	}
	csv := filepath.Join(t.TempDir(), "back.csv")
	if code, _, errs := runCLI("export", h5path, "-o", csv, "--format", "csv"); code != 0 {
		t.Fatalf("export csv: exit %d\n%s", code, errs)
	}
	if got, _ := os.ReadFile(csv); string(got) != want.String() {
		t.Errorf("export csv differs from the table's digits:\n%.300s", got)
	}
	code, _, errs = runCLI("export", h5path, "-o", filepath.Join(t.TempDir(), "x"), "--format", "xyz")
	if code != 2 || !strings.Contains(errs, "observables only") {
		t.Errorf("export xyz of an observables-only file: exit %d, %q; want 2 and the reason", code, errs)
	}
}

// TestUnitGivenVsFile: --unit naming a different unit than the table's
// header is refused by scan and convert with exit 2 (usage), naming both
// units, the header's line and the way out; the same unit passes; with
// --units-over-file the given unit is stored and the override is in the
// provenance record (issue 10: a given unit is honoured or refused,
// never ignored).
func TestUnitGivenVsFile(t *testing.T) {
	dir := filepath.Join(t.TempDir(), "run")
	os.MkdirAll(dir, 0o755)
	os.WriteFile(filepath.Join(dir, "energies.dat"), []byte("# step time[fs] Epot[hartree]\n0 0.0 -1.50\n1 0.5 -1.40\n2 1.0 -1.30\n"), 0o644)
	for _, verb := range []string{"scan", "convert"} {
		args := []string{verb, dir, "--unit", "energy=eV"}
		if verb == "convert" {
			args = append(args, "-o", filepath.Join(t.TempDir(), "x.h5"))
		}
		code, _, errs := runCLI(args...)
		if code != 2 || !strings.Contains(errs, `energies.dat:1 (header column Epot[hartree]) says "hartree" but --unit energy=eV gives "eV"`) || !strings.Contains(errs, "--units-over-file") {
			t.Errorf("%s with a conflicting --unit: exit %d, %q; want 2, both units and the flag", verb, code, errs)
		}
	}
	// The same refusal from worker processes (an ensemble, --jobs 2).
	ens := t.TempDir()
	for _, n := range []string{"traj-1", "traj-2"} {
		os.MkdirAll(filepath.Join(ens, n), 0o755)
		os.WriteFile(filepath.Join(ens, n, "energies.dat"), []byte("# step time[fs] Epot[hartree]\n0 0.0 -1.50\n1 0.5 -1.40\n2 1.0 -1.30\n"), 0o644)
	}
	ensOut := filepath.Join(t.TempDir(), "ens")
	if code, _, errs := runCLI("convert", ens, "--jobs", "2", "--unit", "energy=eV", "-o", ensOut); code != 2 || !strings.Contains(errs, `says "hartree" but --unit energy=eV gives "eV"`) {
		t.Errorf("convert --jobs 2 with a conflicting --unit: exit %d, %q; want 2 and both units", code, errs)
	}
	if _, err := os.Stat(ensOut); err == nil {
		t.Errorf("convert --jobs 2 refused but left %s", ensOut)
	}
	if code, out, errs := runCLI("scan", dir, "--unit", "energy=hartree"); code != 0 {
		t.Errorf("scan with the file's own unit: exit %d\n%s%s", code, out, errs)
	}
	out := filepath.Join(t.TempDir(), "over.h5")
	if code, o, errs := runCLI("convert", dir, "--unit", "energy=eV", "--units-over-file", "-o", out); code != 0 || !strings.Contains(o, "unit override:") {
		t.Fatalf("convert --units-over-file: exit %d\n%s%s", code, o, errs)
	}
	f, err := h5.Open(out)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	u, _ := f.Attr(trajfile.PotentialEnergy+trajfile.Value, trajfile.UnitAttr)
	p, _ := f.Attr(trajfile.ParametersGroup, trajfile.ProvenanceAttr)
	if len(u.Strings) != 1 || u.Strings[0] != "eV" || len(p.Strings) != 1 || !strings.Contains(p.Strings[0], `says \"hartree\"; --unit gives \"eV\", used (--units-over-file)`) {
		t.Errorf("stored unit %v; provenance %.400v; want eV and the override recorded", u.Strings, p.Strings)
	}
}
