package audit

import (
	"math"

	"trajvault/internal/trajfile"
)

// zpeTracker watches the kinetic energy along atom-pair bonds, the
// Hessian-free local-pair picture of zero-point-energy leakage
// (J. Chem. Theory Comput. 18, 4109 (2022), doi:10.1021/acs.jctc.2c00208).
// For pair ij with unit vector r_hat and reduced mass mu,
//
//	K_ij = 1/2 mu ((v_i - v_j) . r_hat)^2
//
// A harmonic mode's mean kinetic energy is half its energy, so a pair
// holding its zero-point energy 1/2 hbar omega averages K_ij = ZPE/2 over
// whole periods; a pair whose window-averaged K_ij stays below that has
// leaked zero-point energy (derived; omega from the pair's own motion).
type zpeTracker struct {
	pairs [][2]int
	mu    []float64
	kin   [][]float64 // per pair, per frame
}

func newZPETracker(s Settings, r *trajfile.Reader, x []float64) *zpeTracker {
	z := &zpeTracker{}
	pairs := s.ZPEPairs
	if len(pairs) == 0 {
		const xhCutoff = 1.3 / 0.529177210903 // bohr
		for _, p := range nearPairs(x, r.N, xhCutoff) {
			if (r.Species[p[0]] == 1) != (r.Species[p[1]] == 1) { // X-H
				pairs = append(pairs, p)
			}
		}
	}
	for _, p := range pairs {
		mi, mj := r.Masses[p[0]], r.Masses[p[1]]
		z.pairs = append(z.pairs, p)
		z.mu = append(z.mu, mi*mj/(mi+mj))
		z.kin = append(z.kin, make([]float64, 0, r.T)) // one value per frame
	}
	return z
}

func (z *zpeTracker) add(x, v []float64) {
	for p, ij := range z.pairs {
		i, j := ij[0], ij[1]
		var r [3]float64
		rn := 0.0
		for k := 0; k < 3; k++ {
			r[k] = x[3*i+k] - x[3*j+k]
			rn += r[k] * r[k]
		}
		rn = math.Sqrt(rn)
		proj := 0.0
		for k := 0; k < 3; k++ {
			proj += (v[3*i+k] - v[3*j+k]) * r[k] / rn
		}
		z.kin[p] = append(z.kin[p], 0.5*z.mu[p]*proj*proj)
	}
}

// pairOmega estimates a pair's angular frequency from its bond kinetic
// energy, which for harmonic motion oscillates at twice the bond
// frequency: the rate of upward crossings of its mean gives the period of
// K_ij, pi/omega. Needs no forces.
func pairOmega(k []float64, dt float64) float64 {
	// K_ij oscillates at twice the bond frequency; count its rises
	// through its mean.
	m := mean(k)
	cross := 0
	for i := 1; i < len(k); i++ {
		if k[i-1] < m && k[i] >= m {
			cross++
		}
	}
	if cross == 0 {
		return 0
	}
	period := float64(len(k)-1) * dt / float64(cross) // of K_ij
	return math.Pi / period                           // bond omega = 2 pi / (2 period)
}

// zpeCheck judges zero-point-energy leakage as a loss. For each watched
// pair the bond kinetic energy is averaged over a sliding window of one
// local period, Kbar(t); the pair's level at the start is the first
// window, Kbar(0). A pair holding its zero-point energy averages ZPE/2
// (virial theorem for a harmonic mode, derived), so the threshold is
// thr = (1 - margin) ZPE/2 with ZPE = hbar omega / 2 (omega from the
// pair's own motion, pairOmega).
//
// Only pairs that started at or above thr can leak what they held
// (J. Chem. Theory Comput. 18, 4109 (2022), doi:10.1021/acs.jctc.2c00208:
// leakage is a loss from quantum initial conditions). A run started from
// thermal (classical) initial conditions never held the zero-point
// energy: at 300 K an O-H stretch starts near a third of thr (physics
// notes, measured on a model triatomic), and the check does not apply to
// it. For pairs that apply, the verdict is the fraction of the run spent
// below thr, and the values give the first time below and the lowest
// window average relative to the pair's own start.
func (a *auditor) zpeCheck(*derived) (Check, string) {
	z, path := a.zpe, a.r.Particle(trajfile.Velocity)
	if z == nil || len(z.pairs) == 0 {
		return result(NA, nil, "no X-H pairs (or velocities) to watch"), path
	}
	dt := a.frameInterval()
	type pairLevel struct {
		startRel, frac, first, lowRel float64 // start / thr; fraction below; fs; min / start
		p                             int
	}
	var applies []pairLevel
	var startRels []float64
	resolved := 0
	for p := range z.pairs {
		k := z.kin[p]
		omega := pairOmega(k, dt)
		if omega == 0 {
			continue
		}
		zpe := 0.5 * omega                              // hbar = 1 in atomic units
		w := max(1, int(math.Ceil(2*math.Pi/omega/dt))) // one local period
		if w >= len(k) {
			continue
		}
		resolved++
		thr := (1 - a.s.ZPEMargin) * zpe / 2
		sum := 0.0
		for i := 0; i < w; i++ {
			sum += k[i]
		}
		start := sum / float64(w)
		startRels = append(startRels, start/thr)
		if start < thr {
			continue // never held its zero-point energy: nothing to lose
		}
		below, total := 0, 0
		first, low := -1.0, start
		for i := w; i <= len(k); i++ {
			avg := sum / float64(w)
			total++
			low = math.Min(low, avg)
			if avg < thr {
				below++
				if first < 0 {
					first = a.res.Times[i-w]
				}
			}
			if i < len(k) {
				sum += k[i] - k[i-w]
			}
		}
		applies = append(applies, pairLevel{startRel: start / thr, frac: float64(below) / float64(total), first: first, lowRel: low / start, p: p})
	}
	if resolved == 0 {
		return result(Unknown, nil, "pair motion too slow or too short to resolve a period"), path
	}
	medStart := percentile(startRels, 50)
	vals := map[string]float64{"pairs": float64(len(z.pairs)), "pairs_started_at_zpe": float64(len(applies)), "median_start_over_threshold": medStart}
	if len(applies) == 0 {
		return result(NA, vals, "does not apply: no X-H pair started with its zero-point energy (start levels at a median %.2g of %.2g ZPE); the initial conditions look thermal (classical), and a zero-point energy never held cannot leak", medStart, 1-a.s.ZPEMargin), path
	}
	worst := applies[0]
	for _, l := range applies[1:] {
		if l.frac > worst.frac {
			worst = l
		}
	}
	ij := z.pairs[worst.p]
	vals["fraction_below"], vals["first_below_fs"], vals["atom_i"], vals["atom_j"] = worst.frac, worst.first, float64(ij[0]), float64(ij[1])
	vals["lowest_over_start"] = worst.lowRel
	if worst.frac > a.s.ZPEWarnFraction {
		return result(Warn, vals, "X-H pair %d-%d started at its zero-point energy and lost it: below %.2g of it %.0f %% of the time from %.4g fs, down to %.0f %% of its start (%d of %d pairs started at ZPE)",
			ij[0], ij[1], 1-a.s.ZPEMargin, 100*worst.frac, worst.first, 100*worst.lowRel, len(applies), len(z.pairs)), path
	}
	return result(OK, vals, "%d of %d X-H pairs started at their zero-point energy; the worst (atoms %d-%d) is below it %.0f %% of the time, lowest %.0f %% of its start",
		len(applies), len(z.pairs), ij[0], ij[1], 100*worst.frac, 100*worst.lowRel), path
}

// nearPairs lists atom pairs closer than cutoff (bohr) in frame x.
func nearPairs(x []float64, n int, cutoff float64) [][2]int {
	var out [][2]int
	for i := 0; i < n; i++ {
		for j := i + 1; j < n; j++ {
			d2 := 0.0
			for k := 0; k < 3; k++ {
				d := x[3*i+k] - x[3*j+k]
				d2 += d * d
			}
			if d2 < cutoff*cutoff {
				out = append(out, [2]int{i, j})
			}
		}
	}
	return out
}
