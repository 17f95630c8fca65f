package compare

import (
	"context"
	"math"
	"math/rand/v2"
	"path/filepath"
	"strconv"
	"testing"

	"trajvault/internal/trajfile"
	"trajvault/internal/units"
)

// cluster is a small Lennard-Jones cluster integrated by velocity Verlet
// in atomic units: a chaotic system with a known cause of divergence (the
// perturbation the test plants), built here because the demo model cannot
// restart from perturbed initial conditions. Argon-like parameters
// (epsilon/k_B = 119.8 K, sigma = 3.405 angstrom, from memory); only
// the chaos matters, not the numbers.
type cluster struct {
	x, v []float64 // bohr, bohr/au_time
	m    float64   // me
	eps  float64   // hartree
	sig  float64   // bohr
}

// newCluster places 27 atoms on a 3 x 3 x 3 cube of spacing 2^(1/6)
// sigma with small random velocities (seeded): relaxing from the cube
// heats the cluster into its liquid-like, chaotic range. (With 8 atoms
// the finite-time growth rate fluctuates by 15 % between windows; 27
// atoms average it out.)
func newCluster(seed uint64) *cluster {
	toBohr, _ := units.Factor("angstrom", "bohr")
	kB := 3.1668115634556e-6 // hartree/K, CODATA 2018
	c := &cluster{m: 39.948 * 1822.888486209, eps: 119.8 * kB, sig: 3.405 * toBohr}
	a := math.Pow(2, 1.0/6) * c.sig
	rng := rand.New(rand.NewPCG(seed, 7))
	const e = 3
	for i := 0; i < e*e*e; i++ {
		c.x = append(c.x, a*float64(i%e), a*float64(i/e%e), a*float64(i/e/e))
		for k := 0; k < 3; k++ {
			c.v = append(c.v, 0.1*math.Sqrt(c.eps/c.m)*rng.NormFloat64())
		}
	}
	return c
}

// forces returns F = -grad V and V for V = sum_pairs 4 eps ((s/r)^12 -
// (s/r)^6).
func (c *cluster) forces(f []float64) float64 {
	for i := range f {
		f[i] = 0
	}
	n := len(c.x) / 3
	pot := 0.0
	for i := 0; i < n; i++ {
		for j := i + 1; j < n; j++ {
			var d [3]float64
			r2 := 0.0
			for k := 0; k < 3; k++ {
				d[k] = c.x[3*i+k] - c.x[3*j+k]
				r2 += d[k] * d[k]
			}
			s6 := math.Pow(c.sig*c.sig/r2, 3)
			pot += 4 * c.eps * (s6*s6 - s6)
			g := 24 * c.eps * (2*s6*s6 - s6) / r2 // -dV/dr / r
			for k := 0; k < 3; k++ {
				f[3*i+k] += g * d[k]
				f[3*j+k] -= g * d[k]
			}
		}
	}
	return pot
}

// step advances one velocity Verlet step of dt (au_time); f holds the
// forces at the current positions and is updated.
func (c *cluster) step(f []float64, dt float64) float64 {
	for i := range c.x {
		c.v[i] += 0.5 * dt * f[i] / c.m
		c.x[i] += dt * c.v[i]
	}
	pot := c.forces(f)
	for i := range c.x {
		c.v[i] += 0.5 * dt * f[i] / c.m
	}
	return pot
}

// benettinRate estimates the growth rate (1/fs) of a small separation of
// positions over [t0, t1] fs independently of compare, by the
// two-trajectory method with renormalisation (G. Benettin, L. Galgani,
// A. Giorgilli, J.-M. Strelcyn, Meccanica 15, 9 (1980)): a companion run
// starts with atom 0 moved by delta0 along x, as the planted rerun does;
// every 100 fs its separation from the reference is scaled back to
// delta0 (positions and velocities alike), and the rate is the sum of
// ln(d/delta0) over the renormalisation intervals inside the window
// divided by their total length.
func benettinRate(t *testing.T, t0, t1, dtFs float64) float64 {
	ref, cmp := newCluster(5), newCluster(5)
	d0 := 1e-10 * mustFactor(t, "angstrom", "bohr")
	cmp.x[0] += d0
	dt := dtFs * mustFactor(t, "fs", "au_time")
	fr, fc := make([]float64, len(ref.x)), make([]float64, len(ref.x))
	ref.forces(fr)
	cmp.forces(fc)
	const every = 20 // steps between renormalisations
	sum, span := 0.0, 0.0
	for s := 1; float64(s)*dtFs <= t1; s++ {
		ref.step(fr, dt)
		cmp.step(fc, dt)
		if s%every != 0 {
			continue
		}
		d := 0.0
		for i := range ref.x {
			d += (cmp.x[i] - ref.x[i]) * (cmp.x[i] - ref.x[i])
		}
		d = math.Sqrt(d)
		if float64(s-every)*dtFs >= t0 {
			sum += math.Log(d / d0)
			span += every * dtFs
		}
		for i := range ref.x {
			cmp.x[i] = ref.x[i] + (cmp.x[i]-ref.x[i])*d0/d
			cmp.v[i] = ref.v[i] + (cmp.v[i]-ref.v[i])*d0/d
		}
		cmp.forces(fc)
	}
	return sum / span
}

// write integrates steps steps of dtFs and stores every stride-th frame
// to path: positions printed at 9 decimals of angstrom (scale-offset
// storage at that precision, as convert stores a log printed so), total
// energy losslessly.
func (c *cluster) write(t *testing.T, path string, steps, stride int, dtFs float64) {
	t.Helper()
	toAng, _ := units.Factor("bohr", "angstrom")
	dt := dtFs * mustFactor(t, "fs", "au_time")
	n := len(c.x) / 3
	w, err := trajfile.Create(path, trajfile.Spec{
		Author: "compare test", Species: make18(n), Masses: fill(n, 39.948),
		Total: true, TimeStep: dtFs, Integrator: "velocity Verlet", Method: "Lennard-Jones cluster (test)",
		Storage: map[string]trajfile.Storage{"position": {Format: "fixed:9", Decimals: 9}},
	})
	if err != nil {
		t.Fatal(err)
	}
	f := make([]float64, len(c.x))
	pot := c.forces(f)
	for s := 0; s <= steps; s++ {
		if s > 0 {
			pot = c.step(f, dt)
		}
		if s%stride != 0 {
			continue
		}
		kin := 0.0
		pos := make([]float64, len(c.x))
		for i := range c.x {
			kin += 0.5 * c.m * c.v[i] * c.v[i]
			pos[i] = math.Round(c.x[i]*toAng*1e9) / 1e9
		}
		if err := w.WriteFrame(&trajfile.Frame{Step: int64(s), Time: float64(s) * dtFs, Position: pos, Total: kin + pot}); err != nil {
			t.Fatal(err)
		}
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
}

func make18(n int) []int {
	z := make([]int, n)
	for i := range z {
		z[i] = 18
	}
	return z
}

func fill(n int, x float64) []float64 {
	v := make([]float64, n)
	for i := range v {
		v[i] = x
	}
	return v
}

func mustFactor(t *testing.T, from, to string) float64 {
	f, err := units.Factor(from, to)
	if err != nil {
		t.Fatal(err)
	}
	return f
}

// perturbed writes the reference run (delta = 0) or a run whose atom 0
// starts delta angstrom away along x.
func perturbed(t *testing.T, dir, name string, delta, dtFs float64, steps, stride int) string {
	c := newCluster(5)
	c.x[0] += delta * mustFactor(t, "angstrom", "bohr")
	p := filepath.Join(dir, name+".h5")
	c.write(t, p, steps, stride, dtFs)
	return p
}

func pairOf(t *testing.T, a, b string) *Pair {
	t.Helper()
	sa := &side{files: map[string]string{"x": a}, label: map[string]string{"x": a}}
	sb := &side{files: map[string]string{"x": b}, label: map[string]string{"x": b}}
	p, err := openPair("x", sa, "x", sb, "x", DefaultSettings)
	if err != nil {
		t.Fatal(err)
	}
	return p
}

// TestPairPlantedTruth: a run compared with itself is identical; reruns
// from one position moved by 1e-10 and 1e-12 angstrom agree at first
// (within the printed 1e-9 angstrom), then diverge exponentially at one
// rate, whatever the size of the perturbation, and reach the threshold
// ln(100)/rate later for the 100 times smaller perturbation (issue 16:
// both within 20 %). Exponential separation of nearby trajectories at a
// rate independent of the initial separation is the defining property of
// a positive largest Lyapunov exponent (G. Benettin et al., Meccanica
// 15, 9 (1980)).
func TestPairPlantedTruth(t *testing.T) {
	dir := t.TempDir()
	const steps, stride, dt = 12000, 10, 5.0 // 60 ps
	ref := perturbed(t, dir, "ref", 0, dt, steps, stride)
	p10 := perturbed(t, dir, "p10", 1e-10, dt, steps, stride)
	p12 := perturbed(t, dir, "p12", 1e-12, dt, steps, stride)

	if p := pairOf(t, ref, ref); p.Verdict != Identical {
		t.Errorf("self: %s (%s)", p.Verdict, p.Reason)
	}
	a, b := pairOf(t, ref, p10), pairOf(t, ref, p12)
	for _, x := range []struct {
		name string
		p    *Pair
	}{{"1e-10", a}, {"1e-12", b}} {
		p := x.p
		t.Logf("%s: %s; same until %s fs, threshold at %s fs, rate %s/fs (R2 %s) over %.0f..%.0f fs, extrapolated d0 %s",
			x.name, p.Verdict, fmtp(p.SameUntil), fmtp(p.ThresholdTime), fmtp(p.Rate), fmtp(p.R2), p.Window[0], p.Window[1], fmtp(p.Extrapolated))
		if p.Verdict != Diverged || p.SameUntil == nil || *p.SameUntil <= 0 || p.Rate == nil || p.ThresholdTime == nil {
			t.Fatalf("%s: %s (%s); want same, then diverged with a rate and a threshold time", x.name, p.Verdict, p.Reason)
		}
	}
	ra, rb := *a.Rate, *b.Rate
	for _, p := range []*Pair{a, b} {
		lb := benettinRate(t, p.Window[0], p.Window[1], dt)
		t.Logf("window %.0f..%.0f fs: fitted rate %.4g/fs, renormalised two-trajectory rate %.4g/fs", p.Window[0], p.Window[1], *p.Rate, lb)
		if math.Abs(*p.Rate-lb) > 0.2*lb {
			t.Errorf("fitted rate %.4g/fs, independent estimate %.4g/fs: more than 20 %% apart", *p.Rate, lb)
		}
	}
	if math.Abs(ra-rb) > 0.2*math.Max(ra, rb) {
		t.Errorf("rates %.4g and %.4g /fs differ by more than 20 %%", ra, rb)
	}
	want := math.Log(100) / ((ra + rb) / 2)
	got := *b.ThresholdTime - *a.ThresholdTime
	t.Logf("threshold time shift %.0f fs, ln(100)/rate = %.0f fs", got, want)
	if math.Abs(got-want) > 0.2*want {
		t.Errorf("threshold time shifts by %.0f fs, want ln(100)/rate = %.0f fs within 20 %%", got, want)
	}
}

func fmtp(x *float64) string {
	if x == nil {
		return "-"
	}
	return strconv.FormatFloat(*x, 'g', 4, 64)
}

// TestPairSetupDifference: a rerun from positions 0.01 angstrom away is
// different from the start, and a rerun at another time step puts the
// time step first among the setup differences.
func TestPairSetupDifference(t *testing.T) {
	dir := t.TempDir()
	ref := perturbed(t, dir, "ref", 0, 5, 400, 10)
	far := perturbed(t, dir, "far", 0.01, 5, 400, 10)
	if p := pairOf(t, ref, far); p.Verdict != Setup {
		t.Errorf("0.01 angstrom apart: %s (%s)", p.Verdict, p.Reason)
	}
	dt2 := perturbed(t, dir, "dt2", 0, 2.5, 800, 20)
	rep, err := Run(context.Background(), ref, dt2, Options{Settings: DefaultSettings})
	if err != nil {
		t.Fatal(err)
	}
	if len(rep.Setup) == 0 || rep.Setup[0].Item != "time step" || len(rep.Findings) == 0 || rep.Findings[0].Code != "C1" {
		t.Errorf("setup differences %v, findings %v; want the time step first", rep.Setup, rep.Findings)
	}
}
