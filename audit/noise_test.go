package audit

import (
	"context"
	"math"
	"testing"
)

// wells: 30 hydrogen atoms in isotropic harmonic wells of 80-120 cm-1
// (spread so that the bounded Verlet terms decorrelate), 300 K, dt 0.5 fs.
// Run length from the formulas of the notes: the per-step random-walk
// variance sigma_F^2 dt^2 <sum v^2> (about 0.02 sigma_F^2 hartree^2 here)
// must exceed the bounded term 2 sigma_w^2 (about 1e-13 hartree^2) well
// within a quarter of the run: for sigma_F = 1e-6 that takes some 100
// steps, so 20000 steps leave two decades of lags to fit.
func wells(sigmaF float64, seed uint64) oscillators {
	n := 30
	o := oscillators{dtFs: 0.5, steps: 20000, sigmaF: sigmaF, seed: seed}
	for i := 0; i < n; i++ {
		o.species = append(o.species, 1)
		o.omega = append(o.omega, (80+40*float64(i)/float64(n-1))*cmAu)
	}
	return o
}

// TestForceNoiseRecovered: Gaussian force noise injected per component
// per step is estimated within 30 %, and a noise-free run is not called
// noisy.
func TestForceNoiseRecovered(t *testing.T) {
	for i, sigma := range []float64{1e-6, 1e-5, 1e-4} {
		res, err := File(context.Background(), wells(sigma, uint64(10+i)).run(t), DefaultSettings)
		if err != nil {
			t.Fatal(err)
		}
		c := check(t, res, "force-noise")
		got := c.Values["sigma_F_hartree_per_bohr"]
		t.Logf("injected %.0e: %s %s", sigma, c.Verdict, c.Summary)
		if math.Abs(got-sigma) > 0.3*sigma || c.Verdict == Unknown {
			t.Errorf("injected %.1e, estimated %.3e (%s)", sigma, got, c.Verdict)
		}
	}
	res, err := File(context.Background(), wells(0, 3).run(t), DefaultSettings)
	if err != nil {
		t.Fatal(err)
	}
	c := check(t, res, "force-noise")
	t.Logf("noise-free: %s %s", c.Verdict, c.Summary)
	if c.Verdict != OK || (c.Values["sigma_F_hartree_per_bohr"] > 1e-7 && c.Values["upper_bound_hartree_per_bohr"] == 0) {
		t.Errorf("noise-free run: %s, %v", c.Verdict, c.Values)
	}
}

// TestNoiseWarnLevel: noise at 1e-4 hartree/bohr is above the 1e-5 level
// of practice and is warned about.
func TestNoiseWarnLevel(t *testing.T) {
	res, _ := File(context.Background(), wells(1e-4, 21).run(t), DefaultSettings)
	if v := check(t, res, "force-noise").Verdict; v != Warn {
		t.Errorf("1e-4 hartree/bohr judged %s", v)
	}
}
