package compare

import (
	"bytes"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"

	"trajvault/internal/demo"
	"trajvault/internal/finding"
	"trajvault/internal/testenv"
)

// reportFixture is a comparison with something in every plot: a pair
// rerun from one position moved by 1e-10 angstrom (divergence), and two
// demo ensembles of 16 with different seeds (populations and hops).
func reportFixture(t *testing.T) *Report {
	t.Helper()
	dir := t.TempDir()
	ref := perturbed(t, dir, "ref", 0, 5, 3000, 10)
	re := perturbed(t, dir, "re", 1e-10, 5, 3000, 10)
	p := pairOf(t, ref, re)
	a := demoEnsembleSteps(demo.Tarnol(), 1, 16, 1000)
	b := demoEnsembleSteps(demo.Tarnol(), 101, 16, 1000)
	rep := &Report{A: "archived/", B: "rerun/", FilesA: []string{ref}, FilesB: []string{re},
		Setup: []SetupDiff{{"program", "demo 1.0", "demo 1.1"}}, Pairs: []*Pair{p},
		Ensemble: CompareEnsembles(a, b, 2, DefaultSettings), Settings: SettingsJSON{Threshold: DefaultSettings.Threshold}}
	rep.Divergence = summarize(rep.Pairs)
	rep.Verdict = overall(rep)
	var list finding.List
	list.PerPlace = 5
	rep.findings(&list)
	rep.Findings = list.Findings()
	return rep
}

func html(t *testing.T, rep *Report) string {
	t.Helper()
	var b bytes.Buffer
	if err := rep.WriteHTML(&b, "test"); err != nil {
		t.Fatal(err)
	}
	return b.String()
}

// TestReportContent: one inline SVG per plot with data, the verdict, the
// caution, the setup difference and the pair's verdict; a plot without
// data is replaced by its reason, never drawn empty.
func TestReportContent(t *testing.T) {
	rep := reportFixture(t)
	if len(rep.Ensemble.FirstHopsA) == 0 || len(rep.Ensemble.FirstHopsB) == 0 || rep.Pairs[0].Verdict != Diverged {
		t.Fatalf("fixture lacks hops or a diverged pair: %d, %d hops, pair %q",
			len(rep.Ensemble.FirstHopsA), len(rep.Ensemble.FirstHopsB), rep.Pairs[0].Verdict)
	}
	page := html(t, rep)
	if n := strings.Count(page, "<svg"); n != 4 {
		t.Errorf("%d <svg> elements, want 4 (divergence, populations, mean |c|^2, hop times)", n)
	}
	for _, want := range []string{
		"Verdict: <span", rep.Verdict, Caution, "<td>demo 1.0</td><td>demo 1.1</td>",
		"<td>" + Diverged + "</td>", "RMS position difference per pair (log scale)", "Pairs that diverged from round-off: 1; median growth rate",
		"Active-state fractions with Wilson bands", "Mean |c|^2 with Student t bands", "First hop times: empirical distribution functions",
	} {
		if !strings.Contains(page, escaped(want)) {
			t.Errorf("report lacks %q", want)
		}
	}
	for _, bad := range []string{"http://", "https://", "<script", "<link"} {
		if strings.Contains(strings.ReplaceAll(page, "http://www.w3.org", ""), bad) {
			t.Errorf("report refers to external content: %q", bad)
		}
	}

	// Without pairs and without hops: two plots, two reasons.
	rep.Pairs = nil
	rep.Ensemble.FirstHopsA, rep.Ensemble.FirstHopsB = nil, nil
	page = html(t, rep)
	if n := strings.Count(page, "<svg"); n != 2 {
		t.Errorf("%d <svg> elements without pairs and hops, want 2", n)
	}
	for _, want := range []string{"Not drawn: no pairs of trajectories (by name or by initial conditions).", "Not drawn: no accepted hops on either side."} {
		if !strings.Contains(page, want) {
			t.Errorf("report lacks %q", want)
		}
	}
}

// escaped is how html/template prints text (quotes and
// ampersands escaped).
func escaped(s string) string {
	return strings.NewReplacer("&", "&amp;", "'", "&#39;", `"`, "&#34;").Replace(s)
}

// TestECDF: F(x) = #{x_i <= x}/n; the staircase rises 1/n at each sample
// and ends at 1 (definition of the empirical distribution function, any
// statistics handbook; common practice).
func TestECDF(t *testing.T) {
	pts := ecdf([]float64{3, 1, 2, 2})
	want := [][2]float64{{1, 0}, {1, 0}, {1, .25}, {2, .25}, {2, .5}, {2, .5}, {2, .75}, {3, .75}, {3, 1}}
	if len(pts) != len(want) {
		t.Fatalf("%d points, want %d: %v", len(pts), len(want), pts)
	}
	for i, w := range want {
		if pts[i].X != w[0] || pts[i].Y != w[1] {
			t.Errorf("point %d: (%g, %g), want (%g, %g)", i, pts[i].X, pts[i].Y, w[0], w[1])
		}
	}
}

// TestReportRendersInChromium: the HTML report renders in headless
// Chromium (Debian chromium) as the audit report does: the rendered DOM
// holds the four SVG plots, no console errors, and the screenshot is
// not blank and shows the plot colours of both runs (blue and orange
// lines, palette[0] and palette[1]).
func TestReportRendersInChromium(t *testing.T) {
	rep := reportFixture(t)
	dir := t.TempDir()
	page := filepath.Join(dir, "compare.html")
	if err := os.WriteFile(page, []byte(html(t, rep)), 0o644); err != nil {
		t.Fatal(err)
	}
	dom, err := exec.Command(testenv.Chromium(t), testenv.ChromiumArgs(dir, "--dump-dom", "file://"+page)...).Output()
	if err != nil {
		t.Fatalf("chromium --dump-dom: %v", err)
	}
	if n := strings.Count(string(dom), "<svg"); n != 4 {
		t.Errorf("rendered DOM holds %d <svg> elements, want 4", n)
	}
	img := testenv.Screenshot(t, dir, page, "1200,5200")
	near := func(r, g, b uint32, c [3]uint32) bool {
		d := func(x, y uint32) uint32 {
			if x > y {
				return x - y
			}
			return y - x
		}
		return d(r>>8, c[0])+d(g>>8, c[1])+d(b>>8, c[2]) < 60
	}
	bounds := img.Bounds()
	dark, blue, orange := 0, 0, 0
	for y := bounds.Min.Y; y < bounds.Max.Y; y++ {
		for x := bounds.Min.X; x < bounds.Max.X; x++ {
			r, g, b, _ := img.At(x, y).RGBA()
			if r+g+b < 3*0xC000 {
				dark++
			}
			if near(r, g, b, [3]uint32{0, 114, 178}) {
				blue++
			}
			if near(r, g, b, [3]uint32{213, 94, 0}) {
				orange++
			}
		}
	}
	if frac := float64(dark) / float64(bounds.Dx()*bounds.Dy()); frac < 0.01 {
		t.Errorf("screenshot is blank (%.3f %% non-white)", 100*frac)
	}
	if blue < 200 || orange < 200 {
		t.Errorf("plot lines missing from the screenshot: %d blue, %d orange pixels (want >= 200 each)", blue, orange)
	}
	if dst := os.Getenv("TRAJVAULT_KEEP_SCREENSHOT"); dst != "" {
		data, _ := os.ReadFile(filepath.Join(dir, "shot.png"))
		os.WriteFile(dst, data, 0o644)
	}
}
