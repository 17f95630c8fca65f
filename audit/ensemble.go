package audit

import (
	"context"
	"fmt"
	"math"

	"golang.org/x/sync/errgroup"

	"trajvault/internal/finding"
	"trajvault/internal/progress"
)

// Report is the audit of an ensemble.
type Report struct {
	Caution      string    `json:"caution"`
	Trajectories []*Result `json:"trajectories"`
	Ensemble     []Check   `json:"ensemble"`
	Flagged      int       `json:"flagged"`
	Verdict      Verdict   `json:"verdict"`
	// Findings is the summary of every verdict as findings (see
	// Report.findings); the numbers stay in Trajectories and Ensemble.
	Findings []finding.Finding `json:"findings"`

	// Populations vs time by both estimators, for the report.
	Times      []float64   `json:"-"` // fs
	ByActive   [][]float64 `json:"-"` // [state][t]
	ByAmpSq    [][]float64 `json:"-"`
	NoiseLevel [][]float64 `json:"-"` // 3 binomial sigma

	settings Settings // the thresholds in force, for the report
	pop      *popSums // running sums per frame for the consistency check
}

// add folds one audited trajectory into the ensemble's running sums
// (which drop its per-frame series) and keeps its result.
func (rep *Report) add(r *Result) {
	if rep.pop == nil {
		rep.pop = &popSums{shortT: -1}
	}
	rep.pop.fold(r)
}

// Caution is printed with every audit.
const Caution = "An audit is evidence about the stored numbers, not a certificate that the simulation behind them is sound."

// Ensemble audits every file, at most jobs at a time, and then the
// ensemble. A file that cannot be audited becomes a FileUnreadable
// finding (and a failed trajectory) and the others go on; the only error
// returned is ctx's, when it is cancelled before the audit ends. done
// counts the files audited (nil: not counted).
func Ensemble(ctx context.Context, paths []string, s Settings, jobs int, done progress.Counter) (*Report, error) {
	done = progress.Or(done)
	ts := targets(paths, s)
	done.SetTotal(int64(len(ts)))
	rep := &Report{Caution: Caution, Trajectories: make([]*Result, len(ts)), settings: s, pop: &popSums{shortT: -1}}
	g, gctx := errgroup.WithContext(ctx)
	g.SetLimit(max(jobs, 1))
	for i, tg := range ts {
		p, s := tg.path, tg.s
		g.Go(func() error {
			if err := gctx.Err(); err != nil {
				return err
			}
			res, err := File(gctx, p, s)
			if err != nil {
				if cerr := gctx.Err(); cerr != nil {
					return cerr
				}
				res = &Result{File: p, Group: s.Group, Error: err.Error(), Verdict: Fail, Checks: []Check{}}
			}
			// Only running sums and the per-check results stay: memory
			// is flat in the number of trajectories (issue 13).
			rep.add(res)
			rep.Trajectories[i] = res
			done.Add(1)
			return nil
		})
	}
	if err := g.Wait(); err != nil {
		return nil, err
	}
	if err := ctx.Err(); err != nil {
		return nil, err
	}
	onePerFile(rep.Trajectories)
	for _, spec := range checks {
		if spec.Scope == PerEnsemble {
			c := spec.ensemble(rep, s)
			c.Name, c.Code, c.path = spec.Name, spec.Code, ensemblePath
			rep.Ensemble = append(rep.Ensemble, c)
		}
	}
	rep.Verdict = worst(rep.Ensemble)
	for _, t := range rep.Trajectories {
		if t.Verdict == Fail || t.Verdict == Warn {
			rep.Flagged++
		}
		if t.Verdict.rank() > rep.Verdict.rank() {
			rep.Verdict = t.Verdict
		}
	}
	rep.Ensemble = append(rep.Ensemble, rep.flaggedSummary()...)
	rep.Findings = rep.findings(func(Verdict) bool { return true })
	return rep, nil
}

// flaggedSummary counts, for each registered per-file check, the
// trajectories in each state: fail, warn, cannot tell, not run. Its
// verdict is never ok while a trajectory's check did not run or could
// not tell: n/a when none ran, unknown when some did not (issue 13: "ok
// flagged: force-noise: 0 of 8 fail" read as a pass when nothing ran).
func (rep *Report) flaggedSummary() []Check {
	counts := map[string]map[Verdict]int{}
	for _, t := range rep.Trajectories {
		for _, c := range t.Checks {
			if counts[c.Name] == nil {
				counts[c.Name] = map[Verdict]int{}
			}
			counts[c.Name][c.Verdict]++
		}
	}
	var out []Check
	for _, spec := range checks {
		if spec.Scope != PerFile {
			continue
		}
		c, ok := counts[spec.Name]
		if !ok {
			continue // no file could be audited
		}
		n := len(rep.Trajectories)
		v := OK
		switch {
		case c[Fail] > 0:
			v = Fail
		case c[Warn] > 0:
			v = Warn
		case c[NA] == n:
			v = NA
		case c[NA] > 0 || c[Unknown] > 0:
			v = Unknown
		}
		sum := fmt.Sprintf("%d of %d trajectories fail, %d warn", c[Fail], n, c[Warn])
		if c[Unknown] > 0 {
			sum += fmt.Sprintf(", %d cannot tell", c[Unknown])
		}
		if c[NA] > 0 {
			sum += fmt.Sprintf(", %d not run", c[NA])
		}
		out = append(out, Check{Name: FlaggedPrefix + spec.Name, Code: spec.Code, Verdict: v, Summary: sum,
			Values: map[string]float64{"fail": float64(c[Fail]), "warn": float64(c[Warn]), "unknown": float64(c[Unknown]),
				"not_run": float64(c[NA]), "ok": float64(c[OK]), "trajectories": float64(n)}})
	}
	return out
}

// NotRun counts the checks of r that did not run.
func (r *Result) NotRun() int {
	n := 0
	for _, c := range r.Checks {
		if c.Verdict == NA {
			n++
		}
	}
	return n
}

// consistency compares the two surface-hopping population estimators,
// the fraction of trajectories in state k and the mean |c_k|^2, frame by
// frame. For N independent trajectories the fraction has binomial
// standard deviation sqrt(P(1-P)/N); a difference above three of them at
// many times means the hops and the amplitudes disagree, e.g. frustrated
// hops mishandled (J. Chem. Phys. 126, 134114 (2007),
// doi:10.1063/1.2715585; noise level derived).
func (rep *Report) consistency(s Settings) Check {
	p := rep.pop
	if p == nil || p.used < 2 || p.shortT < 1 || len(p.inK) == 0 {
		return Check{Verdict: NA, Summary: "needs two or more trajectories with active states and populations"}
	}
	N, T, S := p.used, p.shortT, len(p.inK)
	rep.Times = append([]float64(nil), p.times[:T]...)
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
			pa := float64(p.inK[k][t]) / float64(N)
			pc := float64(p.amp[k][t]) / fixedOne / float64(N)
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
	vals := map[string]float64{"trajectories": float64(N), "fraction_exceeded": frac, "worst_over_3sigma": worst, "worst_time_fs": worstT}
	sum := fmt.Sprintf("active-state fractions and mean |c|^2 of %d trajectories differ by more than 3 binomial sigma at %.0f %% of times (worst gap %.1f times that level, at %.3g fs)", N, 100*frac, worst, worstT)
	if v != OK {
		sum += "; " + consistencyCauses(rep.Trajectories, vals)
	}
	return Check{Verdict: v, Summary: sum, Values: vals}
}

// consistencyCauses names the known causes of a gap between the two
// population estimators. Fewest switches keeps them equal only when
// every hop the amplitudes ask for is made: frustrated hops leave the
// active state behind while the amplitudes move on (J. Chem. Phys. 126,
// 134114 (2007), doi:10.1063/1.2715585), and a decoherence correction
// changes the amplitudes without a hop, or its absence lets them stay
// coherent where the trajectories have separated. Both happen in correct
// codes, so the text says what to look at and blames none; it gives the
// ensemble's fraction of frustrated hops in the hop logs.
func consistencyCauses(rs []*Result, vals map[string]float64) string {
	acc, fr := 0.0, 0.0
	for _, r := range rs {
		acc += float64(r.HopsAccepted)
		fr += float64(r.HopsFrustrated)
	}
	s := "known causes, in correct codes as well: frustrated hops"
	if acc+fr > 0 {
		vals["frustrated_fraction"] = fr / (acc + fr)
		s += fmt.Sprintf(" (%.0f %% of the %.0f hop attempts here)", 100*fr/(acc+fr), acc+fr)
	}
	return s + " and the decoherence treatment (or none); otherwise hops not executed or not logged"
}
