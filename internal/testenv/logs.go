package testenv

import (
	"bufio"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"trajvault/internal/elements"
	"trajvault/internal/units"
)

// LegacyLogs writes one trajectory folder whose numbers use the printing
// styles of legacy logs (C printf %f/%e, Fortran D exponents, CRLF line
// ends, a UTF-8 byte-order mark, ! comments) - common practice - with
// random values from a seeded generator. It returns the folder.
func LegacyLogs(t testing.TB, frames int) string {
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
		// The kinetic energy printed is 1/2 m v^2 of the printed
		// velocities (standard atomic weights; 1 u angstrom^2 fs^-2 in
		// eV from CODATA 2018), so that physics cross-checks pass.
		mv2 := 0.0
		for _, s := range syms {
			fmt.Fprintf(gw, "%s %12.6f %12.6f %12.6f", s, 4*rng.NormFloat64(), 4*rng.NormFloat64(), 4*rng.NormFloat64())
			v := [3]float64{0.01 * rng.NormFloat64(), 0.01 * rng.NormFloat64(), 0.01 * rng.NormFloat64()}
			fmt.Fprintf(gw, " %.10f %.10f %.10f", v[0], v[1], v[2])
			m, _ := elements.Mass(elements.Number(s))
			for _, x := range v {
				x, _ = strconv.ParseFloat(strconv.FormatFloat(x, 'f', 10, 64), 64)
				mv2 += m * x * x
			}
			for k := 0; k < 3; k++ {
				// Fortran D exponent, 9 significant digits
				fmt.Fprintf(gw, " %s", strings.Replace(fmt.Sprintf("%.8E", rng.NormFloat64()*math.Pow(10, float64(rng.IntN(6)-3))), "E", "D", 1))
			}
			fmt.Fprint(gw, "\n")
		}
		_ = rng.Float64() // keeps the sequence of the other values
		ek := 0.5 * mv2 * units.DaltonKg * 1e10 / units.Elementary
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

// LegacyLogUnits are the units LegacyLogs prints in (unit kind -> unit).
var LegacyLogUnits = map[string]string{"position": "angstrom", "velocity": "angstrom fs-1", "force": "eV angstrom-1", "energy": "eV", "time": "fs"}
