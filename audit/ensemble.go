package audit

import (
	"fmt"
	"math"
	"sync"
)

// Report is the audit of an ensemble.
type Report struct {
	Caution      string    `json:"caution"`
	Trajectories []*Result `json:"trajectories"`
	Ensemble     []Check   `json:"ensemble"`
	Flagged      int       `json:"flagged"`
	Verdict      Verdict   `json:"verdict"`

	// Populations vs time by both estimators, for the report.
	Times      []float64   `json:"-"` // fs
	ByActive   [][]float64 `json:"-"` // [state][t]
	ByAmpSq    [][]float64 `json:"-"`
	NoiseLevel [][]float64 `json:"-"` // 3 binomial sigma
}

// Caution is printed with every audit.
const Caution = "An audit is evidence about the stored numbers, not a certificate that the simulation behind them is sound."

// Ensemble audits every file (jobs at a time) and then the ensemble.
func Ensemble(paths []string, s Settings, jobs int) (*Report, error) {
	rep := &Report{Caution: Caution, Trajectories: make([]*Result, len(paths))}
	errs := make([]error, len(paths))
	sem := make(chan struct{}, max(jobs, 1))
	var wg sync.WaitGroup
	for i, p := range paths {
		wg.Add(1)
		sem <- struct{}{}
		go func(i int, p string) {
			defer wg.Done()
			defer func() { <-sem }()
			rep.Trajectories[i], errs[i] = File(p, s)
		}(i, p)
	}
	wg.Wait()
	for _, err := range errs {
		if err != nil {
			return nil, err
		}
	}
	rep.consistency(s)
	rep.Verdict = worst(rep.Ensemble)
	for _, t := range rep.Trajectories {
		if t.Verdict == Fail || t.Verdict == Warn {
			rep.Flagged++
		}
		if t.Verdict.rank() > rep.Verdict.rank() {
			rep.Verdict = t.Verdict
		}
	}
	counts := map[string]map[Verdict]int{}
	for _, t := range rep.Trajectories {
		for _, c := range t.Checks {
			if counts[c.Name] == nil {
				counts[c.Name] = map[Verdict]int{}
			}
			counts[c.Name][c.Verdict]++
		}
	}
	for _, name := range []string{"energy", "force-noise", "time-step", "populations", "hop-probability", "hops", "momentum", "zpe-leakage"} {
		c, ok := counts[name]
		if !ok {
			continue
		}
		v := OK
		if c[Fail] > 0 {
			v = Fail
		} else if c[Warn] > 0 {
			v = Warn
		}
		rep.Ensemble = append(rep.Ensemble, Check{Name: "flagged: " + name, Verdict: v,
			Summary: fmt.Sprintf("%d of %d trajectories fail, %d warn", c[Fail], len(rep.Trajectories), c[Warn]),
			Values:  map[string]float64{"fail": float64(c[Fail]), "warn": float64(c[Warn]), "trajectories": float64(len(rep.Trajectories))}})
	}
	return rep, nil
}

// consistency compares the two surface-hopping population estimators,
// the fraction of trajectories in state k and the mean |c_k|^2, frame by
// frame. For N independent trajectories the fraction has binomial
// standard deviation sqrt(P(1-P)/N); a difference above three of them at
// many times means the hops and the amplitudes disagree, e.g. frustrated
// hops mishandled (J. Chem. Phys. 126, 134114 (2007),
// doi:10.1063/1.2715585; noise level derived).
func (rep *Report) consistency(s Settings) {
	var use []*Result
	T, S := -1, 0
	for _, t := range rep.Trajectories {
		if t.Active == nil || t.Pops == nil {
			continue
		}
		use = append(use, t)
		if T < 0 || len(t.Active) < T {
			T = len(t.Active)
		}
		S = max(S, len(t.Pops[0]))
	}
	N := len(use)
	if N < 2 || T < 1 {
		rep.Ensemble = append(rep.Ensemble, Check{Name: "internal-consistency", Verdict: NA, Summary: "needs two or more trajectories with active states and populations"})
		return
	}
	rep.Times = use[0].Times[:T]
	rep.ByActive = make([][]float64, S)
	rep.ByAmpSq = make([][]float64, S)
	rep.NoiseLevel = make([][]float64, S)
	exceeded, total := 0, 0
	worst, worstT := 0.0, 0.0
	for k := 0; k < S; k++ {
		rep.ByActive[k] = make([]float64, T)
		rep.ByAmpSq[k] = make([]float64, T)
		rep.NoiseLevel[k] = make([]float64, T)
		for t := 0; t < T; t++ {
			na, sum := 0, 0.0
			for _, r := range use {
				if int(r.Active[t]) == k {
					na++
				}
				if k < len(r.Pops[t]) {
					sum += r.Pops[t][k]
				}
			}
			pa, pc := float64(na)/float64(N), sum/float64(N)
			// The binomial level, floored at one trajectory's worth so
			// that P near 0 or 1 is not held to zero tolerance.
			sig := 3 * math.Sqrt(math.Max(pc*(1-pc), 1/float64(N))/float64(N))
			rep.ByActive[k][t], rep.ByAmpSq[k][t], rep.NoiseLevel[k][t] = pa, pc, sig
			total++
			gap := math.Abs(pa - pc)
			if gap > sig {
				exceeded++
			}
			if gap/sig > worst {
				worst, worstT = gap/sig, rep.Times[t]
			}
		}
	}
	frac := float64(exceeded) / float64(total)
	v := OK
	if frac > s.ConsistencyFailFraction {
		v = Fail
	} else if frac > 0.05 {
		v = Warn
	}
	rep.Ensemble = append(rep.Ensemble, Check{Name: "internal-consistency", Verdict: v,
		Summary: fmt.Sprintf("active-state fractions and mean |c|^2 of %d trajectories differ by more than 3 binomial sigma at %.0f %% of times (worst gap %.1f times that level, at %.3g fs)", N, 100*frac, worst, worstT),
		Values:  map[string]float64{"trajectories": float64(N), "fraction_exceeded": frac, "worst_over_3sigma": worst, "worst_time_fs": worstT}})
}
