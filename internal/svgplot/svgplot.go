// Package svgplot renders gonum plots as SVG to inline in the
// self-contained HTML reports (audit, compare) and the data description,
// and draws ensembles so that they stay readable at hundreds of
// trajectories: flagged runs coloured and named, the rest grey under a
// quantile envelope, the legend beside the data, never over it.
package svgplot

import (
	"bytes"
	"fmt"
	"html/template"
	"image/color"
	"math"
	"regexp"
	"sort"
	"strconv"
	"strings"

	"trajvault/internal/epoch"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
	"gonum.org/v1/plot/vg/vgsvg"
)

// Size of every plot: 16:9, scaled to the width of the page by the
// browser (the SVG keeps its viewBox, not a fixed size).
const (
	Width  = 20 * vg.Centimeter
	Height = 11.25 * vg.Centimeter
)

// Palette for flagged trajectories and states: the colour-blind-safe
// palette of Okabe and Ito ("Color Universal Design", 2008; common
// practice), without its yellow, which is unreadable on white.
var Palette = []color.RGBA{
	{213, 94, 0, 255}, {0, 114, 178, 255}, {0, 158, 115, 255}, {204, 121, 167, 255},
	{230, 159, 0, 255}, {86, 180, 233, 255}, {0, 0, 0, 255},
}

// Grey is the colour of the unflagged trajectories; GreyBand of the
// quantile envelope.
var (
	Grey     = color.NRGBA{150, 150, 150, 110}
	GreyBand = color.NRGBA{120, 120, 120, 70}
	Median   = color.RGBA{60, 60, 60, 255}
)

// MaxNamed bounds the legend entries of flagged trajectories: the first
// MaxNamed-1 get a colour and a name of their own, the others share the
// last colour and one entry; so no two named runs share a colour.
var MaxNamed = len(Palette)

var svgSize = regexp.MustCompile(`^<svg width="[^"]*" height="[^"]*"`)

// Inline renders p as an SVG element without its XML prolog, ready to
// place in an HTML page or to save as a file. A legend is drawn in a
// column right of the plot, not over the data. Inline in a page it takes
// the width of the page (up to 60rem) and keeps its aspect ratio.
func Inline(p *plot.Plot) (template.HTML, error) {
	c := vgsvg.New(Width, Height)
	dc := draw.New(c)
	leg := p.Legend
	leg.TextStyle.Font.Size = vg.Points(9)
	if w := leg.Rectangle(dc).Size().X; w > 0 {
		legW := w + vg.Points(12)
		p.Legend = plot.NewLegend()
		p.Draw(draw.Crop(dc, 0, -legW, 0, 0))
		p.Legend = leg
		leg.Top, leg.Left = true, true
		leg.XOffs, leg.YOffs = 0, 0
		leg.TextStyle.Font.Size = vg.Points(9)
		// Top of the legend level with the top of the data area: below
		// the title.
		top := -(p.Title.TextStyle.Rectangle(p.Title.Text).Size().Y + p.Title.Padding + vg.Points(6))
		leg.Draw(draw.Crop(dc, Width-legW+vg.Points(6), 0, 0, top))
	} else {
		p.Draw(dc)
	}
	var b bytes.Buffer
	if _, err := c.WriteTo(&b); err != nil {
		return "", err
	}
	s := b.String()
	if i := strings.Index(s, "<svg"); i > 0 {
		s = s[i:] // drop the XML prolog to inline the drawing
	}
	// The width and height attributes stay: a file shown as an image
	// keeps its size; inline, the style scales it to the page.
	s = svgSize.ReplaceAllString(s, `$0 style="width:100%;max-width:60rem;height:auto"`)
	return template.HTML(s), nil
}

// Series is one trajectory's curve.
type Series struct {
	Name    string
	X, Y    []float64
	Flagged bool
}

// Ensemble adds many curves to p: unflagged ones thin and grey; from
// five unflagged curves on, the band holding the middle 80 % of them
// (10th to 90th percentile at each x, on a common grid of 200 points) and
// their median;
// flagged ones on top, each in a colour of its own with its name in the
// legend (the first MaxNamed; the rest share one colour and one entry).
func Ensemble(p *plot.Plot, series []Series) error {
	var flagged, unflagged []Series
	for _, s := range series {
		if s.Flagged {
			flagged = append(flagged, s)
			continue
		}
		unflagged = append(unflagged, s)
		l, err := plotter.NewLine(thin(s.X, s.Y))
		if err != nil {
			return err
		}
		l.Color, l.Width = Grey, vg.Points(0.5)
		p.Add(l)
	}
	if n := len(series) - len(flagged); n > 0 {
		p.Legend.Add(fmt.Sprintf("%d not flagged", n), greyThumb{})
	}
	if len(unflagged) >= 5 {
		if err := envelope(p, unflagged); err != nil {
			return err
		}
	}
	for i, s := range flagged {
		l, err := plotter.NewLine(thin(s.X, s.Y))
		if err != nil {
			return err
		}
		l.Color, l.Width = Palette[min(i, MaxNamed-1)%len(Palette)], vg.Points(1.2)
		p.Add(l)
		switch {
		case i < MaxNamed-1 || len(flagged) == MaxNamed:
			p.Legend.Add(s.Name, l)
		case i == MaxNamed-1:
			p.Legend.Add(fmt.Sprintf("%d more flagged", len(flagged)-MaxNamed+1), l)
		}
	}
	return nil
}

type greyThumb struct{}

func (greyThumb) Thumbnail(c *draw.Canvas) {
	y := c.Center().Y
	c.StrokeLine2(draw.LineStyle{Color: Grey, Width: vg.Points(1)}, c.Min.X, y, c.Max.X, y)
}

// envelope adds the 10-90 % band and the median of the curves, each
// interpolated linearly on a common grid over the x range they share
// with at least half of them.
func envelope(p *plot.Plot, series []Series) error {
	lo, hi := math.Inf(1), math.Inf(-1)
	for _, s := range series {
		if len(s.X) > 0 {
			lo, hi = math.Min(lo, s.X[0]), math.Max(hi, s.X[len(s.X)-1])
		}
	}
	if !(hi > lo) {
		return nil
	}
	const n = 200
	var band, med plotter.XYs
	var upper plotter.XYs
	for k := 0; k < n; k++ {
		x := lo + (hi-lo)*float64(k)/(n-1)
		var ys []float64
		for _, s := range series {
			if y, ok := interp(s.X, s.Y, x); ok {
				ys = append(ys, y)
			}
		}
		if 2*len(ys) < len(series) {
			continue
		}
		sort.Float64s(ys)
		band = append(band, plotter.XY{X: x, Y: Quantile(ys, 0.1)})
		upper = append(upper, plotter.XY{X: x, Y: Quantile(ys, 0.9)})
		med = append(med, plotter.XY{X: x, Y: Quantile(ys, 0.5)})
	}
	if len(band) < 2 {
		return nil
	}
	for i := len(upper) - 1; i >= 0; i-- {
		band = append(band, upper[i])
	}
	poly, err := plotter.NewPolygon(band)
	if err != nil {
		return err
	}
	poly.Color, poly.LineStyle.Width = GreyBand, 0
	m, err := plotter.NewLine(med)
	if err != nil {
		return err
	}
	m.Color, m.Width = Median, vg.Points(1.2)
	m.Dashes = []vg.Length{vg.Points(5), vg.Points(2)}
	p.Add(poly, m)
	p.Legend.Add("10-90 % of those", poly)
	p.Legend.Add("median", m)
	return nil
}

// Quantile of sorted data at q in [0, 1]: linear interpolation between
// closest ranks, h = (n-1)q (Hyndman and Fan, Am. Stat. 50, 361 (1996),
// definition 7; the default of R and NumPy).
func Quantile(sorted []float64, q float64) float64 {
	if len(sorted) == 0 {
		return math.NaN()
	}
	h := float64(len(sorted)-1) * q
	i := int(math.Floor(h))
	if i >= len(sorted)-1 {
		return sorted[len(sorted)-1]
	}
	return sorted[i] + (h-float64(i))*(sorted[i+1]-sorted[i])
}

// interp is y at x by linear interpolation in increasing xs; false
// outside them.
func interp(xs, ys []float64, x float64) (float64, bool) {
	n := min(len(xs), len(ys))
	if n == 0 || x < xs[0] || x > xs[n-1] {
		return 0, false
	}
	i := sort.SearchFloat64s(xs[:n], x)
	if i < n && xs[i] == x {
		return ys[i], true
	}
	if i == 0 {
		return 0, false
	}
	f := (x - xs[i-1]) / (xs[i] - xs[i-1])
	return ys[i-1] + f*(ys[i]-ys[i-1]), true
}

// thin keeps at most about 2000 points of a curve: enough for the eye.
func thin(xs, ys []float64) plotter.XYs {
	pts := make(plotter.XYs, 0, min(len(xs), 2001))
	stride := max(1, len(xs)/2000)
	for i := 0; i < len(xs) && i < len(ys); i += stride {
		pts = append(pts, plotter.XY{X: xs[i], Y: ys[i]})
	}
	return pts
}

// Threshold is a horizontal line at Y named Label in the legend.
type Threshold struct {
	Y     float64
	Label string
	Color color.Color
}

// Thresholds draws dashed horizontal lines from x0 to x1; lines of one
// label share one legend entry.
func Thresholds(p *plot.Plot, x0, x1 float64, ts []Threshold) error {
	named := map[string]bool{}
	for _, t := range ts {
		l, err := plotter.NewLine(plotter.XYs{{X: x0, Y: t.Y}, {X: x1, Y: t.Y}})
		if err != nil {
			return err
		}
		l.Color, l.Width = t.Color, vg.Points(1)
		l.Dashes = []vg.Length{vg.Points(3), vg.Points(3)}
		p.Add(l)
		if !named[t.Label] {
			p.Legend.Add(t.Label, l)
			named[t.Label] = true
		}
	}
	return nil
}

// IntegerTicks marks whole numbers only (trajectory numbers, counts):
// every 1, 2, 5, 10, 20, 50, ... so that at most about ten are labelled.
type IntegerTicks struct{}

func (IntegerTicks) Ticks(lo, hi float64) []plot.Tick {
	first, last := math.Ceil(lo), math.Floor(hi)
	if last < first {
		return nil
	}
	step := 1.0
	for k := 0; (last-first)/step > 10; k++ {
		step *= []float64{2, 2.5, 2}[k%3] // 1, 2, 5, 10, 20, 50, ...
	}
	var ticks []plot.Tick
	for v := math.Ceil(first/step) * step; v <= last; v += step {
		ticks = append(ticks, plot.Tick{Value: v, Label: strconv.FormatFloat(v, 'f', 0, 64)})
	}
	return ticks
}

// Stamp says who drew a plot and when: "trajvault VERSION, DATE". The
// date is the outputs' one clock (epoch.Now: SOURCE_DATE_EPOCH when
// set), so that a rebuild gives the same bytes.
func Stamp(version string) string {
	return fmt.Sprintf("trajvault %s, %s", version, epoch.Now().Format("2006-01-02"))
}

// Caption adds a line under the title: thresholds, stamp.
func Caption(p *plot.Plot, parts ...string) {
	var keep []string
	for _, s := range parts {
		if s != "" {
			keep = append(keep, s)
		}
	}
	if len(keep) > 0 {
		p.Title.Text += "\n" + strings.Join(keep, "; ")
	}
}
