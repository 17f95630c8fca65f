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

// hopSeamFraction replaces hopGapFraction for a hop whose own step is not
// stored (frames kept every k-th step): its own gap is unknown, and hops
// sit near the seam where the gap is smallest, so the stored frames
// around it can show gaps many times its own (3-30 times on the demo
// model at 10- and 20-step storage). The scale used instead is the
// smallest gap between the hop's two states over all stored frames of
// the run (pairSeam): the hop's own gap is at least the seam gap, and a
// run that passes the seam often stores frames near it. An accepted hop
// then violates the bookkeeping when its change has the sign of the gap,
// exceeds the tolerance and exceeds this fraction of that smallest gap.
// Measured on the demo model (8 seeds, 20000 steps, coupling scales
// 0.1, 0.3 and 1, 10- and 20-step storage; 6452 rescaled hops and 2262
// unrescaled ones alone in their interval): rescaled hops change E_tot by
// at most 0.19 of that gap, unrescaled ones by at least 0.72 of it.
// Half lies between, as hopGapFraction does for a hop's own gap. It
// assumes the stored frames sample the seam; where they never come near
// it, the smallest stored gap overstates the seam and hops go undecided.
const hopSeamFraction = 0.5

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
// hopGapFraction of the hop's own gap; for a hop between stored frames,
// whose own gap is unknown, hopSeamFraction of the smallest gap of its
// two states over the run, with the sign of the gap. A hop whose gap is
// below its tolerance could not show a missing rescaling and is counted
// as undecidable, as is one outside the stored frames. Accepted hops
// sharing one stored interval are judged together by their net change
// (which has no known sign: an unrescaled hop up and one down cancel in
// part): beyond both limits, at least one of them broke the energy and
// the interval fails with its steps listed together; within them, they
// are undecidable. Each reason for undecidable is counted
// (undecidableWhy).
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
	// apart: an unrescaled hop up and one back down may cancel. Their net
	// change is judged once for the interval.
	perFrame := map[int][]int64{}
	for _, h := range hops {
		if f := frameOf(h.Step); !h.Frustrated && f > 0 && f < T {
			perFrame[f] = append(perFrame[f], h.Step)
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
	seam := map[[2]int]float64{}
	pairSeam := func(i, j int) float64 {
		if se == nil {
			return math.NaN()
		}
		k := [2]int{min(i, j), max(i, j)}
		if g, ok := seam[k]; ok {
			return g
		}
		g := math.Inf(1)
		for f := 0; f < T; f++ {
			if d := math.Abs(se[f*S+j] - se[f*S+i]); !math.IsNaN(d) {
				g = math.Min(g, d)
			}
		}
		seam[k] = g
		return g
	}
	var (
		accepted, frustrated, badFr, undecidable, matchGap int
		bad                                                []int64
		worstRatio                                         float64
		// Intervals holding several accepted hops whose net change is
		// beyond both the ordinary and half the smallest gap: at least
		// one of their hops did not keep the energy.
		groups   [][]int64
		inGroups int
		why      = map[string]int{}
	)
	judged := map[int]bool{}
	for _, h := range hops {
		if h.Frustrated {
			frustrated++
		} else {
			accepted++
		}
		f := frameOf(h.Step)
		if f <= 0 || f >= T || h.From < 0 || h.From >= S || h.To < 0 || h.To >= S {
			undecidable++
			why["not_stored"]++
			continue
		}
		gap, between := math.NaN(), a.r.Steps[f] != h.Step
		if se != nil {
			gap = se[f*S+h.To] - se[f*S+h.From]
		}
		if h.Frustrated {
			switch {
			case math.IsNaN(gap):
				undecidable++
				why["no_state_energies"]++
			case gap <= 0:
				badFr++
				bad = append(bad, h.Step)
			default:
				undecidable++ // needs the coupling vector
				why["frustrated_uphill"]++
			}
			continue
		}
		tol := tolAt(f)
		if math.IsNaN(tol) {
			undecidable++
			why["no_ordinary_frames"]++
			continue
		}
		change := a.etot[f] - a.etot[f-1]
		if n := len(perFrame[f]); n > 1 {
			if judged[f] {
				continue // counted with the first hop of the interval
			}
			judged[f] = true
			// The net change of several hops has no known sign; the
			// smallest gap they could each have changed E_tot by is
			// the seam of their pair.
			g := pairSeam(h.From, h.To)
			if math.Abs(change) > tol && math.Abs(change) > hopSeamFraction*g {
				groups = append(groups, perFrame[f])
				inGroups += n
			} else {
				undecidable += n
				why["several_in_one_interval"] += n
			}
			continue
		}
		if between && se != nil {
			// The hop's own step is not stored: judge against the
			// smallest gap of its two states (hopSeamFraction), with
			// the sign of the gap at the frames around it.
			g := pairSeam(h.From, h.To)
			switch {
			case g <= tol:
				undecidable++
				why["gap_below_tolerance"]++
			case change*gap > 0 && math.Abs(change) > tol && math.Abs(change) > hopSeamFraction*g:
				bad = append(bad, h.Step)
				worstRatio = math.Max(worstRatio, math.Abs(change)/tol)
				if math.Abs(change) >= g-tol {
					matchGap++ // at least the seam gap: a whole gap
				}
			case math.Abs(change) > tol:
				undecidable++ // beyond the ordinary, below the gap
				why["change_below_gap"]++
			}
			continue
		}
		switch {
		case math.Abs(change) > tol && (math.IsNaN(gap) || math.Abs(change) > hopGapFraction*math.Abs(gap)):
			bad = append(bad, h.Step)
			worstRatio = math.Max(worstRatio, math.Abs(change)/tol)
			if !math.IsNaN(gap) && math.Abs(change-gap) <= math.Max(tol, 0.1*math.Abs(gap)) {
				matchGap++
			}
		case !math.IsNaN(gap) && math.Abs(gap) <= tol:
			undecidable++ // a missing rescaling would not stand out
			why["gap_below_tolerance"]++
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
	if len(groups) > 0 {
		vals["intervals_several_hops_violating"] = float64(len(groups))
		vals["hops_in_violating_intervals"] = float64(inGroups)
	}
	reasons := make([]string, 0, len(why))
	for r, n := range why {
		vals["undecidable_"+r] = float64(n)
		reasons = append(reasons, r)
	}
	sort.Strings(reasons)
	head := fmt.Sprintf("%d accepted and %d frustrated hops (%.0f %% frustrated)", accepted, frustrated, 100*frac)
	tail := ""
	if undecidable > 0 {
		var b strings.Builder
		for i, r := range reasons {
			if i > 0 {
				b.WriteString(", ")
			}
			fmt.Fprintf(&b, "%d %s", why[r], undecidableWhy[r])
		}
		tail = fmt.Sprintf("; %s cannot be judged: %s", hopCount(undecidable, ""), b.String())
	}
	if len(bad) > 0 || len(groups) > 0 {
		msg := head
		if badAcc > 0 {
			verb := "change"
			if badAcc == 1 {
				verb = "changes"
			}
			msg += fmt.Sprintf("; %s (%.0f %%) %s the total energy beyond the ordinary steps around them", hopCount(badAcc, "accepted"), 100*badFrac, verb)
			if matchGap > 0 {
				msg += fmt.Sprintf(", %d of them by the gap (velocities not rescaled)", matchGap)
			}
		}
		if badFr > 0 {
			verb := "were"
			if badFr == 1 {
				verb = "was"
			}
			msg += fmt.Sprintf("; %s %s downhill", hopCount(badFr, "frustrated"), verb)
		}
		if len(bad) == 1 {
			msg += ", at step " + stepList(bad)
		} else if len(bad) > 1 {
			msg += ", at steps " + stepList(bad)
		}
		if len(groups) > 0 {
			msg += fmt.Sprintf("; in %d stored intervals holding %d hops the net change exceeds the ordinary and half the smallest gap, so at least one hop of each breaks the energy (which one the frames cannot tell: steps %s)", len(groups), inGroups, groupList(groups))
		}
		c := result(Fail, vals, "%s%s", msg, tail)
		c.Steps = bad
		return c, path
	}
	v := OK
	if accepted+frustrated > 0 && undecidable == accepted+frustrated {
		v = Unknown
	}
	return result(v, vals, "%s; every hop judged keeps the total energy and no frustrated hop was downhill%s", head, tail), path
}

// undecidableWhy words each reason a hop cannot be judged, by the key of
// its count in the check's values (undecidable_KEY).
var undecidableWhy = map[string]string{
	"not_stored":              "outside the stored frames or naming no stored state",
	"no_state_energies":       "frustrated without state energies",
	"frustrated_uphill":       "frustrated uphill (needs the coupling vector)",
	"no_ordinary_frames":      "without ordinary frames near",
	"several_in_one_interval": "sharing a stored interval, net change within the limits",
	"gap_below_tolerance":     "with a gap below the tolerance",
	"change_below_gap":        "beyond the ordinary but below half the smallest gap",
}

// groupList prints the first hopSteps groups of steps as "a+b" and how
// many more.
func groupList(g [][]int64) string {
	return firstOf(len(g), func(b *strings.Builder, i int) {
		for j, s := range g[i] {
			if j > 0 {
				b.WriteString("+")
			}
			fmt.Fprint(b, s)
		}
	})
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
	return firstOf(len(s), func(b *strings.Builder, i int) { fmt.Fprint(b, s[i]) })
}

// firstOf prints the first hopSteps of n items, comma-separated, and
// how many more there are.
func firstOf(n int, item func(b *strings.Builder, i int)) string {
	var b strings.Builder
	for i := range n {
		if i == hopSteps {
			fmt.Fprintf(&b, " and %d more", n-hopSteps)
			break
		}
		if i > 0 {
			b.WriteString(", ")
		}
		item(&b, i)
	}
	return b.String()
}

// hopCount is "1 accepted hop" or "3 accepted hops" (kind may be empty).
func hopCount(n int, kind string) string {
	w := "hops"
	if n == 1 {
		w = "hop"
	}
	if kind != "" {
		return fmt.Sprintf("%d %s %s", n, kind, w)
	}
	return fmt.Sprintf("%d %s", n, w)
}
