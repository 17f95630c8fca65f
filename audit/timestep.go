package audit

import (
	"math"
	"sort"

	"gonum.org/v1/gonum/mat"
)

// TimeStepStats is the characteristic time of the fastest bond motion
// seen in the stored frames.
//
// Around each atom c, the bond lengths s_p = |r_i - r_j| of its bonds p
// and the relative accelerations projected on them,
// a_p = (a_i - a_j).u_p (a = F/m, u_p the unit bond vector), obey
// a = -G F s for small vibrations (Wilson's GF method: E. B. Wilson,
// J. C. Decius, P. C. Cross, Molecular Vibrations, 1955; common
// practice), so frame-to-frame differences give the least-squares matrix
//
//	W = -(sum_n Delta a Delta s^T) (sum_n Delta s Delta s^T)^-1
//
// whose eigenvalues are the omega_m^2 of the modes the bonds span
// (derived). The largest over all atoms is the fastest bond motion; for a
// single bond W = omega^2 exactly (a_s = -omega^2 (s - s0)), and for
// the two O-H bonds of a bent triatomic it separates the antisymmetric
// stretch, which a single bond mixes with slower modes. Frames whose
// active state changed are left out (the force jumps with the surface).
// This replaces a low percentile of per-frame ratios |Delta r|/|Delta a|
// over all close pairs, which cancellations between modes and non-bonded
// encounters drove far above the fastest mode.
type TimeStepStats struct {
	Tau        float64 // au_time, 1/omega of the fastest bond motion
	Period     float64 // 2 pi Tau, au_time
	Wavenumber float64 // cm^-1 of the fastest motion
	Samples    int     // frame differences behind it
	Pairs      int     // bonded pairs measured
	// Reliable is false when stored frames are too far apart (more than a
	// quarter of the period) for frame differences to resolve the motion.
	Reliable bool
}

// hartreeInvCm is the hartree in cm^-1 (CODATA 2018), so that an angular
// frequency in atomic units (E_h/hbar) converts to a wavenumber.
const hartreeInvCm = 219474.6313632

// maxBondsPerAtom caps the bonds fitted together around one atom (the
// sums grow as its square); further bonds join no group at that atom.
const maxBondsPerAtom = 8

// bondGroup is the bonds around one atom with their regression sums.
type bondGroup struct {
	pairs    []int     // indices into tauCollector.pairs
	sxx, say []float64 // k x k, row-major: sum ds ds^T, sum da ds^T
	n        int
}

// tauCollector gathers the sums of the bond regression per atom and the
// first and mean separation of each candidate pair (bondedPairs), so
// that stats keeps the pairs bonded at the start or on average over the
// run (a bond may start stretched at its turning point). Memory is per
// pair, not per frame.
type tauCollector struct {
	pairs   [][2]int
	bondCut []float64 // bohr, per pair: bondFactor x covalent radii
	sumD    []float64 // per pair, sum of separations
	first   []float64 // per pair, separation in the first frame
	groups  []bondGroup
	frames  int
	prevS   []float64 // per pair, bond length and projected
	prevA   []float64 // acceleration of the previous frame
	ds, da  []float64 // per pair, scratch
	have    bool
}

func newTauCollector(pairs [][2]int, bondCut []float64) *tauCollector {
	n := len(pairs)
	c := &tauCollector{pairs: pairs, bondCut: bondCut, sumD: make([]float64, n), first: make([]float64, n),
		prevS: make([]float64, n), prevA: make([]float64, n), ds: make([]float64, n), da: make([]float64, n)}
	at := map[int][]int{}
	for p, ij := range pairs {
		for _, i := range ij {
			if len(at[i]) < maxBondsPerAtom {
				at[i] = append(at[i], p)
			}
		}
	}
	atoms := make([]int, 0, len(at))
	for i := range at {
		atoms = append(atoms, i)
	}
	sort.Ints(atoms)
	for _, i := range atoms {
		k := len(at[i])
		c.groups = append(c.groups, bondGroup{pairs: at[i], sxx: make([]float64, k*k), say: make([]float64, k*k)})
	}
	return c
}

// add takes one frame: positions x and accelerations a (3N each, au);
// jump says the force jumped since the previous frame (a hop), so that
// difference is left out.
func (c *tauCollector) add(x, a []float64, jump bool) {
	for p, ij := range c.pairs {
		i, j := ij[0], ij[1]
		var r, ac [3]float64
		d2 := 0.0
		for k := 0; k < 3; k++ {
			r[k] = x[3*i+k] - x[3*j+k]
			ac[k] = a[3*i+k] - a[3*j+k]
			d2 += r[k] * r[k]
		}
		d := math.Sqrt(d2)
		as := 0.0
		if d > 0 {
			as = (ac[0]*r[0] + ac[1]*r[1] + ac[2]*r[2]) / d
		}
		c.sumD[p] += d
		if !c.have {
			c.first[p] = d
		}
		c.ds[p], c.da[p] = d-c.prevS[p], as-c.prevA[p]
		c.prevS[p], c.prevA[p] = d, as
	}
	if c.have && !jump {
		for g := range c.groups {
			gr := &c.groups[g]
			k := len(gr.pairs)
			for r, p := range gr.pairs {
				for q, pq := range gr.pairs {
					gr.sxx[r*k+q] += c.ds[p] * c.ds[pq]
					gr.say[r*k+q] += c.da[p] * c.ds[pq]
				}
			}
			gr.n++
		}
	}
	c.frames++
	c.have = true
}

// bonded reports whether pair p is a bond in the first frame or on
// average over the run (a bond that broke because the step was too large
// still counts).
func (c *tauCollector) bonded(p int) bool {
	return c.frames > 0 && (c.first[p] < c.bondCut[p] || c.sumD[p]/float64(c.frames) < c.bondCut[p])
}

func (c *tauCollector) stats(frameInterval float64) TimeStepStats {
	var s TimeStepStats
	for p := range c.pairs {
		if c.bonded(p) {
			s.Pairs++
		}
	}
	w2 := 0.0
	for _, gr := range c.groups {
		var use []int // rows of the group's bonded pairs
		for r, p := range gr.pairs {
			if c.bonded(p) {
				use = append(use, r)
			}
		}
		if len(use) == 0 || gr.n == 0 {
			continue
		}
		if o := largestOmega2(gr, use); o > w2 {
			w2, s.Samples = o, gr.n
		}
	}
	if w2 <= 0 {
		return s
	}
	s.Tau = 1 / math.Sqrt(w2)
	s.Period = 2 * math.Pi * s.Tau
	s.Wavenumber = hartreeInvCm / s.Tau
	s.Reliable = frameInterval <= s.Period/4
	return s
}

// largestOmega2 is the largest real eigenvalue of W = -Say Sxx^-1
// restricted to the rows use (0 when none is positive or Sxx is
// singular).
func largestOmega2(gr bondGroup, use []int) float64 {
	k, m := len(gr.pairs), len(use)
	sxx := mat.NewDense(m, m, nil)
	say := mat.NewDense(m, m, nil)
	for r, ur := range use {
		for q, uq := range use {
			sxx.Set(r, q, gr.sxx[ur*k+uq])
			say.Set(r, q, -gr.say[ur*k+uq])
		}
	}
	// W Sxx = -Say, so W^T = Sxx^-1 (-Say)^T (Sxx is symmetric); W and
	// W^T share their eigenvalues.
	var wt mat.Dense
	if err := wt.Solve(sxx, say.T()); err != nil {
		return 0
	}
	var eig mat.Eigen
	if !eig.Factorize(&wt, mat.EigenNone) {
		return 0
	}
	best := 0.0
	for _, v := range eig.Values(nil) {
		if math.Abs(imag(v)) <= 1e-6*math.Abs(real(v)) && real(v) > best {
			best = real(v)
		}
	}
	return best
}

// bondFactor times the sum of covalent radii is the longest separation
// counted as a bond (common practice: 1.2-1.3; the upper end keeps bonds
// stretched by vibration).
const bondFactor = 1.3

// covalentRadius are single-bond covalent radii in angstrom (Dalton
// Trans. 2008, 2832, doi:10.1039/b801115j; values from memory) by atomic
// number; 0 = not listed.
var covalentRadius = [...]float64{
	1: 0.31, 2: 0.28, 3: 1.28, 4: 0.96, 5: 0.84, 6: 0.76, 7: 0.71, 8: 0.66, 9: 0.57, 10: 0.58,
	11: 1.66, 12: 1.41, 13: 1.21, 14: 1.11, 15: 1.07, 16: 1.05, 17: 1.02, 18: 1.06,
	19: 2.03, 20: 1.76, 35: 1.20, 53: 1.39,
}

// candidateFactor times the bond cut-off is how far apart two atoms may
// be in the first frame to be followed as a possible bond.
const candidateFactor = 1.5

// bondedPairs lists the atom pairs in frame x (bohr) that may be bonds,
// closer than candidateFactor times their bond cut-off (bondFactor times
// the sum of covalent radii), with that cut-off; tauCollector keeps those
// bonded at the start or on average over the run. Bonds set the shortest
// periods, while close non-bonded encounters would dominate the
// short-tau tail and overstate the fastest frequency (physics notes: up
// to 2x on a model triatomic). Atoms of unlisted elements are given none.
func bondedPairs(x []float64, species []int, n int) ([][2]int, []float64) {
	const angBohr = 1 / 0.529177210903 // CODATA 2018
	rad := func(i int) float64 {
		if i < len(species) && species[i] > 0 && species[i] < len(covalentRadius) {
			return covalentRadius[species[i]]
		}
		return 0
	}
	var out [][2]int
	var cuts []float64
	for i := 0; i < n; i++ {
		for j := i + 1; j < n; j++ {
			ri, rj := rad(i), rad(j)
			if ri == 0 || rj == 0 {
				continue
			}
			cut := bondFactor * (ri + rj) * angBohr
			d2 := 0.0
			for k := 0; k < 3; k++ {
				d := x[3*i+k] - x[3*j+k]
				d2 += d * d
			}
			if d2 < candidateFactor*candidateFactor*cut*cut {
				out = append(out, [2]int{i, j})
				cuts = append(cuts, cut)
			}
		}
	}
	return out, cuts
}
