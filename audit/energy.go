package audit

import (
	"math"
	"sort"

	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/gonum/stat"
)

// EnergyStats describes a total-energy series E(t_n) (hartree, au_time).
type EnergyStats struct {
	MaxDeviation float64 // max |E(t) - E(0)|
	MaxJump      float64 // max |E(n+1) - E(n)| between stored frames
	JumpFrame    int     // frame after the largest jump
	Drift        float64 // least-squares slope, hartree per au_time
	// Oscillation is the peak-to-peak of E after removing the drift,
	// relative to 2<K>: for harmonic motion 2<K> is the vibrational energy
	// (virial theorem), so velocity Verlet gives (omega dt)^2/4 (derived
	// from the shadow Hamiltonian p^2/2m + k x^2 (1 - (omega dt)^2/4)/2).
	Oscillation float64
	PeakToPeak  float64 // hartree, detrended
}

// energyStats computes EnergyStats; kinMean is the mean kinetic energy
// (for the oscillation scale), 0 when unknown.
func energyStats(t, e []float64, kinMean float64) EnergyStats {
	var s EnergyStats
	n := len(e)
	if n == 0 {
		return s
	}
	for i := range e {
		s.MaxDeviation = math.Max(s.MaxDeviation, math.Abs(e[i]-e[0]))
		if i > 0 {
			if j := math.Abs(e[i] - e[i-1]); j > s.MaxJump {
				s.MaxJump, s.JumpFrame = j, i
			}
		}
	}
	slope, icept := linearFit(t, e)
	s.Drift = slope
	lo, hi := math.Inf(1), math.Inf(-1)
	for i := range e {
		r := e[i] - (icept + slope*t[i])
		lo, hi = math.Min(lo, r), math.Max(hi, r)
	}
	s.PeakToPeak = hi - lo
	if kinMean > 0 {
		s.Oscillation = s.PeakToPeak / (2 * kinMean)
	}
	return s
}

// linearFit returns the least-squares slope and intercept of y(x).
func linearFit(x, y []float64) (float64, float64) {
	if len(x) < 2 {
		return 0, mean(y)
	}
	alpha, beta := stat.LinearRegression(x, y, nil, false)
	return beta, alpha
}

func mean(v []float64) float64 {
	if len(v) == 0 {
		return 0
	}
	return stat.Mean(v, nil)
}

// nnls3 fits y ~ a + b x + c x^2 with a, b, c >= 0, weighting each point
// by 1/y^2 (relative errors: D(k) spans decades), by trying every subset
// of free parameters and keeping the best feasible one.
func nnls3(x, y []float64) (float64, float64, float64) {
	best := math.Inf(1)
	var ba, bb, bc float64
	for mask := 1; mask < 8; mask++ {
		var cols [][]float64
		for j := 0; j < 3; j++ {
			if mask&(1<<j) == 0 {
				continue
			}
			col := make([]float64, len(x))
			for i := range x {
				col[i] = math.Pow(x[i], float64(j))
			}
			cols = append(cols, col)
		}
		coef, ok := weightedLSQ(cols, y)
		if !ok {
			continue
		}
		full := [3]float64{}
		k, feasible := 0, true
		for j := 0; j < 3; j++ {
			if mask&(1<<j) != 0 {
				full[j] = coef[k]
				if coef[k] < 0 {
					feasible = false
				}
				k++
			}
		}
		if !feasible {
			continue
		}
		res := 0.0
		for i := range x {
			fit := full[0] + full[1]*x[i] + full[2]*x[i]*x[i]
			w := 1 / math.Max(y[i]*y[i], 1e-300)
			res += w * (y[i] - fit) * (y[i] - fit)
		}
		if res < best {
			best, ba, bb, bc = res, full[0], full[1], full[2]
		}
	}
	return ba, bb, bc
}

// weightedLSQ solves y ~ sum_j coef_j cols_j in the least-squares sense
// with weights 1/y^2, by QR factorisation (gonum/mat).
func weightedLSQ(cols [][]float64, y []float64) ([]float64, bool) {
	A := mat.NewDense(len(y), len(cols), nil)
	b := mat.NewVecDense(len(y), nil)
	for r := range y {
		w := 1 / math.Max(math.Abs(y[r]), 1e-150)
		for j := range cols {
			A.Set(r, j, w*cols[j][r])
		}
		b.SetVec(r, w*y[r])
	}
	var x mat.VecDense
	if err := x.SolveVec(A, b); err != nil {
		return nil, false
	}
	return x.RawVector().Data, true
}

// percentile returns the p-th percentile (0..100) of v.
func percentile(v []float64, p float64) float64 {
	if len(v) == 0 {
		return math.NaN()
	}
	s := append([]float64(nil), v...)
	sort.Float64s(s)
	return stat.Quantile(p/100, stat.Empirical, s, nil)
}
