package main

import (
	"bufio"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"trajvault/internal/testenv"
)

// foreignCorpus writes the corpus of other writers into a temporary
// folder: testdata/interop/h5py_corpus.py (Debian python3-h5py, per the
// H5MD 1.1 specification, nongnu.org/h5md/h5md.html: fixed- and
// variable-length strings, explicit and fixed-mode clocks, two particle
// groups, a periodic box with edges, no species) and
// testdata/interop/mda_write.py (the analysis library's H5MD writer, a
// small universe built there).
func foreignCorpus(t *testing.T) string {
	t.Helper()
	dir := t.TempDir()
	for _, c := range [][]string{{"h5py_corpus.py", dir}, {"mda_write.py", filepath.Join(dir, "library.h5")}} {
		cmd := exec.Command(testenv.Python(), append([]string{testenv.Repo("testdata", "interop", c[0])}, c[1:]...)...)
		if out, err := cmd.CombinedOutput(); err != nil {
			t.Fatalf("%s failed (install the packages of .ci/deps.sh; make test does): %v\n%s", c[0], err, out)
		}
	}
	return dir
}

// py runs a Python snippet under the test interpreter (h5py, numpy) with
// args, and returns its standard output.
func py(t *testing.T, script string, args ...string) []byte {
	t.Helper()
	out, err := exec.Command(testenv.Python(), append([]string{"-c", script}, args...)...).Output()
	if err != nil {
		var stderr string
		if ee, ok := err.(*exec.ExitError); ok {
			stderr = string(ee.Stderr)
		}
		t.Fatalf("python: %v\n%s", err, stderr)
	}
	return out
}

// TestForeignGroups (issue 11): inspect, audit and export work on every
// particle group of files from other writers, reported per group, and on
// groups without species or masses run what they can; the checks that
// need masses or species say "not run" with the reason. The number of
// groups and atoms comes from h5py (the independent reader), not from
// trajvault.
func TestForeignGroups(t *testing.T) {
	dir := foreignCorpus(t)
	for _, file := range []string{"fixed_strings.h5", "vlen_fixed_clock.h5", "library.h5"} {
		t.Run(file, func(t *testing.T) {
			path := filepath.Join(dir, file)
			if code, out, errs := runCLI("validate", path); code != 0 {
				t.Fatalf("validate (h5md profile): exit %d\n%s%s", code, out, errs)
			}
			// The groups as h5py sees them: name -> [frames, atoms,
			// has species, has masses].
			var groups map[string][4]int
			json.Unmarshal(py(t, `
import h5py, json, sys
f = h5py.File(sys.argv[1], "r")
out = {}
for name, g in f["particles"].items():
    T, N, _ = g["position/value"].shape
    out[name] = [T, N, int("species" in g), int("mass" in g)]
print(json.dumps(out))
`, path), &groups)
			if len(groups) == 0 {
				t.Fatal("h5py found no particle groups")
			}

			code, out, errs := runCLI("inspect", path)
			if code != 0 {
				t.Fatalf("inspect: exit %d: %s", code, errs)
			}
			for name, g := range groups {
				want := name + ": " + strconv.Itoa(g[1]) + " atoms"
				if !strings.Contains(out, want) {
					t.Errorf("inspect does not show %q:\n%s", want, out)
				}
			}

			for name, g := range groups {
				// --values reads the group named; its comment line says which.
				code, out, errs := runCLI("inspect", "--values", "--group", name, "--frames", "0", "--quantities", "position", path)
				want := "of " + strconv.Itoa(g[1]) + ";"
				if len(groups) > 1 {
					want = "[" + name + "]"
				}
				if first, _, _ := strings.Cut(out, "\n"); code != 0 || !strings.Contains(first, want) || !strings.Contains(first, "of "+strconv.Itoa(g[1])+";") {
					t.Errorf("inspect --values --group %s: exit %d, %q, want %q and %d atoms\n%s", name, code, first, want, g[1], errs)
				}
			}

			code, out, errs = runCLI("audit", "--json", "--no-fail", path)
			if code != 0 {
				t.Fatalf("audit: exit %d: %s", code, errs)
			}
			var rep struct {
				Trajectories []struct {
					Group  string
					Error  string
					Frames int
					Atoms  int
					Checks []struct {
						Code, Verdict, Summary string
					}
				}
			}
			readEnvelope(t, out, &rep)
			if len(rep.Trajectories) != len(groups) {
				t.Fatalf("audit: %d results, want one per group (%d)", len(rep.Trajectories), len(groups))
			}
			for _, r := range rep.Trajectories {
				g, ok := groups[r.Group]
				if !ok || r.Error != "" || r.Frames != g[0] || r.Atoms != g[1] {
					t.Errorf("audit of group %q: %d frames, %d atoms, error %q; h5py sees %v", r.Group, r.Frames, r.Atoms, r.Error, g)
				}
				for _, c := range r.Checks {
					// A3 (time step) weighs by mass and picks bonds by
					// element; A7 (momentum) weighs by mass.
					needs := map[string][]int{"A3": {2, 3}, "A7": {3}}[c.Code]
					for _, k := range needs {
						if g[k] == 0 && (c.Verdict != "n/a" || !strings.Contains(c.Summary, "has no")) {
							t.Errorf("group %s without %v: %s %s %q, want n/a naming what is missing", r.Group, map[int]string{2: "species", 3: "masses"}[k], c.Code, c.Verdict, c.Summary)
						}
					}
				}
				if g[3] == 1 && strings.Contains(file, "fixed_strings") {
					// Masses and velocities are stored: momentum runs.
					for _, c := range r.Checks {
						if c.Code == "A7" && c.Verdict == "n/a" {
							t.Errorf("group %s has masses and velocities but momentum did not run: %s", r.Group, c.Summary)
						}
					}
				}
			}

			exp := filepath.Join(t.TempDir(), "text")
			if code, out, errs := runCLI("export", path, "-o", exp, "--format", "xyz"); code != 0 {
				t.Fatalf("export: exit %d\n%s%s", code, out, errs)
			}
			for name, g := range groups {
				xyz := filepath.Join(exp, "traj.xyz")
				if len(groups) > 1 {
					xyz = filepath.Join(exp, name, "traj.xyz")
				}
				checkXYZ(t, xyz, path, name, g[0], g[1])
			}
		})
	}
}

// checkXYZ compares an exported XYZ file with the positions h5py reads
// from group name of src: every number exact (shortest round-trip
// printing), atoms without species written as X.
func checkXYZ(t *testing.T, xyz, src, name string, T, N int) {
	t.Helper()
	var want [][][3]float64
	json.Unmarshal(py(t, `
import h5py, json, sys
f = h5py.File(sys.argv[1], "r")
print(json.dumps(f["particles/" + sys.argv[2] + "/position/value"][()].astype("f8").tolist()))
`, src, name), &want)
	fh, err := os.Open(xyz)
	if err != nil {
		t.Fatal(err)
	}
	defer fh.Close()
	sc := bufio.NewScanner(fh)
	frame, atom, line := 0, -2, 0
	for sc.Scan() {
		line++
		if atom < 0 {
			atom++
			continue
		}
		f := strings.Fields(sc.Text())
		if len(f) != 4 || frame >= len(want) {
			t.Fatalf("%s:%d: %q, want a symbol and 3 numbers of %d frames", xyz, line, sc.Text(), T)
		}
		if f[0] != "X" {
			t.Errorf("%s:%d: symbol %q, want X (no species stored)", xyz, line, f[0])
		}
		for d := range 3 {
			v, err := strconv.ParseFloat(f[d+1], 64)
			if err != nil || v != want[frame][atom][d] {
				t.Fatalf("%s:%d: %s, want %v exactly", xyz, line, f[d+1], want[frame][atom][d])
			}
		}
		if atom++; atom == N {
			frame, atom = frame+1, -2
		}
	}
	if frame != T || len(want) != T {
		t.Errorf("%s: %d frames, want %d", xyz, frame, T)
	}
}

// TestForeignConvert (issue 11): convert repacks H5MD files of other
// writers into the layout. Files the layout cannot hold as one trajectory
// are refused with the reason (two particle groups; no species). With
// species added by h5py, the analysis library's file (units spelled
// "Angstrom", an alias) and the h5py file with a fixed-mode clock and a
// time-dependent box convert: every value equal to what h5py reads from
// the source (exact, float32 widened to float64), units in their
// canonical spelling, the source's SHA-256 (FIPS 180-4) in the
// provenance, what has no place in the layout listed as not stored, and
// the result valid under both profiles.
func TestForeignConvert(t *testing.T) {
	dir := foreignCorpus(t)
	for file, want := range map[string]string{"fixed_strings.h5": "2 particle groups (protein, solvent)", "vlen_fixed_clock.h5": "has no species"} {
		out := filepath.Join(t.TempDir(), "out.h5")
		code, stdout, errs := runCLI("convert", filepath.Join(dir, file), "-o", out)
		// Text wraps at 80 columns: compare with the line breaks undone.
		if code != 1 || !strings.Contains(strings.Join(strings.Fields(stdout+errs), " "), want) {
			t.Errorf("convert %s: exit %d, want 1 (refused) and %q:\n%s%s", file, code, want, stdout, errs)
		}
	}
	// Species as atomic numbers (H5MD 1.1 leaves their meaning to the
	// writer; the layout reads atomic numbers) and, for the file without
	// them, masses in u.
	py(t, `
import h5py, numpy as np, sys
with h5py.File(sys.argv[1], "a") as f:
    f["particles/trajectory/species"] = np.array([8, 1, 1, 6, 1], dtype="i4")
with h5py.File(sys.argv[2], "a") as f:
    g = f["particles/fluid"]
    g["species"] = np.array([18, 18, 18, 10, 10], dtype="i4")
    g["mass"] = np.array([39.948, 39.948, 39.948, 20.180, 20.180])
    g["mass"].attrs["unit"] = "u"
`, filepath.Join(dir, "library.h5"), filepath.Join(dir, "vlen_fixed_clock.h5"))
	cases := []struct {
		file, group string
		units       map[string]string // element -> canonical unit
		notStored   string
	}{
		{"library.h5", "trajectory", map[string]string{"position": "angstrom", "velocity": "angstrom ps-1", "force": "kJ mol-1 angstrom-1"}, "/particles/trajectory/box"},
		{"vlen_fixed_clock.h5", "fluid", map[string]string{"position": "nm", "force": "kJ mol-1 nm-1"}, "/particles/fluid/box"},
	}
	for _, c := range cases {
		t.Run(c.file, func(t *testing.T) {
			src := filepath.Join(dir, c.file)
			out := filepath.Join(t.TempDir(), "repacked.h5")
			code, stdout, errs := runCLI("convert", "--json", src, "-o", out)
			if code != 0 {
				t.Fatalf("convert: exit %d\n%s%s", code, stdout, errs)
			}
			if !strings.Contains(stdout, c.notStored) {
				t.Errorf("convert --json does not list %s as not stored:\n%s", c.notStored, stdout)
			}
			for _, profile := range []string{"h5md", "trajvault"} {
				if code, o, e := runCLI("validate", "--profile", profile, out); code != 0 {
					t.Errorf("validate --profile %s: exit %d\n%s%s", profile, code, o, e)
				}
			}
			var got struct {
				Equal   map[string]bool
				Units   map[string]string
				Sources []struct{ SHA256 string }
			}
			json.Unmarshal(py(t, `
import h5py, json, sys, numpy as np
a = h5py.File(sys.argv[1], "r"); b = h5py.File(sys.argv[2], "r")
g = "particles/" + sys.argv[3]
eq, units = {}, {}
for el in ("position", "velocity", "force"):
    if el + "/value" in a[g]:
        eq[el] = bool(np.array_equal(a[g + "/" + el + "/value"][()].astype("f8"), b["particles/all/" + el + "/value"][()]))
        units[el] = b["particles/all/" + el + "/value"].attrs["unit"]
        if not isinstance(units[el], str):
            units[el] = "bytes: " + repr(units[el])
# The clock as the H5MD 1.1 specification defines it: explicit step
# arrays, or fixed mode, step i = offset + i * step.
def steps(e, T):
    s = e["step"]
    if s.shape == ():
        return [int(s.attrs.get("offset", 0)) + i * int(s[()]) for i in range(T)]
    return [int(x) for x in s[()]]
T = a[g + "/position/value"].shape[0]
eq["step"] = steps(a[g + "/position"], T) == steps(b["particles/all/position"], T)
eq["species"] = bool(np.array_equal(a[g + "/species"][()], b["particles/all/species"][()]))
if "mass" in a[g]:
    eq["mass"] = bool(np.array_equal(a[g + "/mass"][()], b["particles/all/mass"][()]))
prov = json.loads(b["parameters"].attrs["trajvault_provenance"])
print(json.dumps({"equal": eq, "units": units, "sources": [{"sha256": s["sha256"]} for s in prov["sources"]]}))
`, src, out, c.group), &got)
			for k, ok := range got.Equal {
				if !ok {
					t.Errorf("%s differs from the source", k)
				}
			}
			if len(got.Equal) < 4 {
				t.Errorf("compared only %v", got.Equal)
			}
			for el, u := range c.units {
				if got.Units[el] != u {
					t.Errorf("%s unit %q, want %q (canonical spelling)", el, got.Units[el], u)
				}
			}
			raw, err := os.ReadFile(src)
			if err != nil {
				t.Fatal(err)
			}
			sum := sha256.Sum256(raw)
			if len(got.Sources) != 1 || got.Sources[0].SHA256 != hex.EncodeToString(sum[:]) {
				t.Errorf("provenance sources %v, want the source's SHA-256 %x", got.Sources, sum)
			}
		})
	}
}

// TestPackH5 (issue 11): pack takes .h5 files beside text logs. A file
// convert wrote is checked (validate, trajvault profile) and copied byte
// for byte; a foreign H5MD file (export/testdata/h5py_foreign.py, Debian
// python3-h5py) is repacked with its SHA-256 in the provenance; a file in
// the layout without a provenance record is refused (exit 1) before
// anything is written. The bag validates (BagIt 1.0, RFC 8493, checked by
// validate's bag checker).
func TestPackH5(t *testing.T) {
	dir, deposit := packFixture(t, "1", "40")
	in := filepath.Join(dir, "in")
	foreign := filepath.Join(in, "b", "foreign.h5")
	os.MkdirAll(filepath.Dir(foreign), 0o755)
	if out, err := exec.Command(testenv.Python(), repo("export", "testdata", "h5py_foreign.py"), foreign).CombinedOutput(); err != nil {
		t.Fatalf("h5py writer: %v\n%s", err, out)
	}
	ours := filepath.Join(in, "a", "run.h5")
	os.MkdirAll(filepath.Dir(ours), 0o755)
	if code, out, errs := runCLI("convert", foreign, "-o", ours); code != 0 {
		t.Fatalf("convert: exit %d\n%s%s", code, out, errs)
	}
	// A file in the layout that convert did not write: refused.
	bare := filepath.Join(in, "c", "bare.h5")
	os.MkdirAll(filepath.Dir(bare), 0o755)
	raw, _ := os.ReadFile(demoFile(t))
	os.WriteFile(bare, raw, 0o644)
	bag := filepath.Join(dir, "bag")
	code, out, errs := runCLI("pack", in, "-o", bag, "--deposit", deposit)
	if _, err := os.Stat(bag); code != 1 || err == nil || !strings.Contains(errs, "no provenance record") {
		t.Fatalf("pack with a layout file without provenance: exit %d, bag written %v\n%s%s", code, err == nil, out, errs)
	}
	os.RemoveAll(filepath.Dir(bare))
	code, out, errs = runCLI("pack", in, "-o", bag, "--deposit", deposit)
	if code != 0 {
		t.Fatalf("pack: exit %d\n%s%s", code, out, errs)
	}
	if code, out, _ := runCLI("validate", bag); code != 0 {
		t.Errorf("validate bag: exit %d\n%s", code, out)
	}
	copied, _ := os.ReadFile(filepath.Join(bag, "data", "trajectories", "a.h5"))
	orig, _ := os.ReadFile(ours)
	if len(orig) == 0 || string(copied) != string(orig) {
		t.Errorf("a.h5 is not a byte copy of the converted file (%d vs %d bytes)", len(copied), len(orig))
	}
	var prov struct{ Sources []struct{ SHA256 string } }
	rec, _ := os.ReadFile(filepath.Join(bag, "data", "provenance", "b.json"))
	json.Unmarshal(rec, &prov)
	src, _ := os.ReadFile(foreign)
	sum := sha256.Sum256(src)
	if len(prov.Sources) != 1 || prov.Sources[0].SHA256 != hex.EncodeToString(sum[:]) {
		t.Errorf("b.json sources %v, want the foreign file's SHA-256 %x", prov.Sources, sum)
	}
}
