package audit

import (
	"fmt"
	"math"

	"trajvault/internal/trajfile"
)

// loadElectronic reads the electronic data the populations and hop
// checks share: |c_k|^2 from the amplitudes (else the stored
// populations), the active state and the couplings.
func (a *auditor) loadElectronic() error {
	r := a.r
	if r.States == 0 {
		return nil
	}
	var err error
	if r.Has(trajfile.Amplitudes) {
		// The amplitudes (2 S values per frame) are read again by
		// hop-probability, the one check that needs them: only |c_k|^2
		// stays while the other checks run.
		amps, _, err := r.Values(trajfile.Amplitudes, "")
		if err != nil {
			return err
		}
		a.hasAmps = amps != nil
		a.pops = make([]float64, len(amps)/2)
		for i := range a.pops {
			re, im := amps[2*i], amps[2*i+1]
			a.pops[i] = re*re + im*im
		}
	} else if r.Has(trajfile.Populations) {
		if a.pops, _, err = r.Values(trajfile.Populations, ""); err != nil {
			return err
		}
	}
	if r.Has(trajfile.ActiveState) {
		act, _, err := r.Values(trajfile.ActiveState, "")
		if err != nil {
			return err
		}
		a.res.Active = make([]int64, len(act))
		for i, x := range act {
			a.res.Active[i] = int64(x)
		}
	}
	if r.Has(trajfile.StateEnergies) {
		// Unreadable state energies cost the per-hop gap and the
		// force-noise gap filter, which say why.
		a.se, _, a.seErr = r.Values(trajfile.StateEnergies, "hartree")
		if a.seErr == nil && len(a.se) < r.T*r.States {
			a.se, a.seErr = nil, fmt.Errorf("state energies cover fewer frames than the positions")
		}
	}
	return nil
}

// populationsPath is the stored quantity populations are taken from.
func (a *auditor) populationsPath() string {
	if a.r.Has(trajfile.Amplitudes) {
		return trajfile.Amplitudes
	}
	return trajfile.Populations
}

// populations: sum_k |c_k|^2 = 1 and each in [0, 1].
func (a *auditor) populations(*derived) (Check, string) {
	path, S := a.populationsPath(), a.r.States
	if S == 0 {
		return result(NA, nil, "no electronic states stored"), path
	}
	if a.pops == nil {
		return result(NA, nil, "no populations or amplitudes stored"), path
	}
	if len(a.pops) < a.r.T*S {
		return result(NA, nil, "populations cover fewer frames than the positions"), path
	}
	p := a.pops
	worstNorm, worstFrame, outOfRange := 0.0, 0, 0
	// One flat series for the ensemble (no slice header per frame).
	a.res.pops, a.res.states = p[:a.r.T*S], S
	for t := 0; t < a.r.T; t++ {
		row := p[t*S : (t+1)*S]
		sum := 0.0
		for _, x := range row {
			sum += x
			if !(x >= -1e-9 && x <= 1+1e-9) { // NaN too
				outOfRange++
			}
		}
		if d := math.Abs(sum - 1); d > worstNorm || math.IsNaN(d) && !math.IsNaN(worstNorm) {
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
	if v == OK {
		return result(v, vals, "populations sum to 1 within %.2g (worst at frame %d); none outside [0,1]", worstNorm, worstFrame), path
	}
	// A failure states the failure (issue 13: "sum to 1 within 0.02" was
	// printed on a fail).
	return result(v, vals, "populations do not sum to 1: off by up to %.2g (frame %d, tolerance %g); %d values outside [0,1]", worstNorm, worstFrame, a.s.NormTolerance, outOfRange), path
}

// hopProbability recomputes fewest-switches probabilities from the stored
// amplitudes and time-derivative couplings T_jk = <j|d/dt k>:
//
//	g_kj = max(0, -2 dt Re(c_j^* T_jk c_k) / |c_k|^2)
//
// (J. Chem. Phys. 93, 1061 (1990), doi:10.1063/1.459170, in the
// time-derivative form). sum_j g_kj > 1 means the step is too large for
// the coupling.
func (a *auditor) hopProbability(*derived) (Check, string) {
	const path = trajfile.Couplings
	S := a.r.States
	amp, cpl, ampErr, cplErr := a.hopInputs()
	switch {
	case S == 0:
		return result(NA, nil, "no electronic states stored"), path
	case !a.hasAmps:
		return result(NA, nil, "needs complex amplitudes"), path
	case ampErr != nil:
		return result(NA, nil, "amplitudes cannot be read again: %v", ampErr), path
	case cplErr != nil:
		return result(NA, nil, "couplings cannot be read: %v", cplErr), path
	case cpl == nil:
		return result(NA, nil, "no time-derivative couplings stored"), path
	case a.res.Active == nil:
		return result(NA, nil, "no active state stored"), path
	case len(cpl) < a.r.T*S*S || len(amp) < 2*a.r.T*S || len(a.res.Active) < a.r.T:
		return result(NA, nil, "amplitudes, couplings and active state cover different frames"), path
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
	return result(v, map[string]float64{"max_total_probability": worst, "frame": float64(worstFrame)},
		"recomputed fewest-switches hop probability per step at most %.3g (frame %d); above 1 the step is too large for the coupling", worst, worstFrame), path
}

// hopInputs reads the amplitudes and couplings for hop-probability
// alone; they are dropped when it ends (S^2 + 2 S values per frame
// that no other check needs). Unreadable couplings cost only
// hop-probability, which says why.
func (a *auditor) hopInputs() (amp, cpl []float64, ampErr, cplErr error) {
	r := a.r
	if r.States == 0 || !a.hasAmps {
		return nil, nil, nil, nil
	}
	if amp, _, ampErr = r.Values(trajfile.Amplitudes, ""); ampErr != nil {
		return nil, nil, ampErr, nil
	}
	if r.Has(trajfile.Couplings) {
		cpl, _, cplErr = r.Values(trajfile.Couplings, "au_time-1")
	}
	return amp, cpl, nil, cplErr
}

func complexConj(c complex128) complex128 { return complex(real(c), -imag(c)) }
