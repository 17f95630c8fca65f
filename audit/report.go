package audit

import (
	"fmt"
	"html/template"
	"image/color"
	"io"
	"math"
	"path/filepath"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"

	"trajvault/internal/svgplot"
)

// palette for states (colour-blind safe, common practice).
var palette = svgplot.Palette

func line(xs, ys []float64) plotter.XYs {
	pts := make(plotter.XYs, 0, len(xs))
	stride := max(1, len(xs)/2000) // enough points for the eye
	for i := 0; i < len(xs) && i < len(ys); i += stride {
		pts = append(pts, plotter.XY{X: xs[i], Y: ys[i]})
	}
	return pts
}

func (rep *Report) populationPlot(version string) (*plot.Plot, error) {
	p := plot.New()
	p.Title.Text = "Ensemble populations: active-state fraction (solid) and mean |c|^2 (dashed)"
	svgplot.Caption(p, fmt.Sprintf("%d trajectories", len(rep.Trajectories)), svgplot.Stamp(version))
	p.X.Label.Text = "time / fs"
	p.Y.Label.Text = "population"
	for k := range rep.ByActive {
		col := palette[k%len(palette)]
		a, err := plotter.NewLine(line(rep.Times, rep.ByActive[k]))
		if err != nil {
			return nil, err
		}
		a.Color = col
		c, err := plotter.NewLine(line(rep.Times, rep.ByAmpSq[k]))
		if err != nil {
			return nil, err
		}
		c.Color = col
		c.Dashes = []vg.Length{vg.Points(4), vg.Points(3)}
		p.Add(a, c)
		p.Legend.Add(fmt.Sprintf("state %d", k), a)
	}
	p.Y.Min, p.Y.Max = 0, 1
	return p, nil
}

// flaggedBy reports whether the trajectory warns or fails on the check
// named name.
func flaggedBy(t *Result, name string) bool {
	for _, c := range t.Checks {
		if c.Name == name && (c.Verdict == Warn || c.Verdict == Fail) {
			return true
		}
	}
	return false
}

// energyPlot draws every trajectory's deviation: the runs the energy
// check flags in colour with their names, the others grey under the
// envelope of all, and the warn and fail thresholds.
func (rep *Report) energyPlot(version string) (*plot.Plot, error) {
	p := plot.New()
	p.Title.Text = "Total-energy deviation E(t) - E(0) per trajectory"
	p.X.Label.Text = "time / fs"
	p.Y.Label.Text = "deviation / eV"
	var series []svgplot.Series
	x0, x1, flagged := math.Inf(1), math.Inf(-1), 0
	for _, t := range rep.Trajectories {
		if t.EnergyDev == nil || len(t.Times) == 0 {
			continue
		}
		s := svgplot.Series{Name: filepath.Base(t.File), X: t.Times, Y: t.EnergyDev, Flagged: flaggedBy(t, "energy")}
		if s.Flagged {
			flagged++
		}
		series = append(series, s)
		x0, x1 = math.Min(x0, t.Times[0]), math.Max(x1, t.Times[len(t.Times)-1])
	}
	svgplot.Caption(p, fmt.Sprintf("%d trajectories, %d flagged; warn above %g eV, fail above %g eV", len(series), flagged, rep.settings.EnergyWarnEV, rep.settings.EnergyFailEV), svgplot.Stamp(version))
	if err := svgplot.Ensemble(p, series); err != nil {
		return nil, err
	}
	if len(series) > 0 {
		w, f := rep.settings.EnergyWarnEV, rep.settings.EnergyFailEV
		err := svgplot.Thresholds(p, x0, x1, []svgplot.Threshold{
			{Y: w, Label: fmt.Sprintf("warn +-%g eV", w), Color: palette[4]}, {Y: -w, Label: fmt.Sprintf("warn +-%g eV", w), Color: palette[4]},
			{Y: f, Label: fmt.Sprintf("fail +-%g eV", f), Color: palette[0]}, {Y: -f, Label: fmt.Sprintf("fail +-%g eV", f), Color: palette[0]},
		})
		if err != nil {
			return nil, err
		}
	}
	return p, nil
}

// stepPlot draws dt/T per trajectory (numbered from 1, whole-number
// ticks), the flagged ones in colour, with the T/20 and T/10 lines.
func (rep *Report) stepPlot(version string) (*plot.Plot, error) {
	p := plot.New()
	p.Title.Text = "Time step / shortest period per trajectory"
	svgplot.Caption(p, "T/20 safe, T/10 limit", svgplot.Stamp(version))
	p.X.Label.Text = "trajectory (number in the table below)"
	p.Y.Label.Text = "dt / T"
	p.X.Tick.Marker = svgplot.IntegerTicks{}
	var ok, bad plotter.XYs
	for i, t := range rep.Trajectories {
		for _, c := range t.Checks {
			if c.Name == timeStepName && c.Values["step_over_period"] > 0 {
				pt := plotter.XY{X: float64(i + 1), Y: c.Values["step_over_period"]}
				if c.Verdict == Warn || c.Verdict == Fail {
					bad = append(bad, pt)
				} else {
					ok = append(ok, pt)
				}
			}
		}
	}
	if len(ok)+len(bad) == 0 {
		return nil, nil
	}
	for _, set := range []struct {
		pts   plotter.XYs
		col   color.Color
		label string
	}{{ok, svgplot.Median, "not flagged"}, {bad, palette[0], "flagged"}} {
		if len(set.pts) == 0 {
			continue
		}
		s, err := plotter.NewScatter(set.pts)
		if err != nil {
			return nil, err
		}
		s.Color = set.col
		p.Add(s)
		p.Legend.Add(set.label, s)
	}
	n := float64(len(rep.Trajectories))
	if err := svgplot.Thresholds(p, 0.5, n+0.5, []svgplot.Threshold{
		{Y: 0.05, Label: "T/20", Color: palette[2]}, {Y: 0.1, Label: "T/10", Color: palette[0]},
	}); err != nil {
		return nil, err
	}
	p.X.Min, p.X.Max = 0.5, n+0.5
	p.Y.Min = 0
	return p, nil
}

var reportTmpl = template.Must(template.New("r").Parse(`<!DOCTYPE html>
<html lang="en"><head><meta charset="utf-8"><title>trajvault audit</title>
<style>
body{font-family:sans-serif;max-width:60rem;margin:2rem auto;color:#222}
table{border-collapse:collapse;margin:1rem 0}td,th{border:1px solid #ccc;padding:.3rem .6rem;text-align:left;vertical-align:top}
.fail{color:#b00020;font-weight:bold}.warn{color:#a15c00;font-weight:bold}.ok{color:#216e39}
.caution{background:#fff6e0;border-left:4px solid #e0a000;padding:.6rem 1rem}
figure{margin:1.5rem 0}
</style></head><body>
<h1>Physics audit of {{len .R.Trajectories}} trajectories</h1>
<p class="caution">{{.R.Caution}} Thresholds are settings; the numbers behind every verdict are in the JSON output.</p>
<p>Overall verdict: <span class="{{.R.Verdict}}">{{.R.Verdict}}</span>; {{.R.Flagged}} trajectories flagged.</p>
<h2>Ensemble</h2>
<table><tr><th>check</th><th>verdict</th><th>finding</th></tr>
{{range .R.Ensemble}}<tr><td>{{.Name}}</td><td class="{{.Verdict}}">{{.Verdict.Label}}</td><td>{{.Summary}}</td></tr>
{{end}}</table>
{{range .Figures}}<figure>{{.}}</figure>
{{end}}
<h2>Flagged trajectories</h2>
{{if .Flagged}}<table><tr><th>trajectory</th><th>check</th><th>verdict</th><th>reason</th></tr>
{{range .Flagged}}<tr><td>{{.File}}</td><td>{{.Check}}</td><td class="{{.Verdict}}">{{.Verdict}}</td><td>{{.Summary}}</td></tr>
{{end}}</table>{{else}}<p>None.</p>{{end}}
<h2>All trajectories, every check</h2>
<p>"not run" means the file lacks what the check needs; "cannot tell" that the data do not decide. Neither is a pass. Hover a cell for its finding.</p>
<table><tr><th>trajectory</th><th>frames</th>{{range .Columns}}<th>{{.}}</th>{{end}}</tr>
{{range .Matrix}}<tr><td>{{.File}}</td><td>{{.Frames}}</td>{{range .Cells}}<td class="{{.Verdict}}" title="{{.Summary}}">{{.Verdict.Label}}</td>{{end}}</tr>
{{end}}</table>
<h2>Rules and thresholds in force</h2>
<table><tr><th>code</th><th>check</th><th>rule</th></tr>
{{range .Rules}}<tr><td>{{.Code}}</td><td>{{.Name}}</td><td>{{.Rule}}</td></tr>
{{end}}</table>
<p>Written by trajvault {{.Version}}.</p>
</body></html>
`))

type matrixRow struct {
	File   string
	Frames int
	Cells  []Check
}

type ruleRow struct{ Code, Name, Rule string }

type flaggedRow struct {
	File, Check, Summary string
	Verdict              Verdict
}

// WriteHTML writes the report as one self-contained HTML file: inline SVG
// plots, no external assets.
func (rep *Report) WriteHTML(w io.Writer, version string) error {
	var figs []template.HTML
	for _, mk := range []func(string) (*plot.Plot, error){rep.populationPlot, rep.energyPlot, rep.stepPlot} {
		p, err := mk(version)
		if err != nil {
			return err
		}
		if p == nil {
			continue
		}
		s, err := svgplot.Inline(p)
		if err != nil {
			return err
		}
		figs = append(figs, s)
	}
	if rep.Times == nil {
		figs = figs[1:] // no population data: drop the empty population plot
	}
	var flagged []flaggedRow
	for _, t := range rep.Trajectories {
		if t.Error != "" {
			flagged = append(flagged, flaggedRow{File: filepath.Base(t.File), Check: "(file)", Summary: "cannot audit: " + t.Error, Verdict: t.Verdict})
		}
		for _, c := range t.Checks {
			if c.Verdict == Fail || c.Verdict == Warn {
				flagged = append(flagged, flaggedRow{File: filepath.Base(t.File), Check: c.Name, Summary: c.Summary, Verdict: c.Verdict})
			}
		}
	}
	var cols []string
	var rules []ruleRow
	for _, spec := range checks {
		rules = append(rules, ruleRow{Code: spec.Code, Name: spec.Name, Rule: spec.Rule(rep.settings)})
		if spec.Scope == PerFile {
			cols = append(cols, spec.Name)
		}
	}
	var matrix []matrixRow
	for _, t := range rep.Trajectories {
		row := matrixRow{File: filepath.Base(t.File), Frames: t.Frames}
		for _, name := range cols {
			cell := Check{Verdict: NA, Summary: "cannot audit: " + t.Error}
			for _, c := range t.Checks {
				if c.Name == name {
					cell = c
				}
			}
			row.Cells = append(row.Cells, cell)
		}
		matrix = append(matrix, row)
	}
	return reportTmpl.Execute(w, map[string]any{"R": rep, "Figures": figs, "Flagged": flagged, "Version": version,
		"Columns": cols, "Matrix": matrix, "Rules": rules})
}

// PopulationSVG is the ensemble population plot alone (for the data
// description); nil when the ensemble has no electronic data.
func (rep *Report) PopulationSVG(version string) ([]byte, error) {
	if rep.Times == nil {
		return nil, nil
	}
	p, err := rep.populationPlot(version)
	if err != nil {
		return nil, err
	}
	s, err := svgplot.Inline(p)
	return []byte(s), err
}

// EnergySVG is the total-energy deviation plot alone.
func (rep *Report) EnergySVG(version string) ([]byte, error) {
	p, err := rep.energyPlot(version)
	if err != nil {
		return nil, err
	}
	s, err := svgplot.Inline(p)
	return []byte(s), err
}
