package audit

import (
	"fmt"
	"math"

	"trajvault/internal/trajfile"
)

// electronic checks populations, hop probabilities and hops.
func (a *auditor) electronic() {
	r := a.r
	S := r.States
	if S == 0 {
		a.add("populations", NA, nil, "no electronic states stored")
		return
	}
	var pops, amps []float64
	if r.Has(trajfile.Amplitudes) {
		amps, _, _ = r.Values(trajfile.Amplitudes, "")
		pops = make([]float64, r.T*S)
		for i := range pops {
			re, im := amps[2*i], amps[2*i+1]
			pops[i] = re*re + im*im
		}
	} else if r.Has(trajfile.Populations) {
		pops, _, _ = r.Values(trajfile.Populations, "")
	}
	if r.Has(trajfile.ActiveState) {
		act, _, _ := r.Values(trajfile.ActiveState, "")
		a.res.Active = make([]int64, len(act))
		for i, x := range act {
			a.res.Active[i] = int64(x)
		}
	}
	if pops != nil {
		a.populations(pops, S)
	} else {
		a.add("populations", NA, nil, "no populations or amplitudes stored")
	}
	if amps != nil && r.Has(trajfile.Couplings) {
		cpl, _, err := r.Values(trajfile.Couplings, "au_time-1")
		if err == nil {
			a.hopProbability(amps, cpl, S)
		}
	}
	a.hops(S)
}

// populations: sum_k |c_k|^2 = 1 and each in [0, 1].
func (a *auditor) populations(p []float64, S int) {
	worstNorm, worstFrame, outOfRange := 0.0, 0, 0
	a.res.Pops = make([][]float64, a.r.T)
	for t := 0; t < a.r.T; t++ {
		row := p[t*S : (t+1)*S]
		a.res.Pops[t] = row
		sum := 0.0
		for _, x := range row {
			sum += x
			if x < -1e-9 || x > 1+1e-9 {
				outOfRange++
			}
		}
		if d := math.Abs(sum - 1); d > worstNorm {
			worstNorm, worstFrame = d, t
		}
	}
	vals := map[string]float64{"max_norm_error": worstNorm, "norm_error_frame": float64(worstFrame), "values_out_of_range": float64(outOfRange)}
	v := OK
	switch {
	case outOfRange > 0 || worstNorm > 100*a.s.NormTolerance:
		v = Fail
	case worstNorm > a.s.NormTolerance:
		v = Warn
	}
	a.add("populations", v, vals, "populations sum to 1 within %.2g (worst at frame %d); %d values outside [0,1]", worstNorm, worstFrame, outOfRange)
}

// hopProbability recomputes fewest-switches probabilities from the stored
// amplitudes and time-derivative couplings T_jk = <j|d/dt k>:
//
//	g_kj = max(0, -2 dt Re(c_j^* T_jk c_k) / |c_k|^2)
//
// (J. Chem. Phys. 93, 1061 (1990), doi:10.1063/1.459170, in the
// time-derivative form). sum_j g_kj > 1 means the step is too large for
// the coupling.
func (a *auditor) hopProbability(amp, cpl []float64, S int) {
	if a.res.Active == nil {
		return
	}
	dt := a.integrationStep()
	worst, worstFrame := 0.0, 0
	for t := 0; t < a.r.T; t++ {
		k := int(a.res.Active[t])
		if k < 0 || k >= S {
			continue
		}
		ck := complex(amp[(t*S+k)*2], amp[(t*S+k)*2+1])
		pk := real(ck)*real(ck) + imag(ck)*imag(ck)
		if pk < 1e-12 {
			continue
		}
		sum := 0.0
		for j := 0; j < S; j++ {
			if j == k {
				continue
			}
			cj := complex(amp[(t*S+j)*2], amp[(t*S+j)*2+1])
			tjk := cpl[(t*S+j)*S+k]
			b := -2 * real(complexConj(cj)*complex(tjk, 0)*ck)
			sum += math.Max(0, b*dt/pk)
		}
		if sum > worst {
			worst, worstFrame = sum, t
		}
	}
	v := OK
	if worst > 1 {
		v = Warn
	}
	a.add("hop-probability", v, map[string]float64{"max_total_probability": worst, "frame": float64(worstFrame)},
		"recomputed fewest-switches hop probability per step at most %.3g (frame %d); above 1 the step is too large for the coupling", worst, worstFrame)
}

func complexConj(c complex128) complex128 { return complex(real(c), -imag(c)) }

// hops checks energy bookkeeping across every logged hop attempt: an
// accepted hop keeps K + V (the rescaling solves a quadratic exactly), so
// E_tot may change across it no more than across an ordinary step; a
// frustrated hop must have been energetically forbidden, which a downward
// hop (V_to <= V_from) never is, nor one with the kinetic energy along the
// coupling direction sufficient: here only the first is decidable from
// stored data (derived).
func (a *auditor) hops(S int) {
	hops, err := a.r.Hops()
	if err != nil || hops == nil {
		a.add("hops", NA, nil, "no hop log stored")
		return
	}
	frame := map[int64]int{}
	for i, s := range a.r.Steps {
		frame[s] = i
	}
	var se []float64
	if a.r.Has(trajfile.StateEnergies) {
		se, _, _ = a.r.Values(trajfile.StateEnergies, "hartree")
	}
	// The ordinary step-to-step change of E_tot sets the tolerance.
	var jumps []float64
	for i := 1; i < len(a.etot); i++ {
		jumps = append(jumps, math.Abs(a.etot[i]-a.etot[i-1]))
	}
	tol := math.Max(10*percentile(jumps, 99), 1e-6)
	accepted, frustrated, badAcc, badFr, unchecked := 0, 0, 0, 0, 0
	firstBad := int64(-1)
	for _, h := range hops {
		if h.Frustrated {
			frustrated++
		} else {
			accepted++
		}
		f, ok := frame[h.Step]
		if !ok || f == 0 || a.etot == nil {
			unchecked++
			continue
		}
		if !h.Frustrated {
			if math.Abs(a.etot[f]-a.etot[f-1]) > tol {
				badAcc++
				if firstBad < 0 {
					firstBad = h.Step
				}
			}
		} else if se != nil && h.To < S && h.From < S {
			if se[f*S+h.To]-se[f*S+h.From] <= 0 {
				badFr++
				if firstBad < 0 {
					firstBad = h.Step
				}
			}
		}
	}
	frac := 0.0
	if accepted+frustrated > 0 {
		frac = float64(frustrated) / float64(accepted+frustrated)
	}
	vals := map[string]float64{"accepted": float64(accepted), "frustrated": float64(frustrated), "frustrated_fraction": frac,
		"accepted_violating_energy": float64(badAcc), "frustrated_but_allowed": float64(badFr), "unchecked": float64(unchecked), "tolerance_eV": tol * hartreeEV}
	v := OK
	if badAcc+badFr > 0 {
		v = Fail
	} else if unchecked > 0 {
		v = Unknown
	}
	msg := "%d accepted and %d frustrated hops (%.0f %% frustrated); %d accepted hops change the total energy, %d frustrated hops were downhill"
	if firstBad >= 0 {
		msg += "; first at step %d"
		a.add("hops", v, vals, msg, accepted, frustrated, 100*frac, badAcc, badFr, firstBad)
		return
	}
	if unchecked > 0 {
		msg += fmt.Sprintf("; %d hops fall between stored frames and were not checked", unchecked)
	}
	a.add("hops", v, vals, msg, accepted, frustrated, 100*frac, badAcc, badFr)
}
