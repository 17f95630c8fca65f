package pack

import (
	"bufio"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"trajvault/internal/h5"
)

// corpus writes one trajectory folder whose numbers use the printing
// styles of legacy logs (C printf %f/%e, Fortran D exponents, CRLF line
// ends, a UTF-8 byte-order mark, ! comments) - common practice - with
// random values from a seeded generator. It returns the folder.
func corpus(t *testing.T, frames int) string {
	t.Helper()
	dir := filepath.Join(t.TempDir(), "run-1")
	os.MkdirAll(dir, 0o755)
	rng := rand.New(rand.NewPCG(11, 12))
	geo, _ := os.Create(filepath.Join(dir, "geom.extxyz"))
	tab, _ := os.Create(filepath.Join(dir, "energies.dat"))
	pop, _ := os.Create(filepath.Join(dir, "states.csv"))
	gw, tw, pw := bufio.NewWriter(geo), bufio.NewWriter(tab), bufio.NewWriter(pop)
	syms := []string{"C", "H", "H", "H", "H"}
	fmt.Fprint(tw, "\ufeff! energies of an invented run\r\n! step  t[fs]  Ekin[eV]  Epot[eV]  Etot[eV]\r\n")
	fmt.Fprint(pw, "# step,E1[eV],E2[eV],E3[eV],P1,P2,P3,state\n")
	for f := 0; f < frames; f++ {
		step := 5 * f
		time := 0.25 * float64(step)
		fmt.Fprintf(gw, "%d\nProperties=species:S:1:pos:R:3:velo:R:3:forces:R:3 time=%.3f step=%d pbc=\"F F F\"\n", len(syms), time, step)
		for _, s := range syms {
			fmt.Fprintf(gw, "%s %12.6f %12.6f %12.6f", s, 4*rng.NormFloat64(), 4*rng.NormFloat64(), 4*rng.NormFloat64())
			fmt.Fprintf(gw, " %.10f %.10f %.10f", 0.01*rng.NormFloat64(), 0.01*rng.NormFloat64(), 0.01*rng.NormFloat64())
			for k := 0; k < 3; k++ {
				// Fortran D exponent, 9 significant digits
				fmt.Fprintf(gw, " %s", strings.Replace(fmt.Sprintf("%.8E", rng.NormFloat64()*math.Pow(10, float64(rng.IntN(6)-3))), "E", "D", 1))
			}
			fmt.Fprint(gw, "\n")
		}
		ek := 0.5 + rng.Float64()
		ep := -100 - rng.Float64()
		fmt.Fprintf(tw, "%6d %8.3f %14.8f %14.8f %14.8f\r\n", step, time, ek, ep, ek+ep)
		a, b := rng.Float64(), rng.Float64()
		p := []float64{a * b, a * (1 - b), 1 - a}
		fmt.Fprintf(pw, "%d,%.7e,%.7e,%.7e,%.6f,%.6f,%.6f,%d\n", step, -rng.Float64(), rng.Float64(), 1+rng.Float64(), p[0], p[1], p[2], 1+rng.IntN(3))
	}
	gw.Flush()
	tw.Flush()
	pw.Flush()
	geo.Close()
	tab.Close()
	pop.Close()
	return dir
}

// numberTokens returns the numeric tokens of the atom lines of an
// (extended) XYZ file, in order.
func numberTokens(t *testing.T, path string, skipCols int) []string {
	t.Helper()
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	var out []string
	for _, line := range strings.Split(strings.ReplaceAll(string(b), "\r", ""), "\n") {
		fs := strings.Fields(line)
		if len(fs) < 4 || strings.Contains(line, "=") {
			continue
		}
		out = append(out, fs[skipCols:]...)
	}
	return out
}

func convertDir(t *testing.T, dir string, opt ConvertOptions) string {
	t.Helper()
	tr, err := TrajectoryFrom([]string{dir}, opt.Recipe)
	if err != nil {
		t.Fatal(err)
	}
	rep := Scan(tr, opt.Options)
	for _, p := range rep.Problems {
		t.Logf("scan: %+v", p)
	}
	out := filepath.Join(t.TempDir(), "out.h5")
	if _, err := Convert(rep, out, opt); err != nil {
		t.Fatal(err)
	}
	return out
}

var corpusUnits = map[string]string{"position": "angstrom", "velocity": "angstrom fs-1", "force": "eV angstrom-1", "energy": "eV", "time": "fs"}

// TestRoundTripDigits: text -> h5 -> text reproduces every number of the
// corpus digit for digit, in the precision it was printed with.
func TestRoundTripDigits(t *testing.T) {
	dir := corpus(t, 300)
	h5path := convertDir(t, dir, ConvertOptions{Options: Options{Units: corpusUnits}})
	out := filepath.Join(t.TempDir(), "x")
	if _, err := Export(h5path, out, FormatExtXYZ); err != nil {
		t.Fatal(err)
	}
	src := numberTokens(t, filepath.Join(dir, "geom.extxyz"), 1)
	got := numberTokens(t, filepath.Join(out, "traj.extxyz"), 1)
	if len(src) != len(got) || len(src) == 0 {
		t.Fatalf("%d source numbers, %d exported", len(src), len(got))
	}
	bad := 0
	for i := range src {
		if src[i] != got[i] {
			if bad < 5 {
				t.Errorf("number %d: source %q, exported %q", i, src[i], got[i])
			}
			bad++
		}
	}
	if bad > 0 {
		t.Errorf("%d of %d numbers differ", bad, len(src))
	}
	// Tables: every mapped column comes back with its printed digits.
	csvOut := filepath.Join(t.TempDir(), "c")
	if _, err := Export(h5path, csvOut, FormatCSV); err != nil {
		t.Fatal(err)
	}
	exported := readCSV(t, filepath.Join(csvOut, "observables.csv"))
	srcTab := readWS(t, filepath.Join(dir, "energies.dat"))
	srcPop := readCSV(t, filepath.Join(dir, "states.csv"))
	for r := range srcTab {
		e := exported[r]
		want := map[string]string{
			"step": srcTab[r][0], "time[fs]": srcTab[r][1], "kinetic_energy[eV]": srcTab[r][2],
			"potential_energy[eV]": srcTab[r][3], "total_energy[eV]": srcTab[r][4],
			"state_energy_0[eV]": srcPop[r]["1"], "state_energy_2[eV]": srcPop[r]["3"], "population_1": srcPop[r]["5"],
		}
		for col, w := range want {
			if e[col] != w {
				t.Fatalf("row %d %s: source %q, exported %q", r, col, w, e[col])
			}
		}
	}
}

func readWS(t *testing.T, path string) [][]string {
	b, _ := os.ReadFile(path)
	var rows [][]string
	for _, l := range strings.Split(strings.ReplaceAll(string(b), "\r", ""), "\n") {
		l = strings.TrimPrefix(l, "\ufeff")
		if l == "" || l[0] == '!' || l[0] == '#' {
			continue
		}
		rows = append(rows, strings.Fields(l))
	}
	return rows
}

// readCSV returns data rows; for observables.csv, keyed by header.
func readCSV(t *testing.T, path string) []map[string]string {
	b, _ := os.ReadFile(path)
	lines := strings.Split(strings.TrimSpace(string(b)), "\n")
	header := strings.Split(strings.TrimPrefix(lines[0], "# "), ",")
	var rows []map[string]string
	for _, l := range lines[1:] {
		m := map[string]string{}
		for i, v := range strings.Split(l, ",") {
			m[header[i]] = v
			m[fmt.Sprint(i)] = v
		}
		rows = append(rows, m)
	}
	return rows
}

// TestToleranceBound: lossy storage asked for with a tolerance keeps every
// value within the recorded bound, and validate reports the bound (V29).
func TestToleranceBound(t *testing.T) {
	dir := corpus(t, 50)
	const tol = 5e-7
	h5path := convertDir(t, dir, ConvertOptions{Options: Options{Units: corpusUnits}, Tolerance: map[string]float64{"velocity": tol}})
	exact := convertDir(t, dir, ConvertOptions{Options: Options{Units: corpusUnits}, BitExact: true})
	lossy := readAll(t, h5path, "/particles/all/velocity/value")
	src := readAll(t, exact, "/particles/all/velocity/value")
	worst := 0.0
	for i := range src {
		worst = math.Max(worst, math.Abs(lossy[i]-src[i]))
	}
	if worst > tol || worst == 0 {
		t.Errorf("max error %g, bound %g (zero means nothing was rounded)", worst, tol)
	}
	f, _ := h5.Open(h5path)
	defer f.Close()
	a, err := f.Attr("/particles/all/velocity/value", "trajvault_tolerance")
	if err != nil || len(a.Floats) != 1 || a.Floats[0] > tol {
		t.Errorf("recorded bound %v %v", a.Floats, err)
	}
}

func readAll(t *testing.T, path, ds string) []float64 {
	f, err := h5.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	v, _, err := f.ReadFloat64(ds)
	if err != nil {
		t.Fatal(err)
	}
	return v
}
