package audit

import (
	"fmt"
	"math"
)

// NoiseFit is the decomposition of the energy structure function
//
//	D(k) = <(E(n+k) - E(n))^2> ~ 2 sigma_w^2 + k s^2 + (k Delta r)^2
//
// into a bounded integrator term (sigma_w), a random walk (s^2 per frame
// interval Delta) and a systematic drift r. For independent Gaussian force
// errors sigma_F per component per integration step dt in velocity Verlet,
// the random walk is Var[E(t)-E(0)] = sigma_F^2 dt t <sum v^2>, so
//
//	sigma_F = sqrt(s^2 / (dt Delta <sum v^2>))
//
// and the heating it causes is d<E>/dt = sigma_F^2 dt sum_i 3/(2 m_i)
// (derived; see the physics notes of the project). The averages run over
// pairs of frames inside clean segments only (noiseSegments).
type NoiseFit struct {
	SigmaW     float64 // hartree, bounded term
	S2         float64 // hartree^2 per frame interval
	Rate       float64 // hartree per au_time, systematic drift
	SigmaF     float64 // hartree/bohr, estimated force noise
	Fitted     bool    // enough lags to fit at all
	Determined bool    // the random walk rises clearly above the bounded term
	// UpperBound is the largest sigma_F the data cannot rule out when
	// Determined is false (hartree/bohr), never below noiseFloorFactor
	// times Floor; 0 when no lag could be formed.
	UpperBound float64
	// Floor is the estimator's resolution on this run (hartree/bohr):
	// the sigma_F whose random walk over the longest lag equals the
	// bounded term, sqrt(a / (kmax dt Delta <sum v^2>)) with a = 2
	// sigma_w^2 (at least what D(kmin) leaves beyond the fitted walk).
	Floor float64
	// HeatingRate is the drift sigma_F alone would cause (hartree per
	// au_time); Rate much larger than it means a systematic error.
	HeatingRate float64
	KMin, KMax  int // lags fitted, frames
}

// shadowTracker builds the correction that turns the stored total energy
// into velocity Verlet's shadow energy, which the integrator conserves to
// O(h^4):
//
//	E~ = E + h^2/12 v^T V'' v - h^2/24 F^T M^-1 F,  v^T V'' v = -v . dF/dt
//
// (modified Hamiltonian of the Stormer-Verlet method: E. Hairer, C.
// Lubich, G. Wanner, Geometric Numerical Integration, 2nd ed., Springer
// 2006, ch. IX; from memory, signs and coefficients checked numerically:
// for a harmonic mode it is (1 + (omega h)^2/6) times the exact invariant
// p^2/2m + k x^2 (1 - (omega h)^2/4)/2, and on the demo model it shrinks
// the bounded error 300-fold). dF/dt is the central difference of the
// stored forces, so every step must be stored. Removing the bounded term
// lets the random walk of force noise show at short lags, between hops.
type shadowTracker struct {
	h            float64
	inv          []float64 // 1/m per atom
	corr         []float64 // per frame; NaN where unknown
	prevV        []float64
	prevF, prev2 []float64
	n            int
}

func newShadowTracker(h float64, frames int, masses []float64) *shadowTracker {
	s := &shadowTracker{h: h, corr: make([]float64, frames)}
	for _, m := range masses {
		s.inv = append(s.inv, 1/m)
	}
	for i := range s.corr {
		s.corr[i] = math.NaN()
	}
	return s
}

// add takes frame n's velocities and forces (au) in order.
func (s *shadowTracker) add(v, f []float64) {
	h2 := s.h * s.h
	g := 0.0
	for i, fi := range f {
		g += fi * fi * s.inv[i/3]
	}
	if s.n > 0 && s.n < len(s.corr) { // the first frame has no dF/dt
		s.corr[s.n] = -h2 / 24 * g
	}
	if s.n >= 2 && s.n-1 < len(s.corr) {
		vdf := 0.0
		for i := range f {
			vdf += s.prevV[i] * (f[i] - s.prev2[i]) / (2 * s.h)
		}
		s.corr[s.n-1] -= h2 / 12 * vdf
	}
	s.prev2, s.prevF = s.prevF, append(s.prev2[:0], f...) // reuses the dropped frame's buffer
	s.prevV = append(s.prevV[:0], v...)
	s.n++
}

// energy is e plus the correction; frames without a dF/dt (the first
// and last) are NaN.
func (s *shadowTracker) energy(e []float64) []float64 {
	out := make([]float64, len(e))
	for i := range e {
		out[i] = e[i] + s.corr[i]
		if i == s.n-1 {
			out[i] = math.NaN()
		}
	}
	return out
}

// segment is a half-open range of frames [Start, End).
type segment struct{ Start, End int }

// minLagSpan is how many times kmin the longest lag must reach: lags
// must span most of a decade beyond the decorrelation of the bounded
// term, or a bounded but slow fluctuation passes for a random walk.
const minLagSpan = 8

// lagWindows is how many independent windows a lag needs in the clean
// segments (sum over segments of (L - k) >= lagWindows k).
const lagWindows = 10

// noiseFloorFactor: an estimate counts as a value only when sigma_F is at
// least this many times the resolution floor (NoiseFit.Floor), i.e. the
// walk over the longest lag is at least its square (9) times the bounded
// term; then the bounded term is a tenth of D(kmax) at most and an error
// of a factor 2 in its fit moves sigma_F by under 6 % (derived). Measured
// on hop-rich demo runs (2 ps, 4 seeds, noise 1e-6 and 1e-5 at 0.05, 0.1
// and 0.2 fs steps): estimates with the walk 9 or more times the bounded
// term at the longest lag were within 20 % of the injected noise; those
// nearer the floor fell to 0.68 of it (walk 2.1 times the bounded term,
// 1e-6 at 0.2 fs, where noise-free runs of the same seeds bound the
// estimate at 1.4e-6 to 3.4e-6).
const noiseFloorFactor = 3

// outlierFactor: a frame whose energy change exceeds this many times the
// median change is a burst (an integration error where the surface
// changes fast, a hop); a Gaussian step exceeds it with odds of about
// 1e-80 (derived).
const outlierFactor = 30

// fitNoise fits D(k) over log-spaced lags from kmin up to the longest lag
// with lagWindows independent windows in segs. dtInt is the integration
// step and delta the time between frames (au_time); sumV2 is
// <sum_i |v_i|^2> (bohr^2/au_time^2) over the clean frames; invMass is
// sum_i 3/(2 m_i) (1/electron mass).
//
// The random walk counts as determined only when the fitted walk dominates
// the bounded term at the longest lag and the data at each of the last
// three lags exceed twice those at the first: a bounded quasi-periodic
// term (few modes) whose first lag happens to fall at a full period, where
// it cancels, rises once and then stays flat.
func fitNoise(e []float64, segs []segment, kmin, period int, dtInt, delta, sumV2, invMass float64) NoiseFit {
	f := NoiseFit{KMin: max(kmin, 1)}
	kmin = f.KMin
	if sumV2 <= 0 || dtInt <= 0 {
		return f
	}
	pairs := func(k int) int {
		n := 0
		for _, s := range segs {
			n += max(0, s.End-s.Start-k)
		}
		return n
	}
	var ks, ds []float64
	for k := float64(kmin); ; k *= 1.25 {
		ki := int(k)
		if len(ks) > 0 && float64(ki) == ks[len(ks)-1] {
			continue
		}
		np := pairs(ki)
		if np < lagWindows*ki || np == 0 {
			break
		}
		d := 0.0
		for _, s := range segs {
			for i := s.Start; i+ki < s.End; i++ {
				x := e[i+ki] - e[i]
				d += x * x
			}
		}
		ks = append(ks, float64(ki))
		ds = append(ds, d/float64(np))
	}
	if len(ks) == 0 {
		return f
	}
	kLast := ks[len(ks)-1]
	f.KMax = int(kLast)
	if kLast < minLagSpan*float64(kmin) {
		// Too little clean time to fit; the data still bound the walk.
		f.UpperBound = math.Sqrt(ds[len(ds)-1] / kLast * boundAllowance(segs, f.KMax) / (dtInt * delta * sumV2))
		return f
	}
	a, b, c := nnls3(ks, ds)
	f.Fitted = true
	f.SigmaW = math.Sqrt(a / 2)
	f.S2 = b
	f.Rate = math.Sqrt(c) / delta
	// The reference is the largest D over the first period of lags, so
	// that a lag where a periodic bounded term cancels cannot serve.
	ref := ds[0]
	for j := range ks {
		if ks[j] <= float64(kmin+period) {
			ref = math.Max(ref, ds[j])
		}
	}
	rising := len(ds) >= 4 && ks[len(ks)-3] > float64(kmin+period)
	for j := len(ds) - 3; rising && j < len(ds); j++ {
		rising = ds[j] > 2*ref
	}
	// The bounded term as the data show it: the fit's, or what the
	// first lag leaves beyond the fitted walk when the fit put it at 0.
	bounded := math.Max(a, ds[0]-ks[0]*b)
	f.Floor = math.Sqrt(bounded / (kLast * dtInt * delta * sumV2))
	f.Determined = b > 0 && b*kLast >= noiseFloorFactor*noiseFloorFactor*bounded && rising
	f.SigmaF = math.Sqrt(b / (dtInt * delta * sumV2))
	if !f.Determined {
		// Whatever random walk hides under the bounded term at the
		// longest lag: s^2 kmax <= 2 sigma_w^2 + the data's own scale;
		// never finer than the resolution.
		bound := math.Max(a, ds[len(ds)-1]) / kLast
		f.UpperBound = math.Max(math.Sqrt(bound*boundAllowance(segs, f.KMax)/(dtInt*delta*sumV2)), noiseFloorFactor*f.Floor)
	}
	f.HeatingRate = f.SigmaF * f.SigmaF * dtInt * invMass
	return f
}

// boundAllowance widens an upper bound read from D(k) by three standard
// errors of that mean over its n = pairs/k independent windows: for a
// Gaussian walk the squared increment has relative spread sqrt(2/n)
// (chi-square with one degree of freedom; derived).
func boundAllowance(segs []segment, k int) float64 {
	n := 0
	for _, s := range segs {
		n += max(0, s.End-s.Start-k)
	}
	if k <= 0 || n < k {
		return 1 + 3*math.Sqrt2
	}
	return 1 + 3*math.Sqrt(2/(float64(n)/float64(k)))
}

// noiseSegments are the runs of frames of e the force-noise estimate may
// use, so that no frame pair it compares spans what it leaves out: every
// frame whose energy change includes an accepted hop or a change of the
// active state (and the frame before, whose dF/dt spans the jump), every
// frame where the active state's gap to a neighbouring state is below
// gapMin (hartree; 0 = no gap filter; needs the state energies), every
// frame whose energy change is a burst (outlierFactor times the median)
// and every frame where e is unknown. Each reason is counted in the
// returned map (frames).
func (a *auditor) noiseSegments(e []float64, gapMin float64) ([]segment, map[string]int) {
	T := len(e)
	bad := make([]bool, T)
	why := map[string]int{}
	mark := func(i int, reason string) {
		if i >= 0 && i < T && !bad[i] {
			bad[i] = true
			why[reason]++
		}
	}
	if hops, err := a.r.Hops(); err == nil {
		frameOf := stepFrames(a.r.Steps)
		for _, h := range hops {
			if !h.Frustrated { // a frustrated hop changes neither E nor F
				mark(frameOf(h.Step), "hops")
			}
		}
	}
	act := a.res.Active
	for i := 1; i < len(act) && i < T; i++ {
		if act[i] != act[i-1] {
			// The force jumps: the shadow correction's dF/dt is void
			// at the frame before as well.
			mark(i-1, "hops")
			mark(i, "hops")
		}
	}
	for i := range e {
		if math.IsNaN(e[i]) {
			mark(i, "ends")
		}
	}
	S := a.r.States
	if a.se != nil && act != nil && S > 1 && gapMin > 0 {
		for i := 0; i < T && i < len(act); i++ {
			k := int(act[i])
			if k < 0 || k >= S {
				continue
			}
			for _, j := range []int{k - 1, k + 1} {
				if j >= 0 && j < S && math.Abs(a.se[i*S+j]-a.se[i*S+k]) < gapMin {
					mark(i, "small gap")
				}
			}
		}
	}
	if T > 2 {
		jumps := make([]float64, 0, T-1)
		for i := 1; i < T; i++ {
			if j := math.Abs(e[i] - e[i-1]); !math.IsNaN(j) {
				jumps = append(jumps, j)
			}
		}
		med := percentile(jumps, 50)
		for i := 1; i < T; i++ {
			if med > 0 && math.Abs(e[i]-e[i-1]) > outlierFactor*med {
				mark(i, "energy bursts")
			}
		}
	}
	var segs []segment
	for i := 0; i < T; {
		if bad[i] {
			i++
			continue
		}
		j := i
		for j < T && !bad[j] {
			j++
		}
		segs = append(segs, segment{i, j})
		i = j
	}
	return segs, why
}

// noise: the force-noise estimate from the energy structure function over
// the clean segments of the run (noiseSegments). It needs the fastest
// period from time-step (FastestPeriod).
func (a *auditor) noise(d *derived) (Check, string) {
	path := a.energyPath()
	if a.etot == nil || !a.hasVel {
		return result(NA, nil, "needs total energy and velocities"), path
	}
	delta := a.frameInterval()
	dt := a.integrationStep()
	if delta <= 0 || dt <= 0 {
		return result(NA, nil, "needs at least two frames and a time step"), path
	}
	invMass := 0.0
	for _, m := range a.r.Masses {
		invMass += 3 / (2 * m)
	}
	// Lags start once the fastest motion has decorrelated the bounded
	// Verlet term: 1.5 periods of the stored energy (at exactly one
	// period that term cancels and fakes a small D(kmin)), or a quarter
	// period of the shadow energy, whose bounded term is 300 times
	// smaller. Without the shadow energy, frames near avoided crossings
	// are left out as well; with it, their errors show as bursts.
	e, kmin, lagFrac, gapMin := a.etot, 1, 1.5, a.s.NoiseGapEV/hartreeEV
	if a.shadow != nil {
		e, lagFrac, gapMin = a.shadow.energy(a.etot), 0.25, 0
	}
	pf := 0 // fastest period, frames
	if d.fastestPeriod > 0 {
		pf = int(math.Ceil(d.fastestPeriod / delta))
		kmin = max(1, int(math.Ceil(lagFrac*d.fastestPeriod/delta)))
	}
	segs, why := a.noiseSegments(e, gapMin)
	clean, v2 := 0, 0.0
	for _, s := range segs {
		clean += s.End - s.Start
		for i := s.Start; i < s.End; i++ {
			v2 += a.v2[i]
		}
	}
	if clean > 0 {
		v2 /= float64(clean)
	}
	T := len(a.etot)
	f := fitNoise(e, segs, kmin, pf, dt, delta, v2, invMass)
	vals := map[string]float64{"clean_fraction": float64(clean) / float64(T), "segments": float64(len(segs)),
		"shadow_energy": b2f(a.shadow != nil),
		"left_out_hops": float64(why["hops"]), "left_out_small_gap": float64(why["small gap"]), "left_out_bursts": float64(why["energy bursts"]),
		"lag_min_frames": float64(f.KMin), "lag_max_frames": float64(f.KMax)}
	avoid := "hops, small gaps and energy bursts"
	if a.shadow != nil {
		avoid = "hops and energy bursts"
	}
	left := fmt.Sprintf("%.0f %% of the frames are away from %s", 100*float64(clean)/float64(T), avoid)
	if why["hops"]+why["small gap"]+why["energy bursts"] == 0 {
		left = "nothing to leave out (no hops or energy bursts)"
	}
	if !f.Fitted {
		if f.UpperBound > 0 {
			v := Unknown
			if f.UpperBound < a.s.NoiseWarn {
				v = OK // below the warn level whatever hides under the bound
			}
			c := result(v, vals, "sigma_F below %.2g hartree/bohr, an upper bound and not a value (%s; too little to fit lags of %d to %d frames)", f.UpperBound, left, f.KMin, minLagSpan*f.KMin)
			c.Bounds = Values{"sigma_F_hartree_per_bohr": f.UpperBound}
			return c, path
		}
		return result(Unknown, vals, "too short to measure force noise: %s, and lags from %d frames (1.5 periods of the fastest motion) need %d times that in clean segments", left, f.KMin, minLagSpan*lagWindows), path
	}
	vals["bounded_sigma_w_eV"] = f.SigmaW * hartreeEV
	vals["resolution_floor_hartree_per_bohr"] = f.Floor
	if !f.Determined {
		v := Unknown
		if f.UpperBound < a.s.NoiseWarn {
			v = OK
		}
		c := result(v, vals, "sigma_F below %.2g hartree/bohr, an upper bound and not a value: no random walk shows %d times above the resolution of %.2g set by the bounded integrator error over the lags available (%s)", f.UpperBound, noiseFloorFactor, f.Floor, left)
		c.Bounds = Values{"sigma_F_hartree_per_bohr": f.UpperBound}
		return c, path
	}
	vals["sigma_F_hartree_per_bohr"] = f.SigmaF
	vals["random_walk_eV2_per_frame"] = f.S2 * hartreeEV * hartreeEV
	vals["drift_rate_eV_per_ps"] = f.Rate * hartreeEV * 1000 / auFs
	vals["heating_from_noise_eV_per_ps"] = f.HeatingRate * hartreeEV * 1000 / auFs
	v := OK
	if f.SigmaF >= a.s.NoiseWarn {
		v = Warn
	}
	sys := ""
	// Systematic when the fitted drift over the clean time exceeds both
	// the heating the noise causes and three random-walk spreads.
	run := float64(clean) * delta
	walk := math.Sqrt(f.S2 * float64(clean))
	if f.Rate*run > 3*walk && f.Rate > 10*f.HeatingRate {
		sys = "; the drift is larger than the noise explains: systematic (gradients inconsistent with energies, or the step too large)"
	}
	res := "no bounded integrator error shows at these lags"
	if f.Floor > 0 {
		res = fmt.Sprintf("%.0f times the resolution of %.2g", f.SigmaF/f.Floor, f.Floor)
	}
	return result(v, vals, "the total energy random-walks as force noise sigma_F = %.2g hartree/bohr per component would (%s; noisy gradients, or integration errors where surfaces change fast; %s)%s", f.SigmaF, res, left, sys), path
}

func b2f(b bool) float64 {
	if b {
		return 1
	}
	return 0
}
