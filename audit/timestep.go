package audit

import (
	"math"
)

// TimeStepStats is the characteristic time of the fastest motion seen in
// the stored frames.
//
// For each pair of atoms i, j and consecutive stored frames, with
// r_ij = r_i - r_j and a_ij = a_i - a_j (a = F/m),
//
//	tau_ij = sqrt(|Delta r_ij| / |Delta a_ij|)
//
// which for a harmonic pair equals 1/omega exactly (a = -omega^2 (r - r0),
// so the differences cancel r0); derived, in the pairwise form used for
// time-step criteria in N-body practice. A low percentile over pairs and
// frames picks the fastest mode; pairs whose acceleration barely changes
// are skipped.
type TimeStepStats struct {
	Tau        float64 // au_time, low percentile of tau_ij
	Period     float64 // 2 pi Tau, au_time
	Wavenumber float64 // cm^-1 of the fastest motion
	Samples    int
	// Reliable is false when stored frames are too far apart (more than a
	// quarter of the period) for frame differences to resolve the motion.
	Reliable bool
}

// tauPercentile is the percentile of tau_ij taken as the fastest motion.
const tauPercentile = 2.0

// hartreeInvCm is the hartree in cm^-1 (CODATA 2018), so that an angular
// frequency in atomic units (E_h/hbar) converts to a wavenumber.
const hartreeInvCm = 219474.6313632

type tauCollector struct {
	pairs        [][2]int
	taus         []float64
	maxTaus      int
	prevR, prevA []float64 // per pair, 3 values
	have         bool
}

func newTauCollector(pairs [][2]int, maxSamples int) *tauCollector {
	return &tauCollector{pairs: pairs, maxTaus: maxSamples, prevR: make([]float64, 3*len(pairs)), prevA: make([]float64, 3*len(pairs))}
}

// add takes one frame: positions x and accelerations a (3N each, au).
func (c *tauCollector) add(x, a []float64) {
	for p, ij := range c.pairs {
		i, j := ij[0], ij[1]
		var dr2, da2 float64
		for k := 0; k < 3; k++ {
			r := x[3*i+k] - x[3*j+k]
			ac := a[3*i+k] - a[3*j+k]
			if c.have {
				dr := r - c.prevR[3*p+k]
				da := ac - c.prevA[3*p+k]
				dr2 += dr * dr
				da2 += da * da
			}
			c.prevR[3*p+k], c.prevA[3*p+k] = r, ac
		}
		if c.have && da2 > 0 && dr2 > 0 && len(c.taus) < c.maxTaus {
			c.taus = append(c.taus, math.Sqrt(math.Sqrt(dr2)/math.Sqrt(da2)))
		}
	}
	c.have = true
}

func (c *tauCollector) stats(frameInterval float64) TimeStepStats {
	var s TimeStepStats
	s.Samples = len(c.taus)
	if s.Samples == 0 {
		return s
	}
	s.Tau = percentile(c.taus, tauPercentile)
	s.Period = 2 * math.Pi * s.Tau
	s.Wavenumber = hartreeInvCm / s.Tau
	s.Reliable = frameInterval <= s.Period/4
	return s
}

// nearPairs lists atom pairs closer than cutoff (bohr) in frame x: local
// motions (bonds, angles) set the shortest periods.
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
