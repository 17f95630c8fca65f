// Package svgplot renders gonum plots as SVG to inline in the
// self-contained HTML reports (audit, compare).
package svgplot

import (
	"bytes"
	"html/template"
	"strings"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/vg"
)

// Inline renders p at 16 x 9 cm as an SVG element without its XML prolog,
// ready to place in an HTML page.
func Inline(p *plot.Plot) (template.HTML, error) {
	w, err := p.WriterTo(16*vg.Centimeter, 9*vg.Centimeter, "svg")
	if err != nil {
		return "", err
	}
	var b bytes.Buffer
	if _, err := w.WriteTo(&b); err != nil {
		return "", err
	}
	s := b.String()
	if i := strings.Index(s, "<svg"); i > 0 {
		s = s[i:] // drop the XML prolog to inline the drawing
	}
	return template.HTML(s), nil
}
