package compare

import (
	"fmt"
	"math"
	"sort"
)

// Series is what the ensemble comparison needs of one trajectory, in
// display units: times in fs, energies in eV. Tests build it straight from
// a model; Run reads it from files.
type Series struct {
	Name  string
	Times []float64 // fs, increasing
	// Active is the active state per frame (0-based); nil when the file
	// has none.
	Active []int
	// Populations are |c_k|^2 per frame ([frame][state]); nil when absent.
	Populations [][]float64
	// HopTimes are the times (fs) of accepted hops.
	HopTimes []float64
	// EnergySpread is max |E_tot(t) - E_tot(0)| in eV, NaN when the file
	// has no total energy.
	EnergySpread float64
}

// Band is one side's active-state fraction of one state at one time with
// its Wilson score interval, and the mean |c|^2 over the trajectories
// when recorded, with its Student t interval (MeanInterval) over the NPop
// trajectories that record it.
type Band struct {
	Fraction float64  `json:"fraction"`
	Low      float64  `json:"low"`
	High     float64  `json:"high"`
	MeanPop  *float64 `json:"mean_population,omitempty"`
	PopLow   *float64 `json:"mean_population_low,omitempty"`
	PopHigh  *float64 `json:"mean_population_high,omitempty"`
	N        int      `json:"n"`
	NPop     int      `json:"n_population,omitempty"`
}

// CurvePoint is both sides' bands at one time, one entry per state.
type CurvePoint struct {
	Time float64 `json:"time_fs"`
	A    []Band  `json:"a"`
	B    []Band  `json:"b"`
}

// Test is one hypothesis test of the ensemble family.
type Test struct {
	Name      string  `json:"name"`
	Statistic float64 `json:"statistic"`
	DF        int     `json:"df,omitempty"`
	P         float64 `json:"p"`
	// Adjusted is Holm's adjusted p-value within the whole family.
	Adjusted float64 `json:"p_holm"`
	Note     string  `json:"note,omitempty"`
}

// Ensemble verdicts.
const (
	Equivalent = "equivalent"
	Different  = "different"
	TooFew     = "too few trajectories to tell"
	NoStates   = "not applicable (no active states)"
)

// EnsembleResult is the comparison of two ensembles.
type EnsembleResult struct {
	NA     int    `json:"n_a"`
	NB     int    `json:"n_b"`
	States int    `json:"states"`
	Tests  []Test `json:"tests"`
	// PopulationTests counts the tests of mean |c|^2 in Tests.
	PopulationTests int `json:"population_tests"`
	// Skipped lists tests that could not be made, and why.
	Skipped []string `json:"skipped,omitempty"`
	// MinP is the smallest Holm-adjusted p-value, from test MinTest.
	MinP    float64 `json:"p_min_holm"`
	MinTest string  `json:"p_min_test"`
	// Detectable is the smallest difference of active-state fractions the
	// family detects with Settings.Power at these sizes (Detectable at
	// alpha/m, Holm's first step).
	Detectable float64 `json:"detectable_difference"`
	Verdict    string  `json:"verdict"`
	// Curve is the population curves, thinned to at most MaxCurve points.
	Curve []CurvePoint `json:"curve"`
	// EnergyA and EnergyB are the median and largest per-trajectory
	// energy spreads (eV), when recorded.
	EnergyA *Spread `json:"energy_a,omitempty"`
	EnergyB *Spread `json:"energy_b,omitempty"`
	// FirstHopsA and FirstHopsB are the first accepted hop times (fs) of
	// each side, as the KS test sees them; kept for the HTML report's
	// distribution plot, not in the JSON.
	FirstHopsA []float64 `json:"-"`
	FirstHopsB []float64 `json:"-"`
}

// Spread summarises per-trajectory energy spreads.
type Spread struct {
	Median float64 `json:"median_ev"`
	Max    float64 `json:"max_ev"`
	N      int     `json:"n"`
}

// MaxCurve bounds the points of the population curve in reports.
const MaxCurve = 200

// timeKey makes times from two files comparable: fs rounded to 1e-6 fs,
// far below any time step and far above decoding noise.
func timeKey(t float64) int64 { return int64(math.Round(t * 1e6)) }

// counts is the active-state histogram of one side at one time, with
// the sums of |c|^2 and of its square per state for the mean and its
// spread.
type counts struct {
	n    int
	k    []int
	pop  []float64 // sum of |c|^2 per state
	pop2 []float64 // sum of |c|^4 per state
	np   int
}

// popStats are the mean, variance (n - 1 in the denominator) and count
// of |c_j|^2 over the trajectories at this time.
func (c *counts) popStats(j int) (mean, variance float64, n int) {
	if c.np == 0 {
		return math.NaN(), math.NaN(), 0
	}
	nf := float64(c.np)
	mean = c.pop[j] / nf
	if c.np > 1 {
		// Sums of values in [0, 1] (a few hundred at most per time): the
		// one-pass formula loses nothing that matters here.
		variance = math.Max(0, (c.pop2[j]-nf*mean*mean)/(nf-1))
	} else {
		variance = math.NaN()
	}
	return mean, variance, c.np
}

func histogram(runs []*Series, states int) map[int64]*counts {
	h := map[int64]*counts{}
	for _, s := range runs {
		for i, t := range s.Times {
			if s.Active == nil || i >= len(s.Active) {
				break
			}
			key := timeKey(t)
			c := h[key]
			if c == nil {
				c = &counts{k: make([]int, states), pop: make([]float64, states), pop2: make([]float64, states)}
				h[key] = c
			}
			st := s.Active[i]
			if st < 0 || st >= states {
				continue // counted nowhere; Run reports states outside n_states
			}
			c.n++
			c.k[st]++
			if s.Populations != nil && i < len(s.Populations) && len(s.Populations[i]) == states {
				for j, p := range s.Populations[i] {
					c.pop[j] += p
					c.pop2[j] += p * p
				}
				c.np++
			}
		}
	}
	return h
}

// CompareEnsembles tests whether two ensembles of surface-hopping runs
// sample the same dynamics. The family of tests, judged together by
// Holm's procedure at Settings.Alpha:
//   - active-state counts at Settings.TestTimes times spread evenly over
//     the common times (chi-squared homogeneity, 2 x states);
//   - mean |c_j|^2 of states j = 0..K-2 (counted from 0, as stored) at
//     the same times, where both sides record populations (Welch's
//     two-sample t test: the trajectories are independent and their
//     |c|^2 bounded, so the means are near normal at the sizes where a
//     verdict is given);
//   - first accepted hop time of each trajectory (two-sample KS);
//   - active state at each trajectory's last frame (chi-squared
//     homogeneity).
//
// Populations at nearby times are strongly correlated; Holm's procedure
// is valid under any dependence (conservative here), so the family-wise
// false-alarm rate stays at most Alpha.
func CompareEnsembles(a, b []*Series, states int, s Settings) *EnsembleResult {
	r := &EnsembleResult{NA: len(a), NB: len(b), States: states, Tests: []Test{}, Curve: []CurvePoint{}}
	r.EnergyA, r.EnergyB = spread(a), spread(b)
	if states < 1 || !hasActive(a) || !hasActive(b) {
		r.Verdict = NoStates
		return r
	}
	ha, hb := histogram(a, states), histogram(b, states)
	var grid []int64
	for k, ca := range ha {
		if cb := hb[k]; cb != nil && ca.n > 0 && cb.n > 0 {
			grid = append(grid, k)
		}
	}
	sort.Slice(grid, func(i, j int) bool { return grid[i] < grid[j] })
	if len(grid) == 0 {
		r.Verdict = TooFew
		r.Skipped = append(r.Skipped, "populations: the two ensembles share no frame time")
		return r
	}
	// The curve, thinned evenly.
	stride := max(1, (len(grid)+MaxCurve-1)/MaxCurve)
	for i := 0; i < len(grid); i += stride {
		r.Curve = append(r.Curve, curvePoint(grid[i], ha[grid[i]], hb[grid[i]], states, s.Z))
	}
	// Test times: TestTimes evenly spaced after the start (at t = 0 every
	// run is in its initial state).
	var picks []int
	if len(grid) > 1 {
		last := -1
		for k := 1; k <= s.TestTimes; k++ {
			i := int(math.Round(float64(k) * float64(len(grid)-1) / float64(s.TestTimes)))
			if i > last && i > 0 {
				picks = append(picks, i)
				last = i
			}
		}
	}
	oneState := 0
	for _, i := range picks {
		ca, cb := ha[grid[i]], hb[grid[i]]
		x2, df, p := Homogeneity(ca.k, cb.k)
		if df == 0 {
			oneState++ // nothing to test; left out of the family
			continue
		}
		r.Tests = append(r.Tests, Test{Name: fmt.Sprintf("states at %.4g fs", float64(grid[i])/1e6), Statistic: x2, DF: df, P: p})
	}
	if oneState > 0 {
		r.Skipped = append(r.Skipped, fmt.Sprintf("states at %d of %d test times: every trajectory of both sides in one state", oneState, len(picks)))
	}
	// Mean |c_j|^2 at the same times, states 0..K-2: the populations of
	// a trajectory sum to 1, so the last state adds no information.
	popTests, popFlat, popMissing := 0, 0, 0
	for _, i := range picks {
		ca, cb := ha[grid[i]], hb[grid[i]]
		if ca.np < 2 || cb.np < 2 {
			popMissing++
			continue
		}
		for j := 0; j < states-1; j++ {
			ma, va, na := ca.popStats(j)
			mb, vb, nb := cb.popStats(j)
			tt, df, p := Welch(ma, va, na, mb, vb, nb)
			if math.IsNaN(p) {
				popFlat++
				continue
			}
			popTests++
			r.Tests = append(r.Tests, Test{Name: fmt.Sprintf("mean |c%d|^2 at %.4g fs", j, float64(grid[i])/1e6), Statistic: tt, P: p,
				Note: fmt.Sprintf("Welch, df %.1f; A %.3f, B %.3f", df, ma, mb)})
		}
	}
	switch {
	case popMissing == len(picks) && len(picks) > 0:
		r.Skipped = append(r.Skipped, "mean |c|^2: populations not recorded on both sides")
	case popMissing > 0:
		r.Skipped = append(r.Skipped, fmt.Sprintf("mean |c|^2 at %d of %d test times: populations recorded by fewer than 2 trajectories of a side", popMissing, len(picks)))
	}
	if popFlat > 0 {
		r.Skipped = append(r.Skipped, fmt.Sprintf("mean |c|^2: %d tests where both sides have no spread (every trajectory the same)", popFlat))
	}
	r.PopulationTests = popTests
	ta, tb := firstHops(a), firstHops(b)
	r.FirstHopsA, r.FirstHopsB = ta, tb
	if d, p := KS(ta, tb); !math.IsNaN(p) {
		r.Tests = append(r.Tests, Test{Name: "first hop times (KS)", Statistic: d, P: p,
			Note: fmt.Sprintf("%d and %d trajectories hopped", len(ta), len(tb))})
	} else {
		r.Skipped = append(r.Skipped, fmt.Sprintf("first hop times: %d and %d trajectories hopped; the KS test needs na nb/(na+nb) >= 4", len(ta), len(tb)))
	}
	fa, fb := finalStates(a, states), finalStates(b, states)
	if x2, df, p := Homogeneity(fa, fb); df > 0 {
		r.Tests = append(r.Tests, Test{Name: "final states", Statistic: x2, DF: df, P: p,
			Note: fmt.Sprintf("A %v, B %v", fa, fb)})
	} else {
		r.Skipped = append(r.Skipped, "final states: all in one state on both sides")
	}
	ps := make([]float64, len(r.Tests))
	for i, t := range r.Tests {
		ps[i] = t.P
	}
	adj := Holm(ps)
	r.MinP = 1
	for i := range r.Tests {
		r.Tests[i].Adjusted = adj[i]
		if adj[i] < r.MinP || r.MinTest == "" {
			r.MinP, r.MinTest = adj[i], r.Tests[i].Name
		}
	}
	m := max(1, len(r.Tests))
	r.Detectable = Detectable(r.NA, r.NB, s.Alpha/float64(m), s.Power)
	switch {
	case min(r.NA, r.NB) < s.MinTrajectories:
		r.Verdict = TooFew
	case r.MinP < s.Alpha:
		r.Verdict = Different
	case r.Detectable > s.Margin:
		r.Verdict = TooFew
	default:
		r.Verdict = Equivalent
	}
	return r
}

func hasActive(runs []*Series) bool {
	for _, s := range runs {
		if s.Active != nil {
			return true
		}
	}
	return false
}

func curvePoint(key int64, ca, cb *counts, states int, z float64) CurvePoint {
	cp := CurvePoint{Time: float64(key) / 1e6}
	for _, c := range []*counts{ca, cb} {
		bands := make([]Band, states)
		for j := range bands {
			lo, hi := Wilson(c.k[j], c.n, z)
			bands[j] = Band{Fraction: float64(c.k[j]) / float64(c.n), Low: lo, High: hi, N: c.n}
			if m, v, n := c.popStats(j); n > 0 {
				bands[j].MeanPop, bands[j].NPop = ptr(m), n
				if lo, hi, ok := MeanInterval(m, v, n, z); ok {
					bands[j].PopLow, bands[j].PopHigh = ptr(lo), ptr(hi)
				}
			}
		}
		if c == ca {
			cp.A = bands
		} else {
			cp.B = bands
		}
	}
	return cp
}

// firstHops are the first accepted hop times, one per trajectory that
// hopped: independent draws, as the KS test assumes (all hops of one
// trajectory are not).
func firstHops(runs []*Series) []float64 {
	var out []float64
	for _, s := range runs {
		if len(s.HopTimes) > 0 {
			out = append(out, s.HopTimes[0])
		}
	}
	return out
}

func finalStates(runs []*Series, states int) []int {
	out := make([]int, states)
	for _, s := range runs {
		if n := len(s.Active); n > 0 && s.Active[n-1] >= 0 && s.Active[n-1] < states {
			out[s.Active[n-1]]++
		}
	}
	return out
}

func spread(runs []*Series) *Spread {
	var v []float64
	for _, s := range runs {
		if !math.IsNaN(s.EnergySpread) {
			v = append(v, s.EnergySpread)
		}
	}
	if len(v) == 0 {
		return nil
	}
	sort.Float64s(v)
	med := v[len(v)/2]
	if len(v)%2 == 0 {
		med = (v[len(v)/2-1] + v[len(v)/2]) / 2
	}
	return &Spread{Median: med, Max: v[len(v)-1], N: len(v)}
}
