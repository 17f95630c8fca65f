// Package compare audits whether a rerun reproduces an archived run: the
// setup of both first (program, version, method, time step, states,
// units, constants), then each pair of trajectories, matched by name or,
// where names differ, by initial conditions (first difference beyond
// printed precision, divergence curve with an exponential growth rate,
// first differing hop), then the two ensembles as samples (active-state
// fractions and mean |c|^2 over time, first hop times, final states)
// with a multiple-testing-aware verdict.
//
// Chaotic dynamics make two correct runs with different round-off
// diverge exponentially, and stochastic hopping makes single trajectories
// incomparable once one random number differs; so a pair is judged by
// how it diverges, and agreement of ensembles by statistics.
package compare

import (
	"context"
	"fmt"
	"math"
	"os"
	"slices"
	"sort"

	"trajvault/ingest"
	"trajvault/internal/finding"
	"trajvault/internal/trajfile"
	"trajvault/internal/units"
)

// Settings are the thresholds of the comparison. DefaultSettings
// documents the defaults.
type Settings struct {
	// Threshold is the RMS position difference (angstrom) whose first
	// crossing is reported, and the top of the growth-rate window.
	Threshold float64
	// RoundOff (angstrom) is the largest RMS position difference at the
	// first frame, or extrapolated back to it, that counts as round-off;
	// above it a pair is "different from the start".
	RoundOff float64
	// StartRelative: any other quantity differing at the first frame by
	// more than this fraction of its size marks a setup difference.
	StartRelative float64
	// MinR2 is the smallest R^2 of the fit of ln d(t) accepted as
	// exponential growth; MinFitPoints the fewest frames to fit.
	MinR2        float64
	MinFitPoints int
	// Alpha is the family-wise significance level of the ensemble tests,
	// Power the power at which the detectable difference is quoted, Z the
	// normal quantile of the Wilson bands.
	Alpha, Power, Z float64
	// TestTimes is the number of times at which active-state fractions
	// are tested.
	TestTimes int
	// MinTrajectories: smaller ensembles are "too few to tell"; so are
	// ensembles whose detectable difference exceeds Margin.
	MinTrajectories int
	Margin          float64
}

// DefaultSettings: a threshold of 0.01 angstrom stays well below the
// saturation of the divergence (bond lengths); round-off in double
// precision starts near 1e-15 relative, so 1e-6 angstrom leaves room
// for printed logs and a few steps of growth; MinR2 0.6 because the
// divergence of a small molecule oscillates with its vibrations and its
// finite-time rate wanders (at 0.9, 18 of 48 perturbed demo pairs were
// misjudged as setup differences, at 0.6 with the running-maximum fit 1
// of 48), while a setup difference is caught by its extrapolated start
// (every pair with the coupling scaled by 1.01); alpha 0.05 and power 0.8
// are common practice; 20 test times keep Holm's correction mild.
var DefaultSettings = Settings{
	Threshold: 0.01, RoundOff: 1e-6, StartRelative: 1e-6, MinR2: 0.6, MinFitPoints: 5,
	Alpha: 0.05, Power: 0.8, Z: 1.959963984540054, TestTimes: 20, MinTrajectories: 10, Margin: 0.5,
}

// Options of Run.
type Options struct {
	Settings
	// Convert are the conversion options for text logs given as A or B;
	// they are converted into a temporary folder, removed afterwards.
	Convert ingest.ConvertOptions
}

// Codes of compare's findings (finding.Finding.Code).
var Codes = map[string]string{
	"C1": "the setups differ (program, version, method, time step, states, units, constants)",
	"C2": "a pair of trajectories differs from the start (a setup difference)",
	"C3": "a pair of trajectories agrees, then diverges exponentially from round-off",
	"C4": "a trajectory has no partner on the other side, by name or by initial conditions",
	"C5": "the ensembles differ statistically",
	"C6": "too few trajectories to tell whether the ensembles agree",
}

// Overall verdicts.
const (
	AllIdentical = "identical"
	Reproduced   = "reproduced (pairs agree, then diverge as chaos does)"
	Agree        = "statistically equivalent"
	Differ       = "different"
	Unclear      = "too few trajectories to tell"
)

// SetupDiff is one difference of the two setups.
type SetupDiff struct {
	Item string `json:"item"`
	A    string `json:"a"`
	B    string `json:"b"`
}

// Report is the whole comparison.
type Report struct {
	A, B string `json:"-"`
	// FilesA and FilesB are the trajectory files compared (converted
	// copies for text logs, named as the logs).
	FilesA []string    `json:"files_a"`
	FilesB []string    `json:"files_b"`
	Setup  []SetupDiff `json:"setup_differences"`
	Pairs  []*Pair     `json:"pairs"`
	OnlyA  []string    `json:"only_in_a"`
	OnlyB  []string    `json:"only_in_b"`
	// Divergence summarises the pairs that diverged from round-off.
	Divergence *DivergenceSummary `json:"divergence_summary,omitempty"`
	Ensemble   *EnsembleResult    `json:"ensemble"`
	Findings   []finding.Finding  `json:"findings"`
	Verdict    string             `json:"verdict"`
	Settings   SettingsJSON       `json:"settings"`

	// ambiguous explains unmatched trajectories that start like several
	// on the other side ("A:name" or "B:name" -> why).
	ambiguous map[string]string
}

// SettingsJSON records the thresholds in the report.
type SettingsJSON struct {
	Threshold float64 `json:"threshold_angstrom"`
	RoundOff  float64 `json:"round_off_angstrom"`
	Alpha     float64 `json:"alpha"`
	Power     float64 `json:"power"`
	TestTimes int     `json:"test_times"`
}

// OK reports whether the runs agree: identical, reproduced or
// statistically equivalent.
func (r *Report) OK() bool {
	return r.Verdict == AllIdentical || r.Verdict == Reproduced || r.Verdict == Agree
}

// side is one resolved input: trajectory files by name.
type side struct {
	names []string
	files map[string]string // name -> path on disk, or member of an archive
	label map[string]string // name -> what to print (the source)
	// images hold the members of an archive, read into memory once.
	images map[string][]byte
}

// open opens trajectory name of the side.
func (s *side) open(name string) (*trajfile.Reader, error) {
	if img, ok := s.images[name]; ok {
		return trajfile.OpenReaderImage(s.label[name], img)
	}
	return trajfile.OpenReader(s.files[name])
}

// Run compares A and B (trajectory files, folders of them, bundle
// folders or archives, or text logs).
func Run(ctx context.Context, a, b string, o Options) (*Report, error) {
	tmp, err := os.MkdirTemp("", "trajvault-compare-")
	if err != nil {
		return nil, err
	}
	defer os.RemoveAll(tmp)
	sa, err := resolve(ctx, a, tmp+"/a", o.Convert)
	if err != nil {
		return nil, err
	}
	sb, err := resolve(ctx, b, tmp+"/b", o.Convert)
	if err != nil {
		return nil, err
	}
	s := o.Settings
	rep := &Report{A: a, B: b, Setup: []SetupDiff{}, Pairs: []*Pair{}, OnlyA: []string{}, OnlyB: []string{},
		Settings: SettingsJSON{s.Threshold, s.RoundOff, s.Alpha, s.Power, s.TestTimes}}
	for _, n := range sa.names {
		rep.FilesA = append(rep.FilesA, sa.label[n])
	}
	for _, n := range sb.names {
		rep.FilesB = append(rep.FilesB, sb.label[n])
	}
	var list finding.List
	list.PerPlace = 5

	// 1. Setup first: the first file of each side.
	if rep.Setup, err = setupDiff(sa, sa.names[0], sb, sb.names[0]); err != nil {
		return nil, err
	}
	if rep.Setup == nil {
		rep.Setup = []SetupDiff{}
	}
	for _, d := range rep.Setup {
		list.Add(finding.Finding{Code: "C1", Severity: finding.Warning, Location: finding.Location{File: b},
			Quantity: d.Item, Message: fmt.Sprintf("%s differs: A %s, B %s", d.Item, d.A, d.B)})
	}

	// 2. Pairs by name; the rest by initial conditions; a single file on
	// each side pairs whatever its name.
	pairs, how := map[string]string{}, map[string]string{}
	var ambiguous map[string]string
	if len(sa.names) == 1 && len(sb.names) == 1 {
		pairs[sa.names[0]], how[sa.names[0]] = sb.names[0], BySingle
		if sa.names[0] == sb.names[0] {
			how[sa.names[0]] = ByName
		}
	} else {
		for _, n := range sa.names {
			if _, ok := sb.files[n]; ok {
				pairs[n], how[n] = n, ByName
			} else {
				rep.OnlyA = append(rep.OnlyA, n)
			}
		}
		for _, n := range sb.names {
			if _, ok := sa.files[n]; !ok {
				rep.OnlyB = append(rep.OnlyB, n)
			}
		}
		if len(rep.OnlyA) > 0 && len(rep.OnlyB) > 0 {
			m, amb, err := matchByStart(sa, rep.OnlyA, sb, rep.OnlyB)
			if err != nil {
				return nil, err
			}
			ambiguous = amb
			matchedB := map[string]bool{}
			for a, b := range m {
				pairs[a], how[a] = b, ByStart
				matchedB[b] = true
			}
			rep.OnlyA = slices.DeleteFunc(rep.OnlyA, func(n string) bool { _, ok := m[n]; return ok })
			rep.OnlyB = slices.DeleteFunc(rep.OnlyB, func(n string) bool { return matchedB[n] })
		}
	}
	for _, n := range sa.names {
		nb, ok := pairs[n]
		if !ok {
			continue
		}
		if err := ctx.Err(); err != nil {
			return nil, err
		}
		p, err := openPair(n, sa, n, sb, nb, s)
		if err != nil {
			return nil, err
		}
		p.A, p.B, p.MatchedBy = sa.label[n], sb.label[nb], how[n]
		if nb != n {
			p.NameB = nb
		}
		rep.Pairs = append(rep.Pairs, p)
	}
	rep.ambiguous = ambiguous
	rep.Divergence = summarize(rep.Pairs)

	// 3. Ensembles.
	ea, states, err := loadSide(ctx, sa)
	if err != nil {
		return nil, err
	}
	eb, sb2, err := loadSide(ctx, sb)
	if err != nil {
		return nil, err
	}
	rep.Ensemble = CompareEnsembles(ea, eb, max(states, sb2), s)
	rep.Verdict = overall(rep)
	rep.findings(&list)
	rep.Findings = list.Findings()
	if rep.Findings == nil {
		rep.Findings = []finding.Finding{}
	}
	return rep, nil
}

// findings records what the comparison found. A finding is an error when
// it decides a verdict other than agreement: pairs that differ from the
// start are errors unless the ensembles are judged as samples (then the
// pairs merely started from other initial conditions).
func (rep *Report) findings(list *finding.List) {
	sev := func(bad bool) finding.Severity {
		if bad && !rep.OK() {
			return finding.Error
		}
		return finding.Warning
	}
	// Pair findings are placed at B, so that many fold into one line.
	pairSetup := rep.Ensemble.Verdict != Equivalent && rep.Ensemble.Verdict != Different
	for _, p := range rep.Pairs {
		loc := finding.Location{File: rep.B}
		switch p.Verdict {
		case Setup:
			list.Add(finding.Finding{Code: "C2", Severity: sev(pairSetup), Location: loc, Message: p.Name + ": " + p.Reason})
		case Diverged:
			list.Add(finding.Finding{Code: "C3", Severity: finding.Note, Location: loc, Message: p.Name + ": " + p.Reason})
		}
	}
	why := func(key string) string {
		if w := rep.ambiguous[key]; w != "" {
			return " (" + w + ")"
		}
		return ""
	}
	for _, n := range rep.OnlyA {
		list.Add(finding.Finding{Code: "C4", Severity: finding.Warning, Location: finding.Location{File: rep.A},
			Message: "only in A: " + n + why("A:"+n)})
	}
	for _, n := range rep.OnlyB {
		list.Add(finding.Finding{Code: "C4", Severity: finding.Warning, Location: finding.Location{File: rep.B},
			Message: "only in B: " + n + why("B:"+n)})
	}
	e := rep.Ensemble
	switch e.Verdict {
	case Different:
		list.Add(finding.Finding{Code: "C5", Severity: finding.Error, Message: fmt.Sprintf(
			"ensembles differ: %s, p = %.2g after Holm's correction (alpha %g)", e.MinTest, e.MinP, rep.Settings.Alpha)})
	case TooFew:
		list.Add(finding.Finding{Code: "C6", Severity: sev(true), Message: fmt.Sprintf(
			"%d and %d trajectories: differences of active-state fractions below %.2f would go unnoticed; run more trajectories",
			e.NA, e.NB, e.Detectable)})
	}
}

// overall: the ensemble decides when it can; otherwise the pairs.
func overall(r *Report) string {
	identical, setup := len(r.Pairs) > 0, false
	for _, p := range r.Pairs {
		if p.Verdict != Identical {
			identical = false
		}
		if p.Verdict == Setup {
			setup = true
		}
	}
	unmatched := len(r.OnlyA)+len(r.OnlyB) > 0
	switch {
	case identical && !unmatched:
		return AllIdentical
	case r.Ensemble.Verdict == Different:
		return Differ
	case r.Ensemble.Verdict == Equivalent:
		return Agree
	case len(r.Pairs) > 0 && !setup && !unmatched:
		return Reproduced
	case r.Ensemble.Verdict == TooFew:
		return Unclear
	}
	return Differ
}

// openBoth opens trajectory na of A and nb of B; close releases both.
func openBoth(a *side, na string, b *side, nb string) (ra, rb *trajfile.Reader, close func(), err error) {
	if ra, err = a.open(na); err != nil {
		return nil, nil, nil, err
	}
	if rb, err = b.open(nb); err != nil {
		ra.Close()
		return nil, nil, nil, err
	}
	return ra, rb, func() { ra.Close(); rb.Close() }, nil
}

func openPair(name string, a *side, na string, b *side, nb string, s Settings) (*Pair, error) {
	ra, rb, done, err := openBoth(a, na, b, nb)
	if err != nil {
		return nil, err
	}
	defer done()
	return comparePair(name, ra, rb, s)
}

// loadSide reads every trajectory of a side for the ensemble comparison.
func loadSide(ctx context.Context, s *side) ([]*Series, int, error) {
	var out []*Series
	states := 0
	for _, n := range s.names {
		if err := ctx.Err(); err != nil {
			return nil, 0, err
		}
		r, err := s.open(n)
		if err != nil {
			return nil, 0, err
		}
		se, err := loadSeries(n, r)
		states = max(states, r.States)
		r.Close()
		if err != nil {
			return nil, 0, fmt.Errorf("%s: %w", s.label[n], err)
		}
		out = append(out, se)
	}
	return out, states, nil
}

// loadSeries reads what the ensemble comparison needs of one file.
func loadSeries(name string, r *trajfile.Reader) (*Series, error) {
	s := &Series{Name: name, Times: timesFS(r), EnergySpread: math.NaN()}
	if r.Has(trajfile.ActiveState) {
		v, _, err := r.Values(trajfile.ActiveState, "")
		if err != nil {
			return nil, err
		}
		if len(v) != r.T {
			return nil, fmt.Errorf("%s: %d values for %d frames", trajfile.ActiveState, len(v), r.T)
		}
		s.Active = make([]int, len(v))
		for i, x := range v {
			if x != math.Trunc(x) || x < 0 || (r.States > 0 && int(x) >= r.States) {
				return nil, fmt.Errorf("%s, frame %d: active state %v outside 0..%d (n_states %d); run trajvault validate",
					trajfile.ActiveState, i, x, r.States-1, r.States)
			}
			s.Active[i] = int(x)
		}
	}
	if err := loadPopulations(s, r); err != nil {
		return nil, err
	}
	hops, err := r.Hops()
	if err != nil {
		return nil, err
	}
	for _, h := range hops {
		if !h.Frustrated && h.From != h.To {
			s.HopTimes = append(s.HopTimes, stepTime(r, h.Step))
		}
	}
	if r.Has(trajfile.TotalEnergy) {
		e, _, err := r.Values(trajfile.TotalEnergy, "eV")
		if err != nil {
			return nil, err
		}
		spread := 0.0
		for _, x := range e {
			spread = math.Max(spread, math.Abs(x-e[0]))
		}
		if len(e) > 0 {
			s.EnergySpread = spread
		}
	}
	return s, nil
}

// loadPopulations reads |c_k|^2 per frame: the stored populations, or,
// where only the amplitudes are stored, |c_k|^2 = Re^2 + Im^2 of them.
// Other shapes are left out (validate reports them); a value that is not
// finite is an error, as it would poison every mean.
func loadPopulations(s *Series, r *trajfile.Reader) error {
	var pop []float64
	w := 0
	switch {
	case r.Has(trajfile.Populations):
		v, shape, err := r.Values(trajfile.Populations, "")
		if err != nil {
			return err
		}
		if shape.Rank != 2 || shape.Dims[0] != r.T {
			return nil
		}
		pop, w = v, shape.Dims[1]
	case r.Has(trajfile.Amplitudes):
		v, shape, err := r.Values(trajfile.Amplitudes, "")
		if err != nil {
			return err
		}
		if shape.Rank != 3 || shape.Dims[0] != r.T || shape.Dims[2] != 2 {
			return nil
		}
		w = shape.Dims[1]
		pop = make([]float64, r.T*w)
		for i := range pop {
			pop[i] = v[2*i]*v[2*i] + v[2*i+1]*v[2*i+1]
		}
	default:
		return nil
	}
	for i, x := range pop {
		if math.IsNaN(x) || math.IsInf(x, 0) {
			return fmt.Errorf("populations, frame %d, state %d: %v; run trajvault validate", i/w, i%w+1, x)
		}
	}
	s.Populations = make([][]float64, r.T)
	for i := range s.Populations {
		s.Populations[i] = pop[i*w : (i+1)*w]
	}
	return nil
}

// setupDiff lists the differences of the two files' setups.
func setupDiff(a *side, na string, b *side, nb string) ([]SetupDiff, error) {
	ra, rb, done, err := openBoth(a, na, b, nb)
	if err != nil {
		return nil, err
	}
	defer done()
	sa, sb := ra.Setup(), rb.Setup()
	var out []SetupDiff
	add := func(item, a, b string) {
		if a != b {
			out = append(out, SetupDiff{item, a, b})
		}
	}
	add("program", sa.Creator+" "+sa.CreatorVersion, sb.Creator+" "+sb.CreatorVersion)
	add("time step", timeStep(sa), timeStep(sb))
	add("electronic states", fmt.Sprint(ra.States), fmt.Sprint(rb.States))
	add("atoms", fmt.Sprint(ra.Species), fmt.Sprint(rb.Species))
	add("masses (u)", masses(ra), masses(rb))
	out = append(out, diffMaps("parameter ", without(sa.Parameters), without(sb.Parameters))...)
	out = append(out, provenanceDiff(sa.Parameters[trajfile.ProvenanceAttr], sb.Parameters[trajfile.ProvenanceAttr])...)
	ua, ub := map[string]string{}, map[string]string{}
	for k, v := range sa.Units {
		ua[shortName(ra, k)] = v
	}
	for k, v := range sb.Units {
		ub[shortName(rb, k)] = v
	}
	out = append(out, diffMaps("unit of ", ua, ub)...)
	return out, nil
}

func shortName(r *trajfile.Reader, el string) string {
	for _, q := range pairElements {
		if el == q.el || (perAtom(q.el) && el == r.Particle(q.el)) {
			return q.name
		}
	}
	return el
}

func timeStep(s *trajfile.Setup) string {
	if s.TimeStep == 0 {
		return "not recorded"
	}
	if f, err := units.Factor(s.TimeStepUnit, "fs"); err == nil {
		return fmt.Sprintf("%.6g fs", s.TimeStep*f)
	}
	return fmt.Sprintf("%g %s", s.TimeStep, s.TimeStepUnit)
}

func masses(r *trajfile.Reader) string {
	f, _ := units.Factor("me", "u")
	out := make([]string, len(r.Masses))
	for i, m := range r.Masses {
		out[i] = fmt.Sprintf("%.6g", m*f)
	}
	return fmt.Sprint(out)
}

// perRun are /parameters attributes that differ between any two runs
// (the provenance record is compared field by field, provenanceDiff).
var perRun = map[string]bool{trajfile.ProvenanceAttr: true, "trajvault_sources": true}

func without(m map[string]string) map[string]string {
	out := map[string]string{}
	for k, v := range m {
		if !perRun[k] {
			out[k] = v
		}
	}
	return out
}

// diffMaps lists keys whose values differ, in key order.
func diffMaps(prefix string, a, b map[string]string) []SetupDiff {
	keys := map[string]bool{}
	for k := range a {
		keys[k] = true
	}
	for k := range b {
		keys[k] = true
	}
	var ks []string
	for k := range keys {
		ks = append(ks, k)
	}
	sort.Strings(ks)
	var out []SetupDiff
	for _, k := range ks {
		va, oka := a[k]
		vb, okb := b[k]
		switch {
		case !oka:
			va = "(none)"
		case !okb:
			vb = "(none)"
		}
		if va != vb {
			out = append(out, SetupDiff{prefix + k, va, vb})
		}
	}
	return out
}

// DivergenceSummary is the typical divergence of the pairs judged "same,
// then diverged" with a fitted rate: medians, because the finite-time
// growth rate of one pair of a small molecule varies by a factor of two
// from one window to the next (measured on the demo model), while its
// median over pairs is stable.
type DivergenceSummary struct {
	Pairs int `json:"pairs"`
	// MedianRate is the median fitted growth rate (1/fs); the doubling
	// time is ln 2 / rate.
	MedianRate          float64  `json:"median_growth_rate_per_fs"`
	DoublingTime        float64  `json:"doubling_time_fs"`
	MedianThresholdTime *float64 `json:"median_threshold_time_fs,omitempty"`
	MedianSameUntil     *float64 `json:"median_same_until_fs,omitempty"`
}

// summarize returns nil when no pair diverged with a fitted rate.
func summarize(pairs []*Pair) *DivergenceSummary {
	var rate, thr, same []float64
	for _, p := range pairs {
		if p.Verdict != Diverged || p.Rate == nil {
			continue
		}
		rate = append(rate, *p.Rate)
		if p.ThresholdTime != nil {
			thr = append(thr, *p.ThresholdTime)
		}
		if p.SameUntil != nil {
			same = append(same, *p.SameUntil)
		}
	}
	if len(rate) == 0 {
		return nil
	}
	d := &DivergenceSummary{Pairs: len(rate), MedianRate: median(rate)}
	d.DoublingTime = math.Ln2 / d.MedianRate
	if len(thr) > 0 {
		d.MedianThresholdTime = ptr(median(thr))
	}
	if len(same) > 0 {
		d.MedianSameUntil = ptr(median(same))
	}
	return d
}

// median of x (not empty); x is sorted in place.
func median(x []float64) float64 {
	sort.Float64s(x)
	n := len(x)
	return (x[(n-1)/2] + x[n/2]) / 2
}
