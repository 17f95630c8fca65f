// Package audit checks the physics of stored trajectories: energy
// conservation and force noise, the time step, electronic populations and
// hops, momentum, zero-point-energy leakage, and, across an ensemble, the
// internal consistency of surface-hopping populations.
//
// An audit is evidence about the stored numbers, not a certificate that
// the simulation behind them is sound. Formulas and sources are in each
// check's doc comment; thresholds are Settings with documented defaults.
package audit

import (
	"bytes"
	"context"
	"encoding/json"
	"fmt"
	"math"
	h5path "path"
	"sort"

	"trajvault/internal/trajfile"
	"trajvault/internal/units"
)

// Verdict of one check.
type Verdict string

const (
	OK      Verdict = "ok"
	Warn    Verdict = "warn"
	Fail    Verdict = "fail"
	Unknown Verdict = "unknown" // the data cannot tell
	NA      Verdict = "n/a"     // the file lacks what the check needs
)

// Label is the verdict as a reader should read it: "not run" and
// "cannot tell" are never a pass.
func (v Verdict) Label() string {
	switch v {
	case NA:
		return "not run"
	case Unknown:
		return "cannot tell"
	}
	return string(v)
}

func (v Verdict) rank() int {
	return map[Verdict]int{NA: 0, OK: 1, Unknown: 2, Warn: 3, Fail: 4}[v]
}

// Values are the numbers behind a verdict. JSON has no NaN or infinity:
// a value that is not finite (a damaged file can give one) is written as
// null, so that the report is still one valid document (RFC 8259 sec. 6).
type Values map[string]float64

// MarshalJSON writes the values in key order, non-finite ones as null.
func (v Values) MarshalJSON() ([]byte, error) {
	if v == nil {
		return []byte("null"), nil
	}
	keys := make([]string, 0, len(v))
	for k := range v {
		keys = append(keys, k)
	}
	sort.Strings(keys)
	var b bytes.Buffer
	b.WriteByte('{')
	for i, k := range keys {
		if i > 0 {
			b.WriteByte(',')
		}
		kb, err := json.Marshal(k)
		if err != nil {
			return nil, err
		}
		b.Write(kb)
		b.WriteByte(':')
		if x := v[k]; math.IsNaN(x) || math.IsInf(x, 0) {
			b.WriteString("null")
		} else {
			xb, err := json.Marshal(x) // as encoding/json writes any float
			if err != nil {
				return nil, err
			}
			b.Write(xb)
		}
	}
	b.WriteByte('}')
	return b.Bytes(), nil
}

// Check is the outcome of one check: a verdict, the numbers behind it and
// a one-line explanation. Name and Code come from the registry.
type Check struct {
	Name    string  `json:"check"`
	Code    string  `json:"code"`
	Verdict Verdict `json:"verdict"`
	Summary string  `json:"summary"`
	Values  Values  `json:"values"`
	// Steps are the integration steps the verdict points at (e.g. hops
	// that change the total energy), in increasing order.
	Steps []int64 `json:"steps,omitempty"`
	// Bounds are quantities the data bound from above only (the true
	// value lies below); such a quantity is never also in Values.
	Bounds Values `json:"upper_bounds,omitempty"`

	path string // HDF5 path of the quantity judged, for the finding
}

// result builds a check outcome; the runner adds the name and code.
func result(v Verdict, vals map[string]float64, format string, args ...any) Check {
	return Check{Verdict: v, Summary: fmt.Sprintf(format, args...), Values: vals}
}

// Settings are the thresholds; DefaultSettings documents the defaults.
type Settings struct {
	// Energy conservation (common practice in surface-hopping studies:
	// discard a trajectory whose total energy moves more than about
	// 0.1-0.5 eV from its start or jumps by more than about 0.1-0.25 eV in
	// one step; from memory of the literature, so these are settings).
	EnergyWarnEV, EnergyFailEV float64
	JumpWarnEV, JumpFailEV     float64
	// NoiseWarn is the force-noise level (hartree/bohr) above which long
	// runs heat up noticeably (common practice: gradient errors should
	// stay below about 1e-5 hartree/bohr).
	NoiseWarn float64
	// Time step: fail above T/10, warn above T/20 of the shortest period
	// (common practice; textbooks on molecular simulation).
	StepFailFraction, StepWarnFraction float64
	// Normalisation tolerance of sum |c_k|^2 (1e-6 for unitary
	// propagators, 1e-4 for Runge-Kutta types; suggested in the notes).
	NormTolerance float64
	// Temperature (K) that sets the momentum-drift scale k_B T.
	Temperature float64
	// MomentumWarnFraction of k_B T for changes of translational or
	// rotational kinetic energy.
	MomentumWarnFraction float64
	// ZPE: a pair is below its zero-point level when the window-averaged
	// bond kinetic energy is below (1 - ZPEMargin) ZPE/2; only pairs that
	// started at or above that level are judged (leakage is a loss), and
	// one is warned about when it is below for more than ZPEWarnFraction
	// of the run.
	ZPEMargin, ZPEWarnFraction float64
	// NoiseGapEV: when the shadow energy cannot be formed (not every step
	// stored), the force-noise estimate leaves out frames where the
	// adiabatic gap of the active state to a neighbour is below this (eV),
	// as it leaves out hops: near avoided crossings the integration error
	// itself random-walks (physics notes: about 1e-4 hartree/bohr
	// equivalent on a model triatomic; the mixing adds curvature growing
	// as the inverse cube of the gap, derived).
	NoiseGapEV float64
	// ZPEPairs lists atom pairs (0-based) to watch; empty = every X-H pair
	// closer than 1.3 angstrom in the first frame.
	ZPEPairs [][2]int
	// Group is the particle group to audit (a name under /particles);
	// "" audits every group of each file, one result per group.
	Group string
	// ConsistencyFailFraction: fraction of times at which the two ensemble
	// population estimators differ by more than 3 binomial standard
	// deviations before the ensemble fails the check.
	ConsistencyFailFraction float64
}

// DefaultSettings are the documented defaults.
var DefaultSettings = Settings{
	EnergyWarnEV: 0.1, EnergyFailEV: 0.5, JumpWarnEV: 0.1, JumpFailEV: 0.25,
	NoiseWarn:        1e-5,
	StepFailFraction: 0.1, StepWarnFraction: 0.05,
	NormTolerance: 1e-4,
	NoiseGapEV:    0.5,
	Temperature:   300, MomentumWarnFraction: 0.01,
	ZPEMargin: 0.1, ZPEWarnFraction: 0.2,
	ConsistencyFailFraction: 0.1,
}

// Result is the audit of one trajectory.
type Result struct {
	File string `json:"file"`
	// Group is the particle group audited (its name under /particles).
	Group string `json:"group,omitempty"`
	// Error says why the file could not be audited; Checks is then empty
	// and Verdict is fail.
	Error   string  `json:"error,omitempty"`
	Frames  int     `json:"frames"`
	Atoms   int     `json:"atoms"`
	Verdict Verdict `json:"verdict"`
	Checks  []Check `json:"checks"`

	// Series kept for the ensemble checks and the report.
	Times     []float64   `json:"-"` // fs
	EnergyDev []float64   `json:"-"` // eV, E(t) - E(0)
	Active    []int64     `json:"-"`
	Pops      [][]float64 `json:"-"` // per frame, |c_k|^2 (a Result built by hand)
	// pops holds |c_k|^2 of a file's frames in one series, states per
	// frame (File fills it instead of Pops: no slice header per frame).
	pops   []float64
	states int
	// devTimes are the times (fs) of EnergyDev when File thinned it
	// already (fold then keeps them in place of Times).
	devTimes []float64
	// Hop attempts in the hop log, for the ensemble's consistency check.
	HopsAccepted, HopsFrustrated int `json:"-"`
}

var (
	hartreeEV = mustFactor("hartree", "eV")
	auFs      = mustFactor("au_time", "fs")
	kB        = units.BoltzmannSI / units.HartreeJoule // hartree/K, CODATA 2018
)

func mustFactor(a, b string) float64 {
	f, err := units.Factor(a, b)
	if err != nil {
		panic(err)
	}
	return f
}

// File audits one trajectory file, running every per-file check of the
// registry in order. It stops early when ctx is cancelled.
func File(ctx context.Context, path string, s Settings) (*Result, error) {
	r, err := trajfile.OpenReaderWith(path, trajfile.ReadOptions{Group: s.Group})
	if err != nil {
		return nil, err
	}
	defer r.Close()
	a := &auditor{ctx: ctx, r: r, s: s, res: &Result{File: path, Group: h5path.Base(r.Group), Frames: r.T, Atoms: r.N}}
	if err := a.safeRun(); err != nil {
		return nil, fmt.Errorf("%s: %w", path, err)
	}
	a.res.Verdict = worst(a.res.Checks)
	return a.res, nil
}

func worst(cs []Check) Verdict {
	v := NA
	for _, c := range cs {
		if c.Verdict.rank() > v.rank() {
			v = c.Verdict
		}
	}
	return v
}

// auditor holds one file's inputs, loaded once and shared by the checks.
type auditor struct {
	ctx context.Context
	r   *trajfile.Reader
	s   Settings
	res *Result

	etot      []float64 // hartree per frame
	kin       []float64 // hartree per frame, while scanFrames forms it
	kinMean   float64   // <K>, hartree (0: unknown); no series is kept
	kinStored bool      // K is stored (else formed from velocities)
	dtFrame   float64   // frameInterval, once computed (0: not yet)
	sumV2     float64   // <sum |v|^2>, au
	v2        []float64 // sum |v|^2 per frame, au
	hasVel    bool
	hasForce  bool

	// Collected in the one pass over the frames (scanFrames).
	tau    *tauCollector
	shadow *shadowTracker // nil unless every step is stored with v and F
	mom    *momentumTracker
	zpe    *zpeTracker

	// Electronic data (loadElectronic); amplitudes and couplings are
	// read by hop-probability alone (hopInputs).
	pops    []float64 // |c_k|^2 per frame x state
	hasAmps bool      // pops came from stored amplitudes
	se      []float64 // state energies per frame x state, hartree
	seErr   error     // why stored state energies could not be read
}

// safeRun is run with a panic turned into an error, so that data no
// check foresaw costs that file's audit, not the ensemble's.
func (a *auditor) safeRun() (err error) {
	defer func() {
		if p := recover(); p != nil {
			err = fmt.Errorf("the audit stopped on unexpected data (please report this as a trajvault bug): %v", p)
		}
	}()
	return a.run()
}

// run loads the shared inputs, then runs the registered per-file checks
// in registry order, passing derived values between them.
func (a *auditor) run() error {
	r := a.r
	a.res.Times = make([]float64, r.T)
	for i, t := range r.Times {
		a.res.Times[i] = t * auFs
	}
	a.hasVel = r.Has(r.Particle(trajfile.Velocity))
	a.hasForce = r.Has(r.Particle(trajfile.Force))
	if err := a.loadEnergy(); err != nil {
		return err
	}
	// Electronic data first: the frame scan leaves out the force jumps
	// at changes of the active state.
	if err := a.loadElectronic(); err != nil {
		return err
	}
	if err := a.scanFrames(); err != nil {
		return err
	}
	var d derived
	for _, spec := range checks {
		if spec.Scope != PerFile {
			continue
		}
		if err := a.ctx.Err(); err != nil {
			return err
		}
		c, path := a.runCheck(spec, &d)
		c.Name, c.Code, c.path = spec.Name, spec.Code, path
		a.res.Checks = append(a.res.Checks, c)
	}
	return nil
}

// loadEnergy builds E_tot: stored total energy, else K + V (K from the
// stored kinetic energy or from velocities and masses).
func (a *auditor) loadEnergy() error {
	r := a.r
	if r.Has(trajfile.KineticEnergy) {
		k, _, err := r.Values(trajfile.KineticEnergy, "hartree")
		if err != nil {
			return err
		}
		// Only <K> is used (the energy check's oscillation scale).
		a.kinMean, a.kinStored = mean(k), true
	}
	switch {
	case r.Has(trajfile.TotalEnergy):
		e, _, err := r.Values(trajfile.TotalEnergy, "hartree")
		if err != nil {
			return err
		}
		a.etot = e
	case r.Has(trajfile.PotentialEnergy):
		v, _, err := r.Values(trajfile.PotentialEnergy, "hartree")
		if err != nil {
			return err
		}
		a.etot = v // kinetic added in scanFrames when missing
	}
	return nil
}

// frameBlock is the number of frames read per call when streaming.
const frameBlock = 2048

// scanFrames streams positions, velocities and forces once for the
// checks that need per-atom data: kinetic energy (when not stored),
// <sum v^2>, the time-step estimator, momentum and ZPE leakage.
func (a *auditor) scanFrames() error {
	r := a.r
	// Without masses (optional in H5MD) nothing weighted by mass is
	// formed; the checks that need it say so (runCheck).
	massOK, speciesOK := r.Masses != nil, r.Species != nil
	needKin := !a.kinStored && a.hasVel && massOK
	if a.kineticFromAtoms() && (!massOK || len(r.Groups()) > 1) {
		// V alone, or V plus one group's K, is not a total energy.
		a.etot, needKin = nil, false
	}
	if needKin {
		a.kin = make([]float64, r.T)
	}
	var tau *tauCollector
	var mom *momentumTracker
	var zpe *zpeTracker
	var sumV2 float64
	if a.hasVel {
		a.v2 = make([]float64, r.T)
	}
	var shadow *shadowTracker
	if h := a.frameInterval(); massOK && a.hasVel && a.hasForce && h > 0 && math.Abs(h-a.integrationStep()) <= 0.01*h {
		shadow = newShadowTracker(h, r.T, r.Masses)
	}
	var acc []float64     // accelerations of one frame, reused
	var x, v, f []float64 // one block of frames, reused
	for start := 0; start < r.T; start += frameBlock {
		if err := a.ctx.Err(); err != nil {
			return err
		}
		n := min(frameBlock, r.T-start)
		// One buffer per quantity for the whole pass: no garbage per
		// block, so the heap stays near what the checks keep.
		var err error
		if x, err = r.FramesInto(r.Particle(trajfile.Position), "bohr", start, n, x); err != nil {
			return err
		}
		if a.hasVel {
			if v, err = r.FramesInto(r.Particle(trajfile.Velocity), "bohr au_time-1", start, n, v); err != nil {
				return err
			}
		}
		if a.hasForce {
			if f, err = r.FramesInto(r.Particle(trajfile.Force), "hartree bohr-1", start, n, f); err != nil {
				return err
			}
		}
		for t := 0; t < n; t++ {
			xs := x[t*3*r.N : (t+1)*3*r.N]
			if start == 0 && t == 0 {
				if massOK && speciesOK {
					pairs, cuts := bondedPairs(xs, r.Species, r.N)
					tau = newTauCollector(pairs, cuts)
				}
				if a.hasVel && massOK {
					mom = newMomentumTracker(r.Masses)
					if speciesOK {
						zpe = newZPETracker(a.s, r, xs)
					}
				}
			}
			if a.hasForce && tau != nil {
				fs := f[t*3*r.N : (t+1)*3*r.N]
				if cap(acc) < len(fs) {
					acc = make([]float64, len(fs))
				}
				acc = acc[:len(fs)]
				for i := range fs {
					acc[i] = fs[i] / r.Masses[i/3]
				}
				fr := start + t
				act := a.res.Active
				tau.add(xs, acc, fr > 0 && fr < len(act) && act[fr] != act[fr-1])
			}
			if a.hasVel {
				vs := v[t*3*r.N : (t+1)*3*r.N]
				k, s2 := 0.0, 0.0
				for i, vi := range vs {
					if massOK {
						k += 0.5 * r.Masses[i/3] * vi * vi
					}
					s2 += vi * vi
				}
				sumV2 += s2
				a.v2[start+t] = s2
				if needKin {
					a.kin[start+t] = k
				}
				if mom != nil {
					mom.add(xs, vs)
				}
				if zpe != nil {
					zpe.add(xs, vs)
				}
				if shadow != nil {
					shadow.add(vs, f[t*3*r.N:(t+1)*3*r.N])
				}
			}
		}
	}
	if needKin && a.etot != nil && !r.Has(trajfile.TotalEnergy) {
		for i := range a.etot {
			a.etot[i] += a.kin[i]
		}
	}
	// Only <K> is needed from here on (the energy check's oscillation
	// scale): the series goes.
	if a.kin != nil {
		a.kinMean = mean(a.kin)
	}
	a.kin = nil
	if a.hasVel {
		a.sumV2 = sumV2 / float64(r.T)
	}
	a.tau, a.mom, a.zpe, a.shadow = tau, mom, zpe, shadow
	return nil
}

// frameInterval is the time between stored frames (au_time), the median
// of the differences; computed once (several checks ask).
func (a *auditor) frameInterval() float64 {
	if a.dtFrame == 0 {
		a.dtFrame = a.medianInterval()
	}
	return a.dtFrame
}

func (a *auditor) medianInterval() float64 {
	t := a.r.Times
	if len(t) < 2 {
		return 0
	}
	d := make([]float64, 0, len(t)-1)
	for i := 1; i < len(t); i++ {
		d = append(d, t[i]-t[i-1])
	}
	sort.Float64s(d)
	return d[len(d)/2]
}

// integrationStep is the stored time step, else the frame interval
// divided by the step stride.
func (a *auditor) integrationStep() float64 {
	if a.r.TimeStep > 0 {
		return a.r.TimeStep
	}
	st := a.r.Steps
	if len(st) > 1 && st[1] > st[0] {
		return a.frameInterval() / float64(st[1]-st[0])
	}
	return a.frameInterval()
}

// energyPath is the stored energy the total is built from.
func (a *auditor) energyPath() string {
	if !a.r.Has(trajfile.TotalEnergy) && a.r.Has(trajfile.PotentialEnergy) {
		return trajfile.PotentialEnergy
	}
	return trajfile.TotalEnergy
}

// energy: conservation of E_tot = K + V(active state).
func (a *auditor) energy(*derived) (Check, string) {
	if a.etot == nil {
		return result(NA, nil, "no total or potential energy stored"), a.energyPath()
	}
	st := energyStats(a.r.Times, a.etot, a.kinMean)
	dev := st.MaxDeviation * hartreeEV
	jump := st.MaxJump * hartreeEV
	a.res.EnergyDev, a.res.devTimes = a.energyDeviation()
	ps := 1000 / auFs // au_time per ps
	vals := map[string]float64{
		"max_deviation_eV": dev, "max_jump_eV": jump, "jump_frame": float64(st.JumpFrame),
		"drift_eV_per_ps": st.Drift * ps * hartreeEV, "drift_eV_per_atom_ps": st.Drift * ps * hartreeEV / float64(max(a.r.N, 1)),
		"oscillation_rel": st.Oscillation, "peak_to_peak_eV": st.PeakToPeak * hartreeEV,
	}
	v := OK
	switch {
	case dev > a.s.EnergyFailEV || jump > a.s.JumpFailEV:
		v = Fail
	case dev > a.s.EnergyWarnEV || jump > a.s.JumpWarnEV:
		v = Warn
	}
	return result(v, vals, "total energy moves at most %.3g eV from its start, largest step jump %.3g eV (frame %d), drift %.3g eV/ps",
		dev, jump, st.JumpFrame, vals["drift_eV_per_ps"]), a.energyPath()
}

// energyDeviation is E(t) - E(0) in eV for the report's plot, thinned
// to energyPoints as popSums.fold thins a full series (the same frames),
// with the times of those frames (fs; nil when not thinned, the times
// being Result.Times): a run's full series is never held.
func (a *auditor) energyDeviation() (dev, times []float64) {
	n := len(a.etot)
	if n <= energyPoints {
		dev = make([]float64, n)
		for i, e := range a.etot {
			dev[i] = (e - a.etot[0]) * hartreeEV
		}
		return dev, nil
	}
	step := float64(n-1) / float64(energyPoints-1)
	dev, times = make([]float64, energyPoints), make([]float64, energyPoints)
	for i := range dev {
		j := int(math.Round(float64(i) * step))
		dev[i], times[i] = (a.etot[j]-a.etot[0])*hartreeEV, a.res.Times[j]
	}
	return dev, times
}

// timeStep compares the integration step with the shortest period T of
// the bonded pairs and gives that period (FastestPeriod). The suggested
// step is the warn fraction of T, the largest step the rule calls safe.
func (a *auditor) timeStep(d *derived) (Check, string) {
	path := a.r.Particle(trajfile.Force)
	if a.tau == nil || !a.hasForce {
		return result(NA, nil, "needs positions and forces"), path
	}
	delta := a.frameInterval()
	st := a.tau.stats(delta)
	if st.Pairs == 0 {
		return result(NA, nil, "no bonded pairs (separation below %g times the sum of covalent radii at the start or on average): the fastest motion is not a bond vibration", bondFactor), path
	}
	if st.Samples == 0 {
		return result(Unknown, nil, "no bond motion resolved between stored frames"), path
	}
	d.fastestPeriod = st.Period
	dt := a.integrationStep()
	suggest := a.s.StepWarnFraction * st.Period
	vals := map[string]float64{
		"tau_fs": st.Tau * auFs, "period_fs": st.Period * auFs, "wavenumber_cm-1": st.Wavenumber,
		"time_step_fs": dt * auFs, "suggested_step_fs": suggest * auFs, "step_over_period": dt / st.Period,
		"bonded_pairs": float64(st.Pairs),
	}
	// Every step stored: frames cannot be closer, and a period under four
	// of them means the step itself is too large.
	everyStep := delta <= 1.5*dt
	if !st.Reliable && !everyStep {
		return result(Unknown, vals, "frames are stored %.3g fs apart, too far for the %.3g fs period seen; store frames more often to check the step", delta*auFs, st.Period*auFs), path
	}
	v := OK
	switch {
	case dt > a.s.StepFailFraction*st.Period:
		v = Fail
	case dt > a.s.StepWarnFraction*st.Period:
		v = Warn
	}
	verb := "is"
	if v != OK {
		verb = "is not"
	}
	return result(v, vals, "fastest bond motion %.0f cm-1 (period %.3g fs, %d bonded pairs); step %.3g fs = T/%.1f %s safe (T/%.0f or less; %.2g fs suggested)",
		st.Wavenumber, st.Period*auFs, st.Pairs, dt*auFs, st.Period/dt, verb, 1/a.s.StepWarnFraction, suggest*auFs), path
}
