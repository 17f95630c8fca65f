package audit

import (
	"fmt"
	"math"
	"sort"
	"strings"

	"trajvault/internal/trajfile"
)

// hopWindow is the number of frames on each side of a hop whose ordinary
// step-to-step energy changes set that hop's tolerance.
const hopWindow = 10

// hopTolFactor times the largest ordinary change in the window is the
// most an accepted hop may change E_tot. For Gaussian step errors the
// largest of 20 is about 2.2 sigma, so the tolerance sits near 6.6 sigma:
// a correct hop passes with odds of about 1e-10 (derived).
const hopTolFactor = 3

// hopGapFraction: where the gap is known, an accepted hop violates the
// bookkeeping only when its energy change also exceeds this fraction of
// its own gap, i.e. lies nearer a missing rescaling (a change of the
// whole gap) than a kept energy (no change). Integration errors at a hop
// step in a crossing region can exceed the ordinary steps around them
// (on the demo model at 0.2 fs steps up to 2.4-fold, at 12 % of the gap)
// without any bookkeeping fault; rescaling errors below half the gap go
// unseen in exchange.
const hopGapFraction = 0.5

// hopGapFractionBetween replaces hopGapFraction for a hop whose own step
// is not stored (frames kept every k-th step): its gap is known only at
// the stored frames around it, and hops sit near the seam where the gap
// is smallest, so the smaller of the two stored gaps can be several times
// the hop's own (3-8 times on the demo model at 10-step storage). There
// an accepted hop violates the bookkeeping when its change has the sign
// of the gap and exceeds this fraction of the smaller stored gap.
// Measured on the demo model (hop-rich, 10- and 20-step storage,
// 1072 rescaled and 461 unrescaled hops): rescaled hops change E_tot by
// at most 0.083 of that gap, unrescaled ones alone in their interval by
// at least 0.22 of it.
const hopGapFractionBetween = 0.15

// hopSteps lists at most this many steps in a summary line.
const hopSteps = 5

// hops checks the energy bookkeeping of every logged hop attempt, one hop
// at a time. With velocity rescaling (a = sum |u_i|^2/(2 m_i),
// b = sum v_i.u_i, allowed iff b^2 >= 4 a dV) an accepted hop keeps
// K + V, so E_tot changes across the hop frame no more than across the
// ordinary frames around it; a hop that keeps the velocities changes it
// by the gap dV = V_to - V_from (derived; fewest switches: J. Chem. Phys.
// 93, 1061 (1990), doi:10.1063/1.459170).
//
// The tolerance of each hop is hopTolFactor times the largest |dE| over
// the hopWindow frames on either side that carry no hop and no change of
// the active state, so the hops never inflate their own tolerance; where
// the state energies are stored the change must also exceed
// hopGapFraction of the hop's own gap. A hop whose gap is below its
// tolerance could not show a missing rescaling and is counted as
// undecidable, as is one whose frames are not stored or that shares its
// stored frame interval with another accepted hop.
//
// A frustrated hop must have been energetically forbidden: a downhill one
// (V_to <= V_from) never is. Whether an uphill one had enough kinetic
// energy along the coupling vector needs that vector, which the layout
// does not store; those are counted as undecidable.
func (a *auditor) hops(*derived) (Check, string) {
	const path = trajfile.HopsGroup
	S := a.r.States
	if S == 0 {
		return result(NA, nil, "no electronic states stored"), path
	}
	hops, err := a.r.Hops()
	switch {
	case err != nil:
		return result(NA, nil, "the hop log cannot be read: %v", err), path
	case hops == nil:
		return result(NA, nil, "no hop log stored"), path
	case a.etot == nil:
		return result(NA, nil, "needs the total or potential energy to judge hops"), path
	}
	se := a.se
	T := len(a.etot)
	frameOf := stepFrames(a.r.Steps)
	// Frames whose energy change includes a hop attempt or a change of
	// the active state are not ordinary.
	special := make([]bool, T)
	for _, h := range hops {
		if f := frameOf(h.Step); f > 0 && f < T {
			special[f] = true
		}
	}
	act := a.res.Active
	for i := 1; i < len(act) && i < T; i++ {
		if act[i] != act[i-1] {
			special[i] = true
		}
	}
	// Accepted hops sharing one stored frame interval cannot be told
	// apart: an unrescaled hop up and one back down cancel.
	perFrame := map[int]int{}
	for _, h := range hops {
		if !h.Frustrated {
			perFrame[frameOf(h.Step)]++
		}
	}
	tolAt := func(f int) float64 {
		worst, n := 0.0, 0
		for i := max(1, f-hopWindow); i <= min(T-1, f+hopWindow); i++ {
			if !special[i] {
				worst = math.Max(worst, math.Abs(a.etot[i]-a.etot[i-1]))
				n++
			}
		}
		if n == 0 {
			return math.NaN()
		}
		// Rounding of the stored energies: a few units in the last place.
		return math.Max(hopTolFactor*worst, 8*math.Abs(a.etot[f])*0x1p-52)
	}
	var (
		accepted, frustrated, badFr, undecidable, matchGap int
		bad                                                []int64
		worstRatio                                         float64
	)
	for _, h := range hops {
		if h.Frustrated {
			frustrated++
		} else {
			accepted++
		}
		f := frameOf(h.Step)
		if f <= 0 || f >= T || h.From < 0 || h.From >= S || h.To < 0 || h.To >= S {
			undecidable++
			continue
		}
		gap, frac, between := math.NaN(), hopGapFraction, a.r.Steps[f] != h.Step
		if se != nil {
			gap = se[f*S+h.To] - se[f*S+h.From]
			if between {
				frac = hopGapFractionBetween
				// The hop's own step is not stored: its gap lies near
				// those of the frames around it; take the smaller.
				if g := se[(f-1)*S+h.To] - se[(f-1)*S+h.From]; math.Abs(g) < math.Abs(gap) {
					gap = g
				}
			}
		}
		if h.Frustrated {
			switch {
			case math.IsNaN(gap):
				undecidable++
			case gap <= 0:
				badFr++
				bad = append(bad, h.Step)
			default:
				undecidable++ // needs the coupling vector
			}
			continue
		}
		tol := tolAt(f)
		if math.IsNaN(tol) || perFrame[f] > 1 {
			undecidable++
			continue
		}
		change := a.etot[f] - a.etot[f-1]
		switch {
		case math.Abs(change) > tol && (math.IsNaN(gap) || math.Abs(change) > frac*math.Abs(gap) && (!between || change*gap > 0)):
			bad = append(bad, h.Step)
			worstRatio = math.Max(worstRatio, math.Abs(change)/tol)
			if !math.IsNaN(gap) && math.Abs(change-gap) <= math.Max(tol, 0.1*math.Abs(gap)) {
				matchGap++
			}
		case !math.IsNaN(gap) && math.Abs(gap) <= tol:
			undecidable++ // a missing rescaling would not stand out
		case math.Abs(change) > tol && between:
			undecidable++ // beyond the ordinary, below a gap only estimated
		}
	}
	a.res.HopsAccepted, a.res.HopsFrustrated = accepted, frustrated
	badAcc := len(bad) - badFr
	sort.Slice(bad, func(i, j int) bool { return bad[i] < bad[j] })
	frac, badFrac := 0.0, 0.0
	if n := accepted + frustrated; n > 0 {
		frac = float64(frustrated) / float64(n)
	}
	if accepted > 0 {
		badFrac = float64(badAcc) / float64(accepted)
	}
	vals := map[string]float64{"accepted": float64(accepted), "frustrated": float64(frustrated), "frustrated_fraction": frac,
		"accepted_violating_energy": float64(badAcc), "violating_fraction": badFrac, "violating_matching_gap": float64(matchGap),
		"frustrated_but_allowed": float64(badFr), "undecidable": float64(undecidable)}
	if badAcc > 0 {
		vals["worst_change_over_tolerance"] = worstRatio
	}
	head := fmt.Sprintf("%d accepted and %d frustrated hops (%.0f %% frustrated)", accepted, frustrated, 100*frac)
	tail := ""
	if undecidable > 0 {
		tail = fmt.Sprintf("; %d hops cannot be judged (not stored, several between two frames, gap below the tolerance, or frustrated uphill without the coupling vector)", undecidable)
	}
	if len(bad) > 0 {
		msg := head
		if badAcc > 0 {
			msg += fmt.Sprintf("; %d accepted hops (%.0f %%) change the total energy beyond the ordinary steps around them", badAcc, 100*badFrac)
			if matchGap > 0 {
				msg += fmt.Sprintf(", %d of them by the gap (velocities not rescaled)", matchGap)
			}
		}
		if badFr > 0 {
			msg += fmt.Sprintf("; %d frustrated hops were downhill", badFr)
		}
		c := result(Fail, vals, "%s, at steps %s%s", msg, stepList(bad), tail)
		c.Steps = bad
		return c, path
	}
	v := OK
	if accepted+frustrated > 0 && undecidable == accepted+frustrated {
		v = Unknown
	}
	return result(v, vals, "%s; every hop judged keeps the total energy and no frustrated hop was downhill%s", head, tail), path
}

// stepFrames returns a function from an integration step to the first
// stored frame at or after it (-1 when none): the frame whose energy
// change includes that step. Steps out of order fall back to exact
// matches.
func stepFrames(steps []int64) func(int64) int {
	sorted := sort.SliceIsSorted(steps, func(i, j int) bool { return steps[i] < steps[j] })
	if sorted {
		return func(s int64) int {
			i := sort.Search(len(steps), func(i int) bool { return steps[i] >= s })
			if i == len(steps) {
				return -1
			}
			return i
		}
	}
	at := map[int64]int{}
	for i, s := range steps {
		if _, ok := at[s]; !ok {
			at[s] = i
		}
	}
	return func(s int64) int {
		if i, ok := at[s]; ok {
			return i
		}
		return -1
	}
}

// stepList prints the first hopSteps steps and how many more.
func stepList(s []int64) string {
	var b strings.Builder
	for i, x := range s {
		if i == hopSteps {
			fmt.Fprintf(&b, " and %d more", len(s)-hopSteps)
			break
		}
		if i > 0 {
			b.WriteString(", ")
		}
		fmt.Fprint(&b, x)
	}
	return b.String()
}
