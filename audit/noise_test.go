package audit

import (
	"context"
	"fmt"
	"math"
	"math/rand/v2"
	"path/filepath"
	"runtime"
	"sort"
	"strings"
	"sync"
	"testing"

	"trajvault/internal/demo"
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
	if c.Verdict != OK || (c.Values["sigma_F_hartree_per_bohr"] > 1e-7 && c.Bounds["sigma_F_hartree_per_bohr"] == 0) {
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

// hopRichNoise are scenario knobs of the demo model for the force-noise
// tests: a diabatic coupling 0.3 of Tarnol's gives 50-150 accepted hops
// in 2 ps (one every 13-40 fs) and passes through avoided crossings with
// a seam gap of 0.006 hartree.
var hopRichNoise = demo.Faults{CouplingScale: 0.3}

// demoRuns writes and audits one demo run per seed and faults, all at
// once (GOMAXPROCS at a time), and returns the results in order.
func demoRuns(t *testing.T, steps int, seeds []uint64, faults []demo.Faults) []*Result {
	t.Helper()
	return demoRunsDt(t, steps, demo.DefaultOptions.DtFs, seeds, faults)
}

// demoRunsDt is demoRuns at a time step of dtFs.
func demoRunsDt(t *testing.T, steps int, dtFs float64, seeds []uint64, faults []demo.Faults) []*Result {
	t.Helper()
	dir := t.TempDir()
	out := make([]*Result, len(seeds))
	errs := make([]error, len(seeds))
	sem := make(chan struct{}, runtime.GOMAXPROCS(0))
	var wg sync.WaitGroup
	for i := range seeds {
		wg.Add(1)
		go func() {
			defer wg.Done()
			sem <- struct{}{}
			defer func() { <-sem }()
			p := filepath.Join(dir, fmt.Sprintf("run%03d.h5", i))
			o := demo.DefaultOptions
			o.Seed, o.Steps, o.Faults, o.DtFs = seeds[i], steps, faults[i], dtFs
			if errs[i] = demo.WriteH5(p, o); errs[i] == nil {
				out[i], errs[i] = File(context.Background(), p, DefaultSettings)
			}
		}()
	}
	wg.Wait()
	for _, err := range errs {
		if err != nil {
			t.Fatal(err)
		}
	}
	return out
}

// TestForceNoiseHopRich: Gaussian force noise drawn once per step (so the
// effective sigma is the injected one; physics notes) at 1e-6, 1e-5 and
// 1e-4 hartree/bohr on hop-rich 2 ps runs (0.05 fs steps, every step
// stored) is recovered with a median within 30 % (issue 13 measured
// 9.3e-5, 7.6e-5 and 7.3e-5 for all three: the integration error near
// crossings and hops swamped the estimator); a value is given only at
// noiseFloorFactor times its resolution floor or more, and a bound given
// instead is never below the truth. The clean runs of the same seeds
// are never called noisy: they report an upper bound below 1e-6 (measured
// 2e-8 to 3e-8: at 0.05 fs the shadow energy resolves 1e-6, which is why
// it is a value here; TestForceNoiseBelowFloor has the runs where it is
// not), or cannot tell.
func TestForceNoiseHopRich(t *testing.T) {
	if testing.Short() {
		t.Skip("2 ps runs")
	}
	const seeds = 5
	levels := []float64{1e-6, 1e-5, 1e-4, 0}
	var ss []uint64
	var fs []demo.Faults
	for _, sigma := range levels {
		for seed := uint64(1); seed <= seeds; seed++ {
			f := hopRichNoise
			f.ForceNoise = sigma
			ss, fs = append(ss, seed), append(fs, f)
		}
	}
	res := demoRuns(t, 40000, ss, fs)
	for li, sigma := range levels {
		var ratios []float64
		for k := 0; k < seeds; k++ {
			r := res[li*seeds+k]
			c, hops := check(t, r, "force-noise"), check(t, r, "hops").Values["accepted"]
			ub := c.Bounds["sigma_F_hartree_per_bohr"]
			if sigma == 0 {
				t.Logf("clean seed %d (%g accepted hops): %s, upper bound %.2g", k+1, hops, c.Verdict, ub)
				if c.Verdict != Unknown && !(ub > 0 && ub < 1e-6) {
					t.Errorf("clean seed %d: %s: %s", k+1, c.Verdict, c.Summary)
				}
				continue
			}
			got := c.Values["sigma_F_hartree_per_bohr"]
			if ub > 0 {
				got = math.NaN() // a bound is not a value
				if ub < sigma {
					t.Errorf("injected %.0e seed %d: upper bound %.2g below the truth", sigma, k+1, ub)
				}
			} else if _, both := c.Bounds["sigma_F_hartree_per_bohr"]; both || got < noiseFloorFactor*c.Values["resolution_floor_hartree_per_bohr"] {
				t.Errorf("injected %.0e seed %d: value %.2g not %d times its floor %.2g, or also a bound", sigma, k+1, got, noiseFloorFactor, c.Values["resolution_floor_hartree_per_bohr"])
			}
			ratios = append(ratios, got/sigma)
			t.Logf("injected %.0e seed %d (%g accepted hops): ratio %.2f, %s: %s", sigma, k+1, hops, got/sigma, c.Verdict, c.Summary)
		}
		if sigma == 0 {
			continue
		}
		med := median(ratios)
		t.Logf("injected %.0e: median ratio %.2f", sigma, med)
		if !(math.Abs(med-1) <= 0.3) {
			t.Errorf("injected %.0e: median estimate %.2f of it, want within 30 %%", sigma, med)
		}
	}
}

// TestCleanHopRichNeverNoisy: clean hop-rich runs of 20 seeds give no
// force-noise warning (issue 13: 4 of 7 warnings fell on clean or weakly
// noisy runs).
func TestCleanHopRichNeverNoisy(t *testing.T) {
	if testing.Short() {
		t.Skip("20 runs")
	}
	var ss []uint64
	var fs []demo.Faults
	for seed := uint64(101); seed <= 120; seed++ {
		ss, fs = append(ss, seed), append(fs, hopRichNoise)
	}
	for i, r := range demoRuns(t, 20000, ss, fs) {
		if c := check(t, r, "force-noise"); c.Verdict == Warn || c.Verdict == Fail {
			t.Errorf("clean seed %d: %s: %s", ss[i], c.Verdict, c.Summary)
		}
	}
}

// TestNotFooledAtOnePeriod: a bounded periodic energy error whose first
// lag falls exactly at its period (where it cancels, so D(kmin) ~ 0 and
// every later lag looks like growth) is not taken for a random walk
// (issue 13: flat structure functions from the second lag on were called
// noise); a random walk of the same size is.
func TestNotFooledAtOnePeriod(t *testing.T) {
	const n, period = 40000, 180
	rng := rand.New(rand.NewPCG(5, 6))
	bounded := make([]float64, n)
	walk := make([]float64, n)
	w := 0.0
	for i := range bounded {
		bounded[i] = 1e-5*math.Sin(2*math.Pi*float64(i)/period) + 1e-9*rng.NormFloat64()
		w += 1e-7 * rng.NormFloat64()
		walk[i] = w + 1e-9*math.Sin(2*math.Pi*float64(i)/period)
	}
	segs := []segment{{0, n}}
	if f := fitNoise(bounded, segs, period, period, 1, 1, 1, 1); f.Determined {
		t.Errorf("bounded periodic term taken for a random walk: %+v", f)
	}
	if f := fitNoise(walk, segs, period, period, 1, 1, 1, 1); !f.Determined || math.Abs(f.S2/1e-14-1) > 0.3 {
		t.Errorf("random walk of 1e-14 per frame not determined: %+v", f)
	}
}

// median of v; a NaN (a bound where a value was wanted) sorts first and
// so counts as a miss below the others.
func median(v []float64) float64 {
	s := append([]float64(nil), v...)
	sort.Float64s(s)
	n := len(s)
	if n == 0 {
		return math.NaN()
	}
	if n%2 == 1 {
		return s[n/2]
	}
	return (s[n/2-1] + s[n/2]) / 2
}

// TestForceNoiseForcesAsUsed: the same hop-rich runs written with the
// forces the integrator used (noise included), as a code that stores its
// noisy gradients does, give the same estimate: the shadow-energy
// correction depends on the forces only at second order in the step
// (Hairer, Lubich, Wanner, Geometric Numerical Integration, 2006,
// ch. IX). Median of three seeds within 30 % of the injected level.
func TestForceNoiseForcesAsUsed(t *testing.T) {
	if testing.Short() {
		t.Skip("2 ps runs")
	}
	for _, sigma := range []float64{1e-5, 1e-4} {
		var ratios []float64
		for seed := uint64(1); seed <= 3; seed++ {
			p := filepath.Join(t.TempDir(), fmt.Sprintf("u%d.h5", seed))
			o := demo.DefaultOptions
			o.Seed, o.Steps, o.ForcesAsUsed = seed, 40000, true
			o.Faults = hopRichNoise
			o.Faults.ForceNoise = sigma
			if err := demo.WriteH5(p, o); err != nil {
				t.Fatal(err)
			}
			r, err := File(context.Background(), p, DefaultSettings)
			if err != nil {
				t.Fatal(err)
			}
			c := check(t, r, "force-noise")
			got := c.Values["sigma_F_hartree_per_bohr"]
			if c.Bounds["sigma_F_hartree_per_bohr"] > 0 {
				got = math.NaN() // a bound is not a value
			}
			ratios = append(ratios, got/sigma)
			t.Logf("injected %.0e seed %d, forces as used: ratio %.2f (%s)", sigma, seed, got/sigma, c.Verdict)
		}
		if med := median(ratios); !(math.Abs(med-1) <= 0.3) {
			t.Errorf("injected %.0e, forces as used: median estimate %.2f of it", sigma, med)
		}
	}
}

// TestForceNoiseBelowFloor: on hop-rich runs at 0.2 fs steps the
// bounded error of velocity Verlet is 4^4 times that at 0.05 fs (the
// shadow energy is exact to O(h^4); Hairer, Lubich, Wanner, Geometric
// Numerical Integration, 2006, ch. IX), and the noise-free runs of the
// same seeds bound sigma_F only at 2e-6 to 5e-6 (measured): injected
// noise of 1e-6 hartree/bohr is below what the data resolve and must be
// reported as an upper bound at or above the truth, never as a value
// (issue 13's done-when), in the JSON field upper_bounds and in words.
func TestForceNoiseBelowFloor(t *testing.T) {
	const seeds = 4
	var ss []uint64
	var fs []demo.Faults
	for _, sigma := range []float64{1e-6, 0} {
		for seed := uint64(1); seed <= seeds; seed++ {
			f := hopRichNoise
			f.ForceNoise = sigma
			ss, fs = append(ss, seed), append(fs, f)
		}
	}
	res := demoRunsDt(t, 10000, 0.2, ss, fs)
	for i, r := range res {
		c := check(t, r, "force-noise")
		ub, isBound := c.Bounds["sigma_F_hartree_per_bohr"]
		_, isValue := c.Values["sigma_F_hartree_per_bohr"]
		t.Logf("injected %.0e seed %d: %s: %s", fs[i].ForceNoise, ss[i], c.Verdict, c.Summary)
		if fs[i].ForceNoise == 0 {
			if c.Verdict == Warn || c.Verdict == Fail || isValue || !(ub > 1e-6) {
				t.Errorf("clean seed %d: want a bound above 1e-6 (the floor measured), got %s %v %v", ss[i], c.Verdict, c.Values, c.Bounds)
			}
			continue
		}
		if !isBound || isValue || ub < fs[i].ForceNoise || !strings.Contains(c.Summary, "an upper bound and not a value") {
			t.Errorf("seed %d: 1e-6 not reported as an upper bound at or above it: %v %v %s", ss[i], c.Values, c.Bounds, c.Summary)
		}
	}
}
