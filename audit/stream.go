package audit

import (
	"math"
	"sync"
)

// popSums are the running sums per frame (time bin) that the ensemble
// consistency check needs, so that an ensemble's memory does not grow
// with its number of trajectories: per frame t the number of
// trajectories that reach it, per state k how many are in k, and the sum
// of their |c_k|^2. The |c_k|^2 are summed in fixed point (units of
// 2^-32, integers), so the sums are exact and the same whatever order
// the files finish in (deterministic output).
type popSums struct {
	mu     sync.Mutex
	used   int       // trajectories folded in
	shortT int       // shortest of them, frames (-1: none yet)
	n      []int64   // per frame
	times  []float64 // per frame, fs: the smallest time seen there
	inK    [][]int64 // [state][frame]
	amp    [][]int64 // [state][frame], sum |c_k|^2 in units of 2^-32
}

// fixedOne is 1 in the fixed-point units of popSums.amp.
const fixedOne = 1 << 32

// fixedMax bounds a stored |c_k|^2 (values beyond fail the populations
// check anyway) so that 2^23 trajectories cannot overflow a sum.
const fixedMax = 256

// energyPoints is how many points of each trajectory's energy deviation
// the report keeps for its plot (the plot draws at most 2000 per line).
const energyPoints = 500

// fold adds one trajectory's active states and |c_k|^2 to the sums and
// drops the per-frame series the report does not need, keeping the
// energy deviation thinned to energyPoints for the plot.
func (p *popSums) fold(r *Result) {
	S, rows := r.popRows()
	if r.Active != nil && rows > 0 {
		T := min(len(r.Active), rows, len(r.Times))
		p.mu.Lock()
		p.used++
		if p.shortT < 0 || T < p.shortT {
			p.shortT = T
		}
		if T > len(p.n) {
			p.n = append(p.n, make([]int64, T-len(p.n))...)
			for len(p.times) < T {
				p.times = append(p.times, math.Inf(1))
			}
			for k := range p.inK {
				p.inK[k] = append(p.inK[k], make([]int64, T-len(p.inK[k]))...)
				p.amp[k] = append(p.amp[k], make([]int64, T-len(p.amp[k]))...)
			}
		}
		for len(p.inK) < S {
			p.inK = append(p.inK, make([]int64, len(p.n)))
			p.amp = append(p.amp, make([]int64, len(p.n)))
		}
		for t := 0; t < T; t++ {
			p.n[t]++
			p.times[t] = math.Min(p.times[t], r.Times[t])
			if k := r.Active[t]; k >= 0 && int(k) < len(p.inK) {
				p.inK[k][t]++
			}
			for k, c := range r.popRow(t) {
				if k < len(p.amp) {
					p.amp[k][t] += toFixed(c)
				}
			}
		}
		p.mu.Unlock()
	}
	r.Active, r.Pops, r.pops = nil, nil, nil
	if r.devTimes != nil {
		r.Times, r.devTimes = r.devTimes, nil
	} else if n := len(r.EnergyDev); n > energyPoints {
		step := float64(n-1) / float64(energyPoints-1)
		ts, es := make([]float64, energyPoints), make([]float64, energyPoints)
		for i := range ts {
			j := int(math.Round(float64(i) * step))
			ts[i], es[i] = r.Times[j], r.EnergyDev[j]
		}
		r.Times, r.EnergyDev = ts, es
	} else if r.EnergyDev == nil {
		r.Times = nil
	}
}

func toFixed(c float64) int64 {
	if math.IsNaN(c) {
		return 0 // the populations check fails such a file
	}
	return int64(math.Round(math.Max(-fixedMax, math.Min(fixedMax, c)) * fixedOne))
}

// popRows gives the number of states of the first frame's |c_k|^2 and
// the number of frames that have them, from the one series File fills
// or from Pops.
func (r *Result) popRows() (states, rows int) {
	if r.pops != nil && r.states > 0 {
		return r.states, len(r.pops) / r.states
	}
	if len(r.Pops) > 0 {
		return len(r.Pops[0]), len(r.Pops)
	}
	return 0, 0
}

// popRow is frame t's |c_k|^2.
func (r *Result) popRow(t int) []float64 {
	if r.pops != nil && r.states > 0 {
		return r.pops[t*r.states : (t+1)*r.states]
	}
	return r.Pops[t]
}
