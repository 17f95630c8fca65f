package compare

import (
	"fmt"
	"math"

	"trajvault/internal/trajfile"
	"trajvault/internal/units"
)

// Pair verdicts.
const (
	Identical = "identical within printed precision"
	Diverged  = "same, then diverged"
	Setup     = "different from the start"
)

// QuantityDiff is where one quantity of a pair first differs by more than
// the printed precision of either side.
type QuantityDiff struct {
	Name string `json:"name"`
	// Frame is the index of the first differing common frame; nil when
	// the quantity agrees throughout.
	Frame *int     `json:"first_frame,omitempty"`
	Time  *float64 `json:"first_time_fs,omitempty"`
	// MaxDiff is the largest |a - b| over the common frames, in Unit.
	MaxDiff float64 `json:"max_difference"`
	Unit    string  `json:"unit,omitempty"`
	// Precision says what "printed precision" was for A and B: a format
	// such as fixed:6, or "binary" when none was recorded (then a few
	// units in the last place of float64).
	Precision [2]string `json:"precision"`
	// Only names the side that has the quantity when one lacks it.
	Only string `json:"only_in,omitempty"`
}

// HopDiff is the first differing hop of a pair.
type HopDiff struct {
	Index int         `json:"index"`
	A     *HopAttempt `json:"a,omitempty"`
	B     *HopAttempt `json:"b,omitempty"`
	TimeA *float64    `json:"time_a_fs,omitempty"`
	TimeB *float64    `json:"time_b_fs,omitempty"`
}

// HopAttempt is one hop attempt as stored (states count from 0).
type HopAttempt struct {
	Step       int64 `json:"step"`
	From       int   `json:"from"`
	To         int   `json:"to"`
	Frustrated bool  `json:"frustrated"`
}

func attempt(h *trajfile.Hop) *HopAttempt {
	if h == nil {
		return nil
	}
	return &HopAttempt{h.Step, h.From, h.To, h.Frustrated}
}

// Point is one point of the divergence curve.
type Point struct {
	Time float64 `json:"time_fs"`
	RMS  float64 `json:"rms_angstrom"`
}

// Pair is the comparison of two trajectories: of the same name, or, when
// names differ, of the same initial conditions.
type Pair struct {
	Name string `json:"name"`
	// NameB is B's name when it differs from A's (matched by initial
	// conditions or as the only trajectory of each side).
	NameB string `json:"name_b,omitempty"`
	// MatchedBy says how the pair was found: ByName, ByStart, BySingle.
	MatchedBy string `json:"matched_by"`
	A         string `json:"a"`
	B         string `json:"b"`
	Frames    int    `json:"common_frames"`
	Verdict   string `json:"verdict"`
	Reason    string `json:"reason"`
	// SameUntil is the last common time (fs) at which every position
	// agrees within printed precision; nil when the first frame differs.
	SameUntil *float64 `json:"same_until_fs,omitempty"`
	// InitialRMS is the RMS position difference at the first common
	// frame (angstrom).
	InitialRMS float64 `json:"initial_rms_angstrom"`
	// ThresholdTime is when the RMS difference first reaches Threshold
	// (fs); nil when it never does.
	Threshold     float64  `json:"threshold_angstrom"`
	ThresholdTime *float64 `json:"threshold_time_fs,omitempty"`
	// Rate is the fitted exponential growth rate (1/fs) of the RMS
	// difference over Window, with the R^2 of the fit of ln d(t).
	Rate   *float64   `json:"growth_rate_per_fs,omitempty"`
	R2     *float64   `json:"growth_r2,omitempty"`
	Window [2]float64 `json:"growth_window_fs"`
	// Extrapolated is the fitted RMS difference at the first common frame
	// (angstrom): round-off size for chaotic growth from round-off.
	Extrapolated *float64       `json:"extrapolated_initial_angstrom,omitempty"`
	Quantities   []QuantityDiff `json:"quantities"`
	FirstHop     *HopDiff       `json:"first_hop_difference,omitempty"`
	// FirstActive is the first common time (fs) at which the active
	// states differ.
	FirstActive *float64 `json:"first_active_difference_fs,omitempty"`
	Curve       []Point  `json:"divergence"`
}

func ptr[T any](v T) *T { return &v }

func perAtom(el string) bool {
	return el == trajfile.Position || el == trajfile.Velocity || el == trajfile.Force
}

// quantities compared per pair, in report order: per-atom elements by
// name, the rest by path.
var pairElements = []struct{ name, el string }{
	{"position", trajfile.Position}, {"velocity", trajfile.Velocity}, {"force", trajfile.Force},
	{"kinetic_energy", trajfile.KineticEnergy}, {"potential_energy", trajfile.PotentialEnergy},
	{"total_energy", trajfile.TotalEnergy}, {"state_energies", trajfile.StateEnergies},
	{"populations", trajfile.Populations}, {"amplitudes", trajfile.Amplitudes},
	{"couplings", trajfile.Couplings}, {"active_state", trajfile.ActiveState},
}

// matchFrames pairs the frames of a and b at equal times (merge join of
// two increasing sequences, times within 1e-6 of the smaller frame
// spacing).
func matchFrames(a, b []float64) (ia, ib []int) {
	tol := math.Inf(1)
	for _, t := range [][]float64{a, b} {
		for i := 1; i < len(t); i++ {
			if d := t[i] - t[i-1]; d > 0 && d < tol {
				tol = d
			}
		}
	}
	if math.IsInf(tol, 1) {
		tol = 1
	}
	tol *= 1e-6
	i, j := 0, 0
	for i < len(a) && j < len(b) {
		switch d := a[i] - b[j]; {
		case math.Abs(d) <= tol:
			ia = append(ia, i)
			ib = append(ib, j)
			i++
			j++
		case d < 0:
			i++
		default:
			j++
		}
	}
	return ia, ib
}

// block is how many matched frames are read at once.
const block = 256

// walk calls fn for every matched frame k with the values of e in A and
// B as stored, reading both files in blocks (memory is one block, not
// the run).
func walk(ra, rb *trajfile.Reader, ea, eb *trajfile.Element, ia, ib []int, fn func(k int, a, b []float64)) error {
	wa, wb := ea.Width(), eb.Width()
	for k0 := 0; k0 < len(ia); k0 += block {
		k1 := min(len(ia), k0+block)
		va, err := ra.Raw(ea, ia[k0], ia[k1-1]-ia[k0]+1)
		if err != nil {
			return fmt.Errorf("%s: %w", ra.Path, err)
		}
		vb, err := rb.Raw(eb, ib[k0], ib[k1-1]-ib[k0]+1)
		if err != nil {
			return fmt.Errorf("%s: %w", rb.Path, err)
		}
		for k := k0; k < k1; k++ {
			oa, ob := (ia[k]-ia[k0])*wa, (ib[k]-ib[k0])*wb
			fn(k, va[oa:oa+wa], vb[ob:ob+wb])
		}
	}
	return nil
}

// tolerance is the printed precision of value v stored with element e:
// one unit in the last printed place (fixed: 10^-D; exponent: |v|
// 10^-(S-1)), with 1e-6 relative slack for the decoding of scale-offset
// storage; without a recorded format, 4 units in the last place of
// float64 (binary data compared as binary).
func tolerance(e *trajfile.Element, v float64) float64 {
	if !e.Exact {
		return 4 * math.Abs(v) * 0x1p-52
	}
	if e.Format.Exp {
		return math.Abs(v) * math.Pow10(-(e.Format.Sig - 1)) * (1 + 1e-6)
	}
	return e.Format.Step() * (1 + 1e-6)
}

func precisionName(e *trajfile.Element) string {
	if !e.Exact {
		return "binary"
	}
	return e.Format.String()
}

// pairTimes converts a reader's frame times to fs.
func timesFS(r *trajfile.Reader) []float64 {
	f, _ := units.Factor("au_time", "fs")
	out := make([]float64, len(r.Times))
	for i, t := range r.Times {
		out[i] = t * f
	}
	return out
}

// comparePair compares two open trajectories.
func comparePair(name string, ra, rb *trajfile.Reader, s Settings) (*Pair, error) {
	p := &Pair{Name: name, A: ra.Path, B: rb.Path, Threshold: s.Threshold, Quantities: []QuantityDiff{}, Curve: []Point{}}
	ta, tb := timesFS(ra), timesFS(rb)
	ia, ib := matchFrames(ta, tb)
	p.Frames = len(ia)
	if len(ia) == 0 {
		p.Verdict, p.Reason = Setup, "no frame time is common to both runs"
		return p, nil
	}
	if ra.N != rb.N {
		p.Verdict, p.Reason = Setup, fmt.Sprintf("%d atoms in A, %d in B", ra.N, rb.N)
		return p, nil
	}
	// startBad names the first quantity that differs at the first common
	// frame by more than both printed precision and StartRelative of its
	// size: a setup difference, not round-off.
	startBad := ""
	for _, q := range pairElements {
		// Per-atom elements are read through each side's own group.
		el, elB := q.el, q.el
		if perAtom(q.el) {
			el, elB = ra.Particle(q.el), rb.Particle(q.el)
		}
		ea, err := ra.Element(el)
		if err != nil {
			return nil, fmt.Errorf("%s: %w", ra.Path, err)
		}
		eb, err := rb.Element(elB)
		if err != nil {
			return nil, fmt.Errorf("%s: %w", rb.Path, err)
		}
		switch {
		case ea == nil && eb == nil:
			continue
		case ea == nil:
			p.Quantities = append(p.Quantities, QuantityDiff{Name: q.name, Only: "B"})
			continue
		case eb == nil:
			p.Quantities = append(p.Quantities, QuantityDiff{Name: q.name, Only: "A"})
			continue
		}
		qd, bad, err := compareElement(q.name, ra, rb, ea, eb, ia, ib, ta, s)
		if err != nil {
			return nil, err
		}
		if bad && startBad == "" && q.name != "position" {
			startBad = q.name
		}
		p.Quantities = append(p.Quantities, *qd)
		if q.name == "position" {
			if qd.Frame == nil {
				p.SameUntil = ptr(ta[ia[len(ia)-1]])
			} else if *qd.Frame > 0 {
				p.SameUntil = ptr(ta[ia[*qd.Frame-1]])
			}
			if err := p.divergence(ra, rb, ea, eb, ia, ib, ta, s); err != nil {
				return nil, err
			}
		}
		if q.name == "active_state" && qd.Frame != nil {
			p.FirstActive = qd.Time
		}
	}
	if err := p.hops(ra, rb); err != nil {
		return nil, err
	}
	p.judge(startBad, s)
	return p, nil
}

// compareElement finds the first common frame where e differs beyond
// printed precision; bad reports a difference at the first frame larger
// than StartRelative of the values' size.
func compareElement(name string, ra, rb *trajfile.Reader, ea, eb *trajfile.Element, ia, ib []int, ta []float64, s Settings) (*QuantityDiff, bool, error) {
	qd := &QuantityDiff{Name: name, Unit: ea.Unit, Precision: [2]string{precisionName(ea), precisionName(eb)}}
	if ea.Width() != eb.Width() {
		// Other shapes (states, atoms): nothing to subtract; a setup
		// difference at the first frame.
		qd.Frame, qd.Time = ptr(0), ptr(ta[ia[0]])
		return qd, true, nil
	}
	f := 1.0
	if ea.Unit != eb.Unit {
		var err error
		if f, err = units.Factor(eb.Unit, ea.Unit); err != nil {
			return nil, false, fmt.Errorf("%s: %s in %q, %s in %q: %w", name, ra.Path, ea.Unit, rb.Path, eb.Unit, err)
		}
	}
	bad := false
	err := walk(ra, rb, ea, eb, ia, ib, func(k int, a, b []float64) {
		scale := 0.0
		worst := 0.0
		over := false
		for i := range a {
			x, y := a[i], b[i]*f
			d := math.Abs(x - y)
			if math.IsNaN(d) {
				d = math.Inf(1)
			}
			scale = math.Max(scale, math.Max(math.Abs(x), math.Abs(y)))
			worst = math.Max(worst, d)
			if d > math.Max(tolerance(ea, x), f*tolerance(eb, b[i])) {
				over = true
			}
		}
		qd.MaxDiff = math.Max(qd.MaxDiff, worst)
		if over && qd.Frame == nil {
			qd.Frame, qd.Time = ptr(k), ptr(ta[ia[k]])
			if k == 0 && worst > s.StartRelative*scale {
				bad = true
			}
		}
	})
	if math.IsInf(qd.MaxDiff, 1) {
		qd.MaxDiff = math.MaxFloat64 // JSON has no infinity; NaN seen
	}
	return qd, bad, err
}

// divergence computes the RMS position difference
//
//	d(t) = sqrt( (1/N) sum_i |r_i^A(t) - r_i^B(t)|^2 )
//
// (angstrom; no alignment: both runs share one frame of reference), the
// time it first reaches Threshold, and the exponential growth rate fitted
// to ln d(t) by least squares over the growth window: from the first
// frame where d exceeds Floor (10 printed units of position, at least
// 10 times the first frame's d) up to the first frame where it reaches
// the threshold. For chaotic dynamics d(t) ~ d0 exp(lambda t) there, with
// lambda the largest Lyapunov exponent of the motion (G. Benettin et al.,
// Meccanica 15, 9 (1980); common practice). The fit takes the running
// maximum of d over the window: d of a molecule swings with its
// vibrations by factors of a few within a period, and the envelope keeps
// those swings out of the rate and out of R^2 (our choice, measured on
// the demo model; see DefaultSettings).
func (p *Pair) divergence(ra, rb *trajfile.Reader, ea, eb *trajfile.Element, ia, ib []int, ta []float64, s Settings) error {
	fa, err := units.Factor(ea.Unit, "angstrom")
	if err != nil {
		return fmt.Errorf("%s: position unit %q: %w", ra.Path, ea.Unit, err)
	}
	fb, err := units.Factor(eb.Unit, "angstrom")
	if err != nil {
		return fmt.Errorf("%s: position unit %q: %w", rb.Path, eb.Unit, err)
	}
	d := make([]float64, len(ia))
	err = walk(ra, rb, ea, eb, ia, ib, func(k int, a, b []float64) {
		sum := 0.0
		for i := range a {
			x := a[i]*fa - b[i]*fb
			sum += x * x
		}
		d[k] = math.Sqrt(sum / float64(ra.N))
	})
	if err != nil {
		return err
	}
	for k, v := range d {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return fmt.Errorf("%s or %s: positions not finite at common frame %d (time %g fs); run trajvault validate on both", ra.Path, rb.Path, k, ta[ia[k]])
		}
	}
	p.InitialRMS = d[0]
	stride := max(1, (len(d)+MaxCurve-1)/MaxCurve)
	for k := 0; k < len(d); k += stride {
		p.Curve = append(p.Curve, Point{ta[ia[k]], d[k]})
	}
	prec := 0.0
	for _, e := range []*trajfile.Element{ea, eb} {
		if e.Exact && !e.Format.Exp {
			f := fa
			if e == eb {
				f = fb
			}
			prec = math.Max(prec, e.Format.Step()*f)
		}
	}
	floor := math.Max(10*prec, 10*d[0])
	if floor == 0 {
		floor = 1e-300
	}
	start, end := -1, len(d)
	for k, v := range d {
		if start < 0 && v > floor {
			start = k
		}
		if v >= s.Threshold {
			p.ThresholdTime = ptr(ta[ia[k]])
			end = k
			break
		}
	}
	if start < 0 || end-start < s.MinFitPoints {
		return nil
	}
	t := make([]float64, 0, end-start)
	y := make([]float64, 0, end-start)
	env := 0.0
	for k := start; k < end; k++ {
		env = math.Max(env, d[k])
		t = append(t, ta[ia[k]])
		y = append(y, env)
	}
	rate, icpt, r2 := expFit(t, y)
	p.Rate, p.R2 = ptr(rate), ptr(r2)
	p.Window = [2]float64{t[0], t[len(t)-1]}
	p.Extrapolated = ptr(math.Exp(icpt + rate*ta[ia[0]]))
	return nil
}

// hops finds the first hop attempt that differs (step, states, kind).
func (p *Pair) hops(ra, rb *trajfile.Reader) error {
	ha, err := ra.Hops()
	if err != nil {
		return fmt.Errorf("%s: %w", ra.Path, err)
	}
	hb, err := rb.Hops()
	if err != nil {
		return fmt.Errorf("%s: %w", rb.Path, err)
	}
	for i := 0; i < max(len(ha), len(hb)); i++ {
		var a, b *trajfile.Hop
		if i < len(ha) {
			a = &ha[i]
		}
		if i < len(hb) {
			b = &hb[i]
		}
		if a != nil && b != nil && *a == *b {
			continue
		}
		hd := &HopDiff{Index: i, A: attempt(a), B: attempt(b)}
		if a != nil {
			hd.TimeA = ptr(stepTime(ra, a.Step))
		}
		if b != nil {
			hd.TimeB = ptr(stepTime(rb, b.Step))
		}
		p.FirstHop = hd
		return nil
	}
	return nil
}

// stepTime is the time (fs) of step n, interpolated linearly between the
// frames' steps and times (hops happen between stored frames).
func stepTime(r *trajfile.Reader, n int64) float64 {
	f, _ := units.Factor("au_time", "fs")
	T := len(r.Steps)
	switch {
	case T == 0:
		return math.NaN()
	case T == 1 || r.Steps[T-1] == r.Steps[0]:
		return r.Times[0] * f
	}
	per := (r.Times[T-1] - r.Times[0]) / float64(r.Steps[T-1]-r.Steps[0])
	return (r.Times[0] + float64(n-r.Steps[0])*per) * f
}

// judge gives the pair its verdict.
func (p *Pair) judge(startBad string, s Settings) {
	// A quantity only one side has is listed, not counted against
	// agreement: there is nothing to compare.
	agree := p.FirstHop == nil
	for _, q := range p.Quantities {
		if q.Frame != nil {
			agree = false
		}
	}
	switch {
	case agree:
		p.Verdict, p.Reason = Identical, fmt.Sprintf("all %d common frames agree", p.Frames)
	case p.InitialRMS > s.RoundOff:
		p.Verdict = Setup
		p.Reason = fmt.Sprintf("positions differ by %.3g angstrom RMS at the first frame", p.InitialRMS)
	case startBad != "":
		p.Verdict, p.Reason = Setup, startBad+" differs at the first frame"
	case p.Rate == nil && p.FirstHop != nil:
		p.Verdict = Diverged
		p.Reason = "a hop differs; too few frames in the growth window to fit a rate"
	case p.Rate == nil:
		p.Verdict = Diverged
		p.Reason = "diverged; too few frames in the growth window to fit a rate"
	case *p.R2 < s.MinR2 || *p.Rate <= 0:
		p.Verdict = Setup
		p.Reason = fmt.Sprintf("the difference grows, but not exponentially (R^2 %.2f of ln d(t))", *p.R2)
	case *p.Extrapolated > s.RoundOff:
		p.Verdict = Setup
		p.Reason = fmt.Sprintf("exponential growth from %.2g angstrom at the start, above round-off (%.0g)", *p.Extrapolated, s.RoundOff)
	default:
		p.Verdict = Diverged
		p.Reason = fmt.Sprintf("exponential growth from round-off, rate %.3g/fs", *p.Rate)
	}
}
