package svgplot

import (
	"fmt"
	"image/color"
	"math"
	"math/rand"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strconv"
	"strings"
	"testing"

	"gonum.org/v1/plot"

	"trajvault/internal/testenv"
)

// ensemble makes n seeded random-walk curves of 400 points; the first
// nFlagged drift far and are flagged.
func ensemble(n, nFlagged int) []Series {
	rng := rand.New(rand.NewSource(7))
	out := make([]Series, n)
	for i := range out {
		s := Series{Name: fmt.Sprintf("traj-%03d", i+1), Flagged: i < nFlagged}
		y := 0.0
		for k := 0; k < 400; k++ {
			s.X = append(s.X, float64(k)*0.5)
			y += rng.NormFloat64() * 0.005
			if s.Flagged {
				y += 0.004 * float64(i+1)
			}
			s.Y = append(s.Y, y)
		}
		out[i] = s
	}
	return out
}

func samplePlot(t testing.TB, n, nFlagged int) *plot.Plot {
	p := plot.New()
	p.Title.Text = "Total-energy deviation"
	Caption(p, "warn above 0.1 eV", Stamp("v0-test"))
	p.X.Label.Text, p.Y.Label.Text = "time / fs", "deviation / eV"
	if err := Ensemble(p, ensemble(n, nFlagged)); err != nil {
		t.Fatal(err)
	}
	if err := Thresholds(p, 0, 200, []Threshold{{Y: 0.1, Label: "warn", Color: Palette[4]}, {Y: -0.1, Label: "warn", Color: Palette[4]}}); err != nil {
		t.Fatal(err)
	}
	return p
}

var (
	textRe = regexp.MustCompile(`<text x="([-0-9.]+)"[^>]*>([^<]*)</text>`)
	pathRe = regexp.MustCompile(`<path d="([^"]*)"[^>]*style="[^"]*stroke:(#[0-9A-F]{6})`)
	numRe  = regexp.MustCompile(`[ML]([-0-9.]+),`)
)

// hex is a colour as the SVG writes it: #RRGGBB, not premultiplied.
func hex(c color.Color) string {
	n := color.NRGBAModel.Convert(c).(color.NRGBA)
	return fmt.Sprintf("#%02X%02X%02X", n.R, n.G, n.B)
}

// TestEnsembleSVG: with 300 curves, 3 flagged (issue 15: 4-8 unlabelled
// colours, spaghetti at hundreds of trajectories, the legend over the
// data): each flagged run has a colour of its own and its name in the
// legend, and the legend lies right of every data line; the 297 others
// are grey and share one entry; the caption carries the thresholds and
// the stamp; the SVG scales with the page.
func TestEnsembleSVG(t *testing.T) {
	s, err := Inline(samplePlot(t, 300, 3))
	if err != nil {
		t.Fatal(err)
	}
	svg := string(s)
	if !regexp.MustCompile(`^<svg [^>]*style="width:100%`).MatchString(svg) || !strings.Contains(svg, "viewBox=") {
		t.Errorf("the SVG has a fixed size: %.120s", svg)
	}
	texts := map[string]float64{}
	for _, m := range textRe.FindAllStringSubmatch(svg, -1) {
		x, _ := strconv.ParseFloat(m[1], 64)
		texts[m[2]] = x
	}
	for _, want := range []string{"traj-001", "traj-002", "traj-003", "297 not flagged", "10-90 % of those", "median", "warn", "warn above 0.1 eV; trajvault v0-test, " + Stamp("v0-test")[len("trajvault v0-test, "):]} {
		if _, ok := texts[want]; !ok {
			t.Errorf("no text %q in the SVG", want)
		}
	}
	if _, ok := texts["traj-004"]; ok {
		t.Error("an unflagged trajectory is named")
	}
	// Data lines (more than 10 points) in the flagged colours end left
	// of the legend's names.
	legendX := texts["traj-001"]
	lines := map[string]int{}
	for _, m := range pathRe.FindAllStringSubmatch(svg, -1) {
		xs := numRe.FindAllStringSubmatch(m[1], -1)
		if len(xs) <= 10 {
			continue
		}
		lines[m[2]]++
		for _, x := range xs {
			if v, _ := strconv.ParseFloat(x[1], 64); v >= legendX {
				t.Fatalf("a data line reaches x=%g, under the legend at x=%g", v, legendX)
			}
		}
	}
	// The SVG writer rounds a translucent colour down by one unit.
	nearHex := func(c color.Color) int {
		n := 0
		want := color.NRGBAModel.Convert(c).(color.NRGBA)
		for h, k := range lines {
			var r, g, b int
			fmt.Sscanf(h, "#%02X%02X%02X", &r, &g, &b)
			if abs(r-int(want.R)) <= 1 && abs(g-int(want.G)) <= 1 && abs(b-int(want.B)) <= 1 {
				n += k
			}
		}
		return n
	}
	for i := 0; i < 3; i++ {
		if n := nearHex(Palette[i]); n != 1 {
			t.Errorf("flagged colour %s: %d data lines, want 1", hex(Palette[i]), n)
		}
	}
	if n := nearHex(Grey); n != 297 {
		t.Errorf("%d grey lines, want 297", n)
	}
}

// TestEnsembleScreenshot renders the plot of 300 trajectories in headless
// Chromium at a laptop's window width: it fills the page (issue 15: plots
// used 55 % of the width), the flagged runs show in their colours and
// the unflagged ones in grey.
func TestEnsembleScreenshot(t *testing.T) {
	dir := t.TempDir()
	s, err := Inline(samplePlot(t, 300, 3))
	if err != nil {
		t.Fatal(err)
	}
	page := filepath.Join(dir, "plot.html")
	html := `<!DOCTYPE html><html><head><meta charset="utf-8"><style>body{margin:0;max-width:60rem;background:#fff}</style></head><body>` + string(s) + `</body></html>`
	if err := os.WriteFile(page, []byte(html), 0o644); err != nil {
		t.Fatal(err)
	}
	img := testenv.Screenshot(t, dir, page, "1280,800")
	b := img.Bounds()
	minX, maxX := b.Max.X, b.Min.X
	count := map[string]int{}
	near := func(px [3]uint32, c color.RGBA, tol uint32) bool {
		want := [3]uint32{uint32(c.R), uint32(c.G), uint32(c.B)}
		for i := range px {
			if d := int(px[i]) - int(want[i]); d > int(tol) || d < -int(tol) {
				return false
			}
		}
		return true
	}
	for y := b.Min.Y; y < b.Max.Y; y++ {
		for x := b.Min.X; x < b.Max.X; x++ {
			r, g, bl, _ := img.At(x, y).RGBA()
			px := [3]uint32{r >> 8, g >> 8, bl >> 8}
			if px != [3]uint32{255, 255, 255} {
				minX, maxX = min(minX, x), max(maxX, x)
			}
			for i := 0; i < 3; i++ {
				if near(px, Palette[i], 20) {
					count[hex(Palette[i])]++
				}
			}
			if px[0] == px[1] && px[1] == px[2] && px[0] > 150 && px[0] < 245 {
				count["grey"]++
			}
		}
	}
	if w := maxX - minX; w < 900 { // 60rem = 960 px
		t.Errorf("the plot spans %d px of a 960 px page", w)
	}
	for i := 0; i < 3; i++ {
		if n := count[hex(Palette[i])]; n < 200 {
			t.Errorf("flagged colour %s: %d pixels", hex(Palette[i]), n)
		}
	}
	if count["grey"] < 2000 {
		t.Errorf("%d grey pixels: the unflagged runs and their envelope are not drawn", count["grey"])
	}
}

// TestIntegerTicks: trajectory numbers get whole-number ticks only, at
// most about ten labelled (issue 15: fractional trajectory ticks).
func TestIntegerTicks(t *testing.T) {
	for _, c := range []struct{ lo, hi float64 }{{0.5, 3.5}, {0.5, 12.5}, {0.5, 300.5}, {1, 1}, {0.2, 0.8}} {
		ticks := IntegerTicks{}.Ticks(c.lo, c.hi)
		if len(ticks) > 11 {
			t.Errorf("%v: %d ticks", c, len(ticks))
		}
		for _, tk := range ticks {
			if tk.Value != math.Trunc(tk.Value) || tk.Value < c.lo || tk.Value > c.hi || tk.Label != strconv.Itoa(int(tk.Value)) {
				t.Errorf("%v: tick %+v", c, tk)
			}
		}
		if c.hi-c.lo >= 1 && len(ticks) == 0 {
			t.Errorf("%v: no ticks", c)
		}
	}
}

// TestQuantileMatchesNumPy: Quantile agrees with numpy.quantile's
// default (linear, Hyndman and Fan definition 7) on seeded data, run by
// Debian's python3-numpy.
func TestQuantileMatchesNumPy(t *testing.T) {
	rng := rand.New(rand.NewSource(3))
	var xs []float64
	var lit []string
	for i := 0; i < 37; i++ {
		v := math.Round(rng.NormFloat64()*1e6) / 1e3
		xs = append(xs, v)
		lit = append(lit, strconv.FormatFloat(v, 'g', -1, 64))
	}
	qs := []float64{0, 0.1, 0.25, 0.5, 0.9, 1}
	script := "import numpy as np\nfor q in (0, 0.1, 0.25, 0.5, 0.9, 1): print(repr(float(np.quantile([" + strings.Join(lit, ",") + "], q))))"
	out, err := exec.Command(testenv.Python(), "-c", script).Output()
	if err != nil {
		t.Fatalf("numpy: %v", err)
	}
	sorted := append([]float64(nil), xs...)
	sortFloats(sorted)
	for i, l := range strings.Fields(string(out)) {
		want, _ := strconv.ParseFloat(l, 64)
		if got := Quantile(sorted, qs[i]); math.Abs(got-want) > 1e-9*math.Max(1, math.Abs(want)) {
			t.Errorf("q=%g: got %v, numpy %v, diff %g", qs[i], got, want, got-want)
		}
	}
}

// TestStamp: the date follows SOURCE_DATE_EPOCH (reproducible-builds.org
// specification) so that rebuilt plots are the same bytes.
func TestStamp(t *testing.T) {
	t.Setenv("SOURCE_DATE_EPOCH", "86400")
	if got := Stamp("v1.2.3"); got != "trajvault v1.2.3, 1970-01-02" {
		t.Errorf("Stamp = %q", got)
	}
}

func sortFloats(v []float64) {
	for i := 1; i < len(v); i++ {
		for j := i; j > 0 && v[j] < v[j-1]; j-- {
			v[j], v[j-1] = v[j-1], v[j]
		}
	}
}

func abs(n int) int {
	if n < 0 {
		return -n
	}
	return n
}

// TestManyFlagged: with more flagged runs than colours, no two named runs
// share a colour; the rest are counted under one entry.
func TestManyFlagged(t *testing.T) {
	s, err := Inline(samplePlot(t, 40, 9))
	if err != nil {
		t.Fatal(err)
	}
	svg := string(s)
	named := MaxNamed - 1
	for i := 1; i <= 9; i++ {
		has := strings.Contains(svg, fmt.Sprintf(">traj-%03d</text>", i))
		if has != (i <= named) {
			t.Errorf("traj-%03d named: %v", i, has)
		}
	}
	if !strings.Contains(svg, fmt.Sprintf(">%d more flagged</text>", 9-named)) {
		t.Errorf("no entry for the %d unnamed flagged runs", 9-named)
	}
	seen := map[string]bool{}
	for _, c := range Palette[:named] {
		if seen[hex(c)] {
			t.Errorf("colour %s used twice", hex(c))
		}
		seen[hex(c)] = true
	}
}
