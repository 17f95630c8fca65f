package compare

import (
	"fmt"
	"html/template"
	"image/color"
	"io"
	"math"
	"sort"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"

	"trajvault/internal/svgplot"
)

// Caution is printed with every HTML report: two runs agreeing says
// nothing about whether the method or the setup suits the chemistry.
const Caution = "Agreement is evidence about the stored numbers, not proof that either run is right."

// palette is colour-blind safe (common practice: the Okabe-Ito set).
var palette = []color.RGBA{
	{0, 114, 178, 255}, {213, 94, 0, 255}, {0, 158, 115, 255}, {204, 121, 167, 255},
	{86, 180, 233, 255}, {230, 159, 0, 255}, {240, 228, 66, 255}, {0, 0, 0, 255},
}

var dashed = []vg.Length{vg.Points(4), vg.Points(3)}

// figure is one plot of the report, or the reason it is not drawn.
type figure struct {
	Caption string
	SVG     template.HTML
	Missing string
}

// divergencePlot draws the RMS position difference of each pair on a log
// axis, where exponential growth from round-off is a straight line; zero
// differences (identical frames) have no place on it and are left out.
func (r *Report) divergencePlot() (*plot.Plot, string, error) {
	p := plot.New()
	p.Title.Text = "RMS position difference per pair (log scale)"
	p.X.Label.Text = "time / fs"
	p.Y.Label.Text = "RMS difference / angstrom"
	p.Y.Scale, p.Y.Tick.Marker = plot.LogScale{}, plot.LogTicks{}
	// Every pair: those different from the start in colour and named,
	// the others grey under the envelope of all (readable at hundreds).
	drawn, lo, hi := 0, math.Inf(1), math.Inf(-1)
	var series []svgplot.Series
	for _, pr := range r.Pairs {
		var xs, ys []float64
		for _, c := range pr.Curve {
			if c.RMS > 0 && !math.IsInf(c.RMS, 0) && !math.IsNaN(c.RMS) {
				xs, ys = append(xs, c.Time), append(ys, c.RMS)
				lo, hi = math.Min(lo, c.Time), math.Max(hi, c.Time)
			}
		}
		if len(xs) == 0 {
			continue
		}
		series = append(series, svgplot.Series{Name: pr.Name, X: xs, Y: ys, Flagged: pr.Verdict == Setup})
		drawn++
	}
	if err := svgplot.Ensemble(p, series); err != nil {
		return nil, "", err
	}
	if drawn == 0 {
		if len(r.Pairs) == 0 {
			return nil, "no pairs of trajectories (by name or by initial conditions)", nil
		}
		return nil, "every pair has zero position difference at every common frame", nil
	}
	if th := r.Settings.Threshold; th > 0 {
		l, err := plotter.NewLine(plotter.XYs{{X: lo, Y: th}, {X: hi, Y: th}})
		if err != nil {
			return nil, "", err
		}
		l.Color, l.Dashes = color.RGBA{A: 255}, []vg.Length{vg.Points(2), vg.Points(2)}
		p.Add(l)
		p.Legend.Add(fmt.Sprintf("threshold %g angstrom", th), l)
	}
	if drawn < len(r.Pairs) {
		p.Title.Text += fmt.Sprintf(", %d of %d pairs", drawn, len(r.Pairs))
	}
	return p, "", nil
}

// populationPlot draws the active-state fraction of every state for both
// ensembles, A solid and B dashed, each inside its Wilson score band.
func (r *Report) populationPlot() (*plot.Plot, string, error) {
	return r.bandPlot("Active-state fractions with Wilson bands: A solid, B dashed", "fraction of trajectories",
		func(b Band) (mid, lo, hi float64, ok bool) { return b.Fraction, b.Low, b.High, true })
}

// meanPopPlot draws the mean |c|^2 of every state for both ensembles
// inside its Student t band, where populations or amplitudes are stored.
func (r *Report) meanPopPlot() (*plot.Plot, string, error) {
	e := r.Ensemble
	if e != nil && len(e.Curve) > 0 {
		any := false
		for _, c := range e.Curve {
			for _, b := range append(append([]Band{}, c.A...), c.B...) {
				any = any || b.PopLow != nil
			}
		}
		if !any {
			return nil, "no populations or amplitudes recorded by both sides", nil
		}
	}
	return r.bandPlot("Mean |c|^2 with Student t bands: A solid, B dashed", "mean population",
		func(b Band) (mid, lo, hi float64, ok bool) {
			if b.PopLow == nil {
				return 0, 0, 0, false
			}
			return *b.MeanPop, *b.PopLow, *b.PopHigh, true
		})
}

// bandPlot draws one value per state and side over time inside its band
// (get gives the value and the band's edges).
func (r *Report) bandPlot(title, ylabel string, get func(Band) (mid, lo, hi float64, ok bool)) (*plot.Plot, string, error) {
	e := r.Ensemble
	if e == nil || len(e.Curve) == 0 {
		if e != nil && e.Verdict == NoStates {
			return nil, "no active states recorded", nil
		}
		return nil, "the two ensembles share no frame time", nil
	}
	p := plot.New()
	p.Title.Text = title
	p.X.Label.Text = "time / fs"
	p.Y.Label.Text = ylabel
	p.Y.Min, p.Y.Max = 0, 1
	for k := 0; k < e.States; k++ {
		col := palette[k%len(palette)]
		for side, dash := range []bool{false, true} {
			var mid, upper, lower plotter.XYs
			for _, c := range e.Curve {
				bands := c.A
				if side == 1 {
					bands = c.B
				}
				if k >= len(bands) {
					continue
				}
				m, lo, hi, ok := get(bands[k])
				if !ok {
					continue
				}
				mid = append(mid, plotter.XY{X: c.Time, Y: m})
				upper = append(upper, plotter.XY{X: c.Time, Y: hi})
				lower = append(lower, plotter.XY{X: c.Time, Y: lo})
			}
			if len(mid) == 0 {
				continue
			}
			// The band: upper edge forward, lower edge back.
			ring := append(plotter.XYs{}, upper...)
			for i := len(lower) - 1; i >= 0; i-- {
				ring = append(ring, lower[i])
			}
			band, err := plotter.NewPolygon(ring)
			if err != nil {
				return nil, "", err
			}
			band.Color = color.NRGBA{col.R, col.G, col.B, 48}
			band.LineStyle.Width = 0
			l, err := plotter.NewLine(mid)
			if err != nil {
				return nil, "", err
			}
			l.Color = col
			if dash {
				l.Dashes = dashed
			}
			p.Add(band, l)
			p.Legend.Add(fmt.Sprintf("%s state %d", []string{"A", "B"}[side], k), l)
		}
	}
	return p, "", nil
}

// ecdf is the empirical distribution function of xs as a staircase:
// F(x) = #{x_i <= x} / n (a standard statistics handbook's definition).
func ecdf(xs []float64) plotter.XYs {
	v := append([]float64(nil), xs...)
	sort.Float64s(v)
	n := float64(len(v))
	pts := plotter.XYs{{X: v[0], Y: 0}}
	for i, x := range v {
		pts = append(pts, plotter.XY{X: x, Y: float64(i) / n}, plotter.XY{X: x, Y: float64(i+1) / n})
	}
	return pts
}

// hopPlot draws the empirical distributions of the first accepted hop
// times of both ensembles, the samples the KS test compares.
func (r *Report) hopPlot() (*plot.Plot, string, error) {
	e := r.Ensemble
	if e == nil || len(e.FirstHopsA)+len(e.FirstHopsB) == 0 {
		return nil, "no accepted hops on either side", nil
	}
	p := plot.New()
	p.Title.Text = "First hop times: empirical distribution functions"
	p.X.Label.Text = "time of first accepted hop / fs"
	p.Y.Label.Text = "fraction of hopping trajectories"
	p.Y.Min, p.Y.Max = 0, 1
	for i, s := range []struct {
		name string
		v    []float64
	}{{"A", e.FirstHopsA}, {"B", e.FirstHopsB}} {
		if len(s.v) == 0 {
			continue
		}
		l, err := plotter.NewLine(ecdf(s.v))
		if err != nil {
			return nil, "", err
		}
		l.Color = palette[i]
		if i == 1 {
			l.Dashes = dashed
		}
		p.Add(l)
		p.Legend.Add(fmt.Sprintf("%s (%d of %d hopped)", s.name, len(s.v), []int{e.NA, e.NB}[i]), l)
	}
	return p, "", nil
}

// Figures lists the report's plots in order: divergence, active-state
// fractions, mean |c|^2, hop times. A figure whose data are absent
// carries the reason instead.
func (r *Report) figures(version string) ([]figure, error) {
	var out []figure
	for _, f := range []struct {
		caption string
		make    func() (*plot.Plot, string, error)
	}{
		{"Divergence of each pair: exponential growth from round-off is a straight line.", r.divergencePlot},
		{"Populations of both ensembles: where the bands overlap the fractions agree within sampling error.", r.populationPlot},
		{"Mean |c|^2 of both ensembles: the electronic populations, with 95 % bands of their means.", r.meanPopPlot},
		{"Hop-time distributions of both ensembles.", r.hopPlot},
	} {
		p, why, err := f.make()
		if err != nil {
			return nil, err
		}
		if p != nil {
			svgplot.Caption(p, svgplot.Stamp(version))
		}
		fig := figure{Caption: f.caption, Missing: why}
		if p != nil {
			if fig.SVG, err = svgplot.Inline(p); err != nil {
				return nil, err
			}
		}
		out = append(out, fig)
	}
	return out, nil
}

type pairRow struct {
	Name, MatchedBy, Verdict, SameUntil, Threshold, Rate, Reason string
}

var reportTmpl = template.Must(template.New("r").Parse(`<!DOCTYPE html>
<html lang="en"><head><meta charset="utf-8"><title>trajvault compare</title>
<style>
body{font-family:sans-serif;max-width:60rem;margin:2rem auto;color:#222}
table{border-collapse:collapse;margin:1rem 0}td,th{border:1px solid #ccc;padding:.3rem .6rem;text-align:left;vertical-align:top}
.ok{color:#216e39;font-weight:bold}.bad{color:#b00020;font-weight:bold}
.caution{background:#fff6e0;border-left:4px solid #e0a000;padding:.6rem 1rem}
figure{margin:1.5rem 0}figcaption{font-size:.9rem;color:#555}
</style></head><body>
<h1>Reproducibility of a run</h1>
<table><tr><th>A</th><td>{{.R.A}} ({{len .R.FilesA}} trajectories)</td></tr>
<tr><th>B</th><td>{{.R.B}} ({{len .R.FilesB}} trajectories)</td></tr></table>
<p>Verdict: <span class="{{if .R.OK}}ok{{else}}bad{{end}}">{{.R.Verdict}}</span></p>
<p class="caution">{{.Caution}} The numbers behind every verdict are in the JSON output.</p>
<h2>Setup differences</h2>
{{if .R.Setup}}<table><tr><th>item</th><th>A</th><th>B</th></tr>
{{range .R.Setup}}<tr><td>{{.Item}}</td><td>{{.A}}</td><td>{{.B}}</td></tr>
{{end}}</table>{{else}}<p>None found.</p>{{end}}
<h2>Pairs of trajectories</h2>
{{if .Pairs}}<table><tr><th>name</th><th>matched by</th><th>verdict</th><th>same until / fs</th><th>reaches threshold / fs</th><th>growth rate / fs<sup>-1</sup></th><th>reason</th></tr>
{{range .Pairs}}<tr><td>{{.Name}}</td><td>{{.MatchedBy}}</td><td>{{.Verdict}}</td><td>{{.SameUntil}}</td><td>{{.Threshold}}</td><td>{{.Rate}}</td><td>{{.Reason}}</td></tr>
{{end}}</table>{{else}}<p>No pairs of trajectories (by name or by initial conditions).</p>{{end}}
{{with .R.Divergence}}<p>Pairs that diverged from round-off: {{.Pairs}}; median growth rate {{printf "%.3g" .MedianRate}} fs<sup>-1</sup> (doubling in {{printf "%.3g" .DoublingTime}} fs){{if .MedianSameUntil}}, median last agreeing time {{printf "%.4g" .MedianSameUntil}} fs{{end}}{{if .MedianThresholdTime}}, median time to the threshold {{printf "%.4g" .MedianThresholdTime}} fs{{end}}.</p>{{end}}
{{if .R.OnlyA}}<p>Only in A: {{range .R.OnlyA}}{{.}} {{end}}</p>{{end}}
{{if .R.OnlyB}}<p>Only in B: {{range .R.OnlyB}}{{.}} {{end}}</p>{{end}}
<h2>Ensembles</h2>
<p>{{.E.NA}} and {{.E.NB}} trajectories, {{.E.States}} states: {{.E.Verdict}}.</p>
{{if .E.Tests}}<table><tr><th>test</th><th>statistic</th><th>p</th><th>p (Holm)</th></tr>
{{range .E.Tests}}<tr><td>{{.Name}}</td><td>{{printf "%.4g" .Statistic}}</td><td>{{printf "%.3g" .P}}</td><td>{{printf "%.3g" .Adjusted}}</td></tr>
{{end}}</table>{{end}}
{{range .E.Skipped}}<p>Not tested: {{.}}</p>
{{end}}
{{range .Figures}}<figure>{{if .SVG}}{{.SVG}}{{else}}<p>Not drawn: {{.Missing}}.</p>{{end}}<figcaption>{{.Caption}}</figcaption></figure>
{{end}}
<h2>Findings</h2>
{{if .R.Findings}}<ul>
{{range .R.Findings}}<li>{{.Code}} {{.Severity}}: {{.Message}}</li>
{{end}}</ul>{{else}}<p>None.</p>{{end}}
<p>Written by trajvault {{.Version}}.</p>
</body></html>
`))

func opt(x *float64, f string) string {
	if x == nil {
		return "-"
	}
	return fmt.Sprintf(f, *x)
}

// WriteHTML writes the comparison as one self-contained HTML file:
// inline SVG plots, no scripts, no external assets.
func (r *Report) WriteHTML(w io.Writer, version string) error {
	figs, err := r.figures(version)
	if err != nil {
		return err
	}
	var pairs []pairRow
	for _, p := range r.Pairs {
		name, by := p.Name, p.MatchedBy
		if p.NameB != "" {
			name += " = " + p.NameB
		}
		pairs = append(pairs, pairRow{Name: name, MatchedBy: by, Verdict: p.Verdict, SameUntil: opt(p.SameUntil, "%.4g"),
			Threshold: opt(p.ThresholdTime, "%.4g"), Rate: opt(p.Rate, "%.3g"), Reason: p.Reason})
	}
	e := r.Ensemble
	if e == nil {
		e = &EnsembleResult{Verdict: NoStates}
	}
	return reportTmpl.Execute(w, map[string]any{"R": r, "E": e, "Pairs": pairs, "Figures": figs,
		"Caution": Caution, "Version": version})
}
