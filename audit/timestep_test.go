package audit

import (
	"context"
	"math"
	"testing"

	"gonum.org/v1/gonum/mat"

	"trajvault/internal/demo"
)

// fastestHarmonic is the fastest harmonic wavenumber (cm^-1) of the demo
// model's lower adiabatic surface at its minimum: steepest descent from
// the first frame of a run, then the Hessian by central differences of
// the model's analytic gradient, mass-weighted, H_ij / sqrt(m_i m_j) =
// omega^2 (normal-mode analysis; common practice), diagonalised.
func fastestHarmonic(t *testing.T, m demo.Model, state int) float64 {
	t.Helper()
	var x []float64
	m.Run(1, 0, 1, 0, func(s *demo.Step) { x = append([]float64(nil), s.X...) })
	for it := 0; it < 200000; it++ {
		g := m.Eval(x).Grad[state]
		n := 0.0
		for k := range x {
			x[k] -= 0.5 * g[k]
			n += g[k] * g[k]
		}
		if math.Sqrt(n) < 1e-12 {
			break
		}
	}
	const h = 1e-4      // bohr
	var d [9][9]float64 // d[j][i] = dg_i/dx_j
	for j := 0; j < 9; j++ {
		xp := append([]float64(nil), x...)
		xm := append([]float64(nil), x...)
		xp[j] += h
		xm[j] -= h
		gp, gm := m.Eval(xp).Grad[state], m.Eval(xm).Grad[state]
		for i := range d[j] {
			d[j][i] = (gp[i] - gm[i]) / (2 * h)
		}
	}
	H := mat.NewSymDense(9, nil)
	for i := 0; i < 9; i++ {
		for j := i; j < 9; j++ {
			H.SetSym(i, j, (d[i][j]+d[j][i])/2/math.Sqrt(m.Mass[i/3]*m.Mass[j/3]))
		}
	}
	var es mat.EigenSym
	if !es.Factorize(H, false) {
		t.Fatal("Hessian not diagonalised")
	}
	vals := es.Values(nil)
	return math.Sqrt(vals[len(vals)-1]) * hartreeInvCm
}

// TestFastestModeOfModel: the time-step check's fastest bond motion
// against the fastest harmonic frequency of the demo model's Hessian at
// its minimum, computed here (normal-mode analysis; common practice),
// within 5 % as issue 13 asks. Issue 13 saw 3460-7160 cm-1 against
// 3760-3790 when close non-bonded pairs and a low percentile of
// per-frame ratios set the estimate. Three regimes: thermal runs on the
// lower surface (harmonic), hop-rich runs (seam gap 0.002 hartree) and
// the default photoexcited runs, hot after the hop down (the bonds'
// amplitude is large, so the surfaces' anharmonicity shows).
func TestFastestModeOfModel(t *testing.T) {
	cases := []struct {
		name   string
		f      demo.Faults
		lo, hi float64 // accepted range, fraction of the Hessian's value
	}{
		{"thermal, lower surface", demo.Faults{StartLower: true}, 0.95, 1.05},
		{"hop-rich", hopRich, 0.95, 1.05},
		{"photoexcited (hot)", demo.Faults{}, 0.95, 1.05},
	}
	for _, c := range cases {
		m := demo.Tarnol()
		m.Faults = c.f
		want := fastestHarmonic(t, m, 0)
		t.Logf("%s: Hessian at the minimum, fastest mode %.1f cm-1", c.name, want)
		for seed := uint64(1); seed <= 4; seed++ {
			res, err := File(context.Background(), demoRun(t, seed, 4000, c.f), DefaultSettings)
			if err != nil {
				t.Fatal(err)
			}
			ts := check(t, res, "time-step")
			got := ts.Values["wavenumber_cm-1"]
			t.Logf("%s seed %d: %.1f cm-1 (%.3f of the Hessian's)", c.name, seed, got, got/want)
			if got < c.lo*want || got > c.hi*want || ts.Verdict != OK {
				t.Errorf("%s seed %d: %.1f cm-1, Hessian %.1f, want %.2f-%.2f of it (%s: %s)", c.name, seed, got, want, c.lo, c.hi, ts.Verdict, ts.Summary)
			}
		}
	}
}
