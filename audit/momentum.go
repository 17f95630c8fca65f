package audit

import (
	"math"

	"trajvault/internal/trajfile"

	"gonum.org/v1/gonum/mat"
)

// momentumTracker follows total linear momentum P = sum m v and angular
// momentum L about the centre of mass, as energies: E_trans = P^2/2M and
// E_rot = L^T I0^-1 L / 2 with the inertia tensor I0 of the first frame
// (fixed, so that vibration, which changes the instantaneous tensor,
// does not count; E_rot changes only when L does). Both stay constant for
// an isolated molecule;
// rescaling velocities along raw coupling vectors at hops can break that
// (J. Phys. Chem. Lett. 11, 1135 (2020), doi:10.1021/acs.jpclett.9b03585).
type momentumTracker struct {
	m          []float64
	M          float64
	trans, rot spreadTracker // only their spread is judged: no series kept
	vals       []float64     // eigenvalues of I0
	vecs       *mat.Dense
}

// spreadTracker keeps max - min of a series as it streams past, with
// spread's NaN rule (math.Min and math.Max from the first value on), so
// that a run's memory does not grow with its frames.
type spreadTracker struct {
	n      int
	lo, hi float64
}

func (s *spreadTracker) add(x float64) {
	if s.n == 0 {
		s.lo, s.hi = x, x
	}
	s.lo, s.hi = math.Min(s.lo, x), math.Max(s.hi, x)
	s.n++
}

// spread is max - min of the values added (0 for none), as spread gives
// it for the whole series.
func (s *spreadTracker) spread() float64 {
	if s.n == 0 {
		return 0
	}
	return s.hi - s.lo
}

func newMomentumTracker(m []float64) *momentumTracker {
	t := &momentumTracker{m: m}
	for _, x := range m {
		t.M += x
	}
	return t
}

func (t *momentumTracker) add(x, v []float64) {
	n := len(t.m)
	var P, R, V [3]float64
	for i := 0; i < n; i++ {
		for k := 0; k < 3; k++ {
			P[k] += t.m[i] * v[3*i+k]
			R[k] += t.m[i] * x[3*i+k] / t.M
		}
	}
	for k := range V {
		V[k] = P[k] / t.M
	}
	var L [3]float64
	var I *mat.SymDense
	if t.vecs == nil {
		I = mat.NewSymDense(3, nil)
	}
	for i := 0; i < n; i++ {
		var r, u [3]float64
		for k := 0; k < 3; k++ {
			r[k] = x[3*i+k] - R[k]
			u[k] = v[3*i+k] - V[k]
		}
		L[0] += t.m[i] * (r[1]*u[2] - r[2]*u[1])
		L[1] += t.m[i] * (r[2]*u[0] - r[0]*u[2])
		L[2] += t.m[i] * (r[0]*u[1] - r[1]*u[0])
		if I == nil {
			continue
		}
		r2 := r[0]*r[0] + r[1]*r[1] + r[2]*r[2]
		for a := 0; a < 3; a++ {
			for b := a; b < 3; b++ {
				d := 0.0
				if a == b {
					d = r2
				}
				I.SetSym(a, b, I.At(a, b)+t.m[i]*(d-r[a]*r[b]))
			}
		}
	}
	t.trans.add((P[0]*P[0] + P[1]*P[1] + P[2]*P[2]) / (2 * t.M))
	if t.vecs == nil {
		var eig mat.EigenSym
		if !eig.Factorize(I, true) {
			return
		}
		t.vals = eig.Values(nil)
		t.vecs = &mat.Dense{}
		eig.VectorsTo(t.vecs)
	}
	// E_rot with the pseudo-inverse on the non-degenerate axes (a linear
	// molecule has one zero moment).
	erot := 0.0
	top := math.Max(math.Abs(t.vals[0]), math.Max(math.Abs(t.vals[1]), math.Abs(t.vals[2])))
	for k := 0; k < 3; k++ {
		if t.vals[k] <= 1e-8*top {
			continue
		}
		proj := L[0]*t.vecs.At(0, k) + L[1]*t.vecs.At(1, k) + L[2]*t.vecs.At(2, k)
		erot += proj * proj / (2 * t.vals[k])
	}
	t.rot.add(erot)
}

// momentum reports the change of E_trans and E_rot against k_B T.
func (a *auditor) momentum(*derived) (Check, string) {
	t, path := a.mom, a.r.Particle(trajfile.Velocity)
	if t == nil {
		return result(NA, nil, "needs velocities"), path
	}
	kt := kB * a.s.Temperature
	dT, dR := t.trans.spread(), t.rot.spread()
	vals := map[string]float64{"translational_change_eV": dT * hartreeEV, "rotational_change_eV": dR * hartreeEV,
		"kT_eV": kt * hartreeEV, "translational_over_kT": dT / kt, "rotational_over_kT": dR / kt}
	v := OK
	if dT > a.s.MomentumWarnFraction*kt || dR > a.s.MomentumWarnFraction*kt {
		v = Warn
	}
	return result(v, vals, "translational energy changes by %.2g eV, rotational by %.2g eV (%.2g and %.2g of k_B T at %.0f K)",
		dT*hartreeEV, dR*hartreeEV, dT/kt, dR/kt, a.s.Temperature), path
}
