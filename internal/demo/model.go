// Package demo generates the demo data set: an invented scenario, made by
// our own code, for the README and `make demo`. It is not reference data;
// tests never take expected values from it.
//
// Scenario: the (fictional) Tarn Valley photophysics group ran
// surface-hopping dynamics of "tarnol", a model bent triatomic X-H2 with
// two electronic states, and kept only text logs. The model is two
// diabatic surfaces of pairwise harmonic springs with different rest
// lengths, coupled by a constant V_c:
//
//	V_a(R) = sum_p k_p/2 (r_p - a_p)^2,  V_b(R) = sum_p k_p/2 (r_p - b_p)^2 + eps
//	E_0,1 = (V_a+V_b)/2 -/+ sqrt(((V_a-V_b)/2)^2 + V_c^2)
//
// The nuclei move by velocity Verlet on the active adiabatic surface; the
// amplitudes follow i dc_k/dt = E_k c_k - i sum_j T_kj c_j with the
// time-derivative coupling T_01 = d(theta)/dt of the mixing angle
// theta = 1/2 atan2(2 V_c, V_a - V_b); hops follow fewest switches
// (J. Chem. Phys. 93, 1061 (1990), doi:10.1063/1.459170) with velocity
// rescaling along grad(V_a - V_b), the direction of the coupling vector
// for a constant V_c. Everything runs in atomic units.
package demo

import (
	"math"
	"math/cmplx"
	"math/rand/v2"
)

// Model holds the parameters of the invented two-state triatomic.
type Model struct {
	Mass   [3]float64 // electron masses
	K      [3]float64 // spring constants of pairs (0,1), (0,2), (1,2), Eh/bohr^2
	RestA  [3]float64 // bohr
	RestB  [3]float64 // bohr
	Eps    float64    // Eh
	Vc     float64    // Eh
	Faults Faults
}

// Faults inject errors of known size, so that the audit can be tested
// against them. The zero value is a correct run.
type Faults struct {
	// ForceNoise adds Gaussian noise of this standard deviation
	// (hartree/bohr, per component per step) to the forces that move the
	// nuclei; energies stay exact.
	ForceNoise float64
	// NoRescaleEvery makes every n-th accepted hop keep the velocities, so
	// that K + V jumps by the gap (Step.Planted marks them).
	NoRescaleEvery int
	// MislogDownhillEvery logs every n-th accepted downhill hop as
	// frustrated (Step.Planted marks them).
	MislogDownhillEvery int
	// DropHops never executes allowed hops: the active state stays while
	// the amplitudes evolve, so the two population estimators disagree.
	DropHops bool
	// AmplitudeScale multiplies the stored amplitudes (0 = 1): values
	// other than 1 break the normalisation.
	AmplitudeScale float64

	// Scenario knobs: no error, but harder physics for the audit and
	// different physics for ensemble comparisons.

	// CouplingScale multiplies the diabatic coupling V_c (0 = 1). Below 1
	// the avoided crossings narrow (adiabatic gap 2 V_c at the seam) and
	// the time-derivative coupling peaks higher: more hops, and sharper
	// curvature of the adiabatic surfaces where the integrator errs.
	CouplingScale float64
	// EpsShift is added to the diabatic offset eps (hartree). At the
	// start geometry V_b - V_a = 0.0255 hartree for Tarnol; a negative
	// shift narrows that diabatic gap, so the runs start nearer the seam
	// and cross it more often.
	EpsShift float64
	// StartDisplacement moves each H atom outward along its X-H bond by
	// this many bohr before the run (negative: inward), a systematic
	// change of the initial conditions.
	StartDisplacement float64
	// StartLower starts on the lower adiabatic state, from its minimum
	// (found by steepest descent from the start geometry) with thermal
	// displacements and velocities: thermal (classical) initial
	// conditions. Without it the run starts on the upper state at the
	// minimum of V_a (a photoexcited run, which after its first hop down
	// carries the gap as kinetic energy).
	StartLower bool
}

// vc is the diabatic coupling in force after CouplingScale.
func (m *Model) vc() float64 {
	if s := m.Faults.CouplingScale; s != 0 {
		return m.Vc * s
	}
	return m.Vc
}

var pairs = [3][2]int{{0, 1}, {0, 2}, {1, 2}}

// Tarnol is the demo molecule. Masses are the standard atomic weights of O
// and H (from memory) in electron masses; springs give an X-H stretch near
// 3700 cm-1.
func Tarnol() Model {
	const u = 1822.888486209
	return Model{
		Mass:  [3]float64{15.999 * u, 1.008 * u, 1.008 * u},
		K:     [3]float64{0.49, 0.49, 0.05},
		RestA: [3]float64{1.81, 1.81, 2.86},
		RestB: [3]float64{2.11, 2.11, 3.10},
		Eps:   -0.02,
		Vc:    0.01,
	}
}

// Surfaces are the adiabatic energies and gradients at one geometry.
type Surfaces struct {
	E     [2]float64
	Grad  [2][9]float64
	Theta float64
	DDiab [9]float64 // grad(V_a - V_b)
}

// Eval computes energies and gradients at positions x (bohr, 9 values).
func (m *Model) Eval(x []float64) Surfaces {
	var va, vb float64
	var ga, gb [9]float64
	for p, ij := range pairs {
		i, j := ij[0], ij[1]
		var d [3]float64
		r := 0.0
		for k := 0; k < 3; k++ {
			d[k] = x[3*i+k] - x[3*j+k]
			r += d[k] * d[k]
		}
		r = math.Sqrt(r)
		da, db := r-m.RestA[p], r-m.RestB[p]
		va += 0.5 * m.K[p] * da * da
		vb += 0.5 * m.K[p] * db * db
		for k := 0; k < 3; k++ {
			u := d[k] / r
			ga[3*i+k] += m.K[p] * da * u
			ga[3*j+k] -= m.K[p] * da * u
			gb[3*i+k] += m.K[p] * db * u
			gb[3*j+k] -= m.K[p] * db * u
		}
	}
	vb += m.Eps + m.Faults.EpsShift
	vc := m.vc()
	var s Surfaces
	delta := va - vb
	root := math.Sqrt(delta*delta/4 + vc*vc)
	s.E[0] = (va+vb)/2 - root
	s.E[1] = (va+vb)/2 + root
	for k := 0; k < 9; k++ {
		dd := ga[k] - gb[k]
		mean := (ga[k] + gb[k]) / 2
		s.Grad[0][k] = mean - delta/4*dd/root
		s.Grad[1][k] = mean + delta/4*dd/root
		s.DDiab[k] = dd
	}
	s.Theta = 0.5 * math.Atan2(2*vc, delta)
	return s
}

// Step is one recorded integration step.
type Step struct {
	N    int64
	Time float64 // au_time
	// F is the exact force of the active surface; FUsed the one the
	// integrator used from this frame on (F plus Faults.ForceNoise).
	X, V, F, FUsed []float64
	Kinetic        float64
	Energies       [2]float64
	Active         int
	C              [2]complex128
	Coupling       float64 // T_01, 1/au_time
	HopTo          int     // -1 none
	Frustrated     bool    // as logged
	Planted        bool    // a fault injected at this hop
	// Unrescaled marks an accepted hop whose velocities were kept
	// (Faults.NoRescaleEvery): K + V changes by the gap at this step.
	Unrescaled bool
}

// Run integrates one trajectory of nsteps steps of dt (au_time) from a
// geometry near the minimum of V_a with thermal velocities at temp
// kelvin, starting in state 1. emit is called for every step, including
// step 0.
func (m *Model) Run(seed uint64, nsteps int, dt, temp float64, emit func(*Step)) {
	rng := rand.New(rand.NewPCG(seed, 0x7a3c))
	x := m.start()
	if m.Faults.StartLower {
		m.relax(x, 0)
	}
	if d := m.Faults.StartDisplacement; d != 0 {
		for _, h := range []int{1, 2} { // H atoms; X sits at the origin
			r := math.Sqrt(x[3*h]*x[3*h] + x[3*h+1]*x[3*h+1] + x[3*h+2]*x[3*h+2])
			for k := 0; k < 3; k++ {
				x[3*h+k] *= 1 + d/r
			}
		}
	}
	for k := range x {
		x[k] += 0.03 * rng.NormFloat64()
	}
	v := make([]float64, 9)
	const kB = 3.1668115634556e-6 // Eh/K, CODATA 2018
	var p [3]float64
	mt := 0.0
	for i := 0; i < 3; i++ {
		s := math.Sqrt(kB * temp / m.Mass[i])
		for k := 0; k < 3; k++ {
			v[3*i+k] = s * rng.NormFloat64()
			p[k] += m.Mass[i] * v[3*i+k]
		}
		mt += m.Mass[i]
	}
	for i := 0; i < 3; i++ { // zero total momentum
		for k := 0; k < 3; k++ {
			v[3*i+k] -= p[k] / mt
		}
	}
	active := 1
	c := [2]complex128{0, 1}
	if m.Faults.StartLower {
		active, c = 0, [2]complex128{1, 0}
	}
	s := m.Eval(x)
	st := &Step{X: x, V: v, HopTo: -1}
	planted, unrescaled := false, false
	grad := make([]float64, 9) // the gradient the next half-kick uses, noise included
	record := func(n int64, coupling float64, hop int, frustrated bool) {
		st.N, st.Time = n, float64(n)*dt
		st.F = make([]float64, 9)
		st.FUsed = make([]float64, 9)
		for k := range st.F {
			st.F[k] = -s.Grad[active][k]
			st.FUsed[k] = -grad[k]
		}
		st.Kinetic = 0
		for i := 0; i < 3; i++ {
			for k := 0; k < 3; k++ {
				st.Kinetic += 0.5 * m.Mass[i] * v[3*i+k] * v[3*i+k]
			}
		}
		st.Energies, st.Active, st.C, st.Coupling = s.E, active, c, coupling
		if sc := m.Faults.AmplitudeScale; sc != 0 && sc != 1 {
			st.C = [2]complex128{c[0] * complex(sc, 0), c[1] * complex(sc, 0)}
		}
		st.HopTo, st.Frustrated, st.Planted, st.Unrescaled = hop, frustrated, planted, unrescaled
		emit(st)
		planted, unrescaled = false, false
	}
	noise := func() float64 {
		if m.Faults.ForceNoise == 0 {
			return 0
		}
		return m.Faults.ForceNoise * rng.NormFloat64()
	}
	setGrad := func() {
		for k := range grad {
			grad[k] = s.Grad[active][k] + noise()
		}
	}
	setGrad()
	accepted, downhill := 0, 0
	record(0, 0, -1, false)
	for n := 1; n <= nsteps; n++ {
		// Velocity Verlet on the active surface.
		for i := 0; i < 3; i++ {
			for k := 0; k < 3; k++ {
				v[3*i+k] -= 0.5 * dt * grad[3*i+k] / m.Mass[i]
				x[3*i+k] += dt * v[3*i+k]
			}
		}
		old := s
		s = m.Eval(x)
		setGrad()
		for i := 0; i < 3; i++ {
			for k := 0; k < 3; k++ {
				v[3*i+k] -= 0.5 * dt * grad[3*i+k] / m.Mass[i]
			}
		}
		// Electronic step: exact 2x2 propagators on substeps, energies
		// interpolated linearly across the nuclear step.
		dth := s.Theta - old.Theta
		if dth > math.Pi/2 {
			dth -= math.Pi
		} else if dth < -math.Pi/2 {
			dth += math.Pi
		}
		t01 := dth / dt
		const sub = 20
		h := dt / sub
		for j := 0; j < sub; j++ {
			f := (float64(j) + 0.5) / sub
			e := [2]float64{old.E[0] + (s.E[0]-old.E[0])*f, old.E[1] + (s.E[1]-old.E[1])*f}
			c = propagate(c, h, e, t01)
		}
		// Fewest switches: b_jk = -2 Re(c_j* T_jk c_k), T_10 = -T_01.
		other := 1 - active
		tjk := t01
		if other == 1 {
			tjk = -t01
		}
		b := -2 * real(cmplx.Conj(c[other])*complex(tjk, 0)*c[active])
		pk := real(c[active] * cmplx.Conj(c[active]))
		g := math.Max(0, b*dt/pk)
		hop, frustrated := -1, false
		if rng.Float64() < g {
			hop = other
			dV := s.E[other] - s.E[active]
			allowed := m.rescaleCheck(v, s.DDiab[:], dV)
			switch {
			case !allowed:
				frustrated = true
			case m.Faults.DropHops:
				hop = -1 // the hop is lost: not executed, not logged
			default:
				accepted++
				if n := m.Faults.NoRescaleEvery; n > 0 && accepted%n == 0 {
					planted, unrescaled = true, true // velocities kept: K + V jumps by dV
				} else {
					m.rescale(v, s.DDiab[:], dV)
				}
				if dV < 0 {
					downhill++
					if n := m.Faults.MislogDownhillEvery; n > 0 && downhill%n == 0 && !planted {
						planted, frustrated = true, true // executed, logged as frustrated
					}
				}
				active = other
			}
			setGrad()
		}
		record(int64(n), t01, hop, frustrated)
	}
}

// rescaleCheck reports whether a hop with potential change dV is
// energetically allowed along u (b^2 >= 4 a dV), without changing v.
func (m *Model) rescaleCheck(v, u []float64, dV float64) bool {
	var a, b float64
	for i := 0; i < 3; i++ {
		for k := 0; k < 3; k++ {
			a += u[3*i+k] * u[3*i+k] / (2 * m.Mass[i])
			b += v[3*i+k] * u[3*i+k]
		}
	}
	return a > 0 && b*b-4*a*dV >= 0
}

// rescale changes velocities along u (mass-weighted) so that kinetic plus
// potential energy is kept across a hop with potential change dV; it
// reports false (frustrated) when the kinetic energy along u is too small:
// a = sum |u_i|^2/(2 m_i), b = sum v_i.u_i, allowed iff b^2 >= 4 a dV.
func (m *Model) rescale(v, u []float64, dV float64) bool {
	var a, b float64
	for i := 0; i < 3; i++ {
		for k := 0; k < 3; k++ {
			a += u[3*i+k] * u[3*i+k] / (2 * m.Mass[i])
			b += v[3*i+k] * u[3*i+k]
		}
	}
	disc := b*b - 4*a*dV
	if a == 0 || disc < 0 {
		return false
	}
	gamma := (b - math.Copysign(math.Sqrt(disc), b)) / (2 * a)
	for i := 0; i < 3; i++ {
		for k := 0; k < 3; k++ {
			v[3*i+k] -= gamma * u[3*i+k] / m.Mass[i]
		}
	}
	return true
}

// relax moves x to a minimum of adiabatic state k by steepest descent
// (step 0.5 bohr^2/hartree, below 2/k_max for the springs of Tarnol, so
// the descent is stable; common practice), to a gradient below 1e-10
// hartree/bohr or 100000 steps.
func (m *Model) relax(x []float64, k int) {
	for it := 0; it < 100000; it++ {
		g := m.Eval(x).Grad[k]
		n := 0.0
		for i := range x {
			x[i] -= 0.5 * g[i]
			n += g[i] * g[i]
		}
		if math.Sqrt(n) < 1e-10 {
			return
		}
	}
}

func (m *Model) start() []float64 {
	// Bent geometry with the rest lengths of V_a: X at the origin.
	r, hh := m.RestA[0], m.RestA[2]
	half := math.Asin(hh / (2 * r))
	return []float64{
		0, 0, 0,
		r * math.Sin(half), r * math.Cos(half), 0,
		-r * math.Sin(half), r * math.Cos(half), 0,
	}
}

// propagate advances i dc/dt = H c over h with the Hermitian
// H = [[E0, -i t], [i t, E1]] (t = T_01) held constant: the exact
// propagator exp(-iHh) = exp(-iah) (cos(wh) - i sin(wh) (b.sigma)/w), with
// a = (E0+E1)/2, b = (0, t, (E0-E1)/2), w = |b|. Unitary, so the norm is
// kept to rounding.
func propagate(c [2]complex128, h float64, e [2]float64, t float64) [2]complex128 {
	a := (e[0] + e[1]) / 2
	bz := (e[0] - e[1]) / 2
	w := math.Hypot(t, bz)
	ph := cmplx.Exp(complex(0, -a*h))
	cs, sn := math.Cos(w*h), 1.0
	if w > 0 {
		sn = math.Sin(w*h) / w
	} else {
		sn = h
	}
	// b.sigma = [[bz, -i t], [i t, -bz]]
	u00 := complex(cs, -sn*bz)
	u01 := complex(-sn*t, 0)
	u10 := complex(sn*t, 0)
	u11 := complex(cs, sn*bz)
	return [2]complex128{ph * (u00*c[0] + u01*c[1]), ph * (u10*c[0] + u11*c[1])}
}
