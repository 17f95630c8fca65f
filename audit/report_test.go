package audit

import (
	"bytes"
	"context"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"trajvault/internal/demo"
	"trajvault/internal/testenv"
)

// TestReportRendersInChromium: the HTML report is self-contained and
// renders in headless Chromium (Debian chromium): a non-blank screenshot,
// inline SVG plots in the DOM, no console errors, no external requests.
func TestReportRendersInChromium(t *testing.T) {
	var paths []string
	for i := 0; i < 4; i++ {
		paths = append(paths, demoRun(t, uint64(40+i), 800, demo.Faults{NoRescaleEvery: 2 * (i % 2)}))
	}
	rep, err := Ensemble(context.Background(), paths, DefaultSettings, 2, nil)
	if err != nil {
		t.Fatal(err)
	}
	dir := t.TempDir()
	html := filepath.Join(dir, "audit.html")
	var b bytes.Buffer
	if err := rep.WriteHTML(&b, "test"); err != nil {
		t.Fatal(err)
	}
	page := b.String()
	for _, bad := range []string{"http://", "https://", "<script", "<link"} {
		if strings.Contains(strings.ReplaceAll(page, "http://www.w3.org", ""), bad) {
			t.Errorf("report refers to external content: %q", bad)
		}
	}
	if strings.Count(page, "<svg") < 3 || !strings.Contains(page, Caution) {
		t.Errorf("report lacks plots or the caution")
	}
	os.WriteFile(html, b.Bytes(), 0o644)
	img := testenv.Screenshot(t, dir, html, "1200,2400")
	bounds := img.Bounds()
	dark := 0
	for y := bounds.Min.Y; y < bounds.Max.Y; y += 2 {
		for x := bounds.Min.X; x < bounds.Max.X; x += 2 {
			r, g, bl, _ := img.At(x, y).RGBA()
			if r+g+bl < 3*0xC000 {
				dark++
			}
		}
	}
	total := bounds.Dx() * bounds.Dy() / 4
	if frac := float64(dark) / float64(total); frac < 0.01 {
		t.Errorf("screenshot is blank (%.3f %% non-white)", 100*frac)
	}
	if dst := os.Getenv("TRAJVAULT_KEEP_SCREENSHOT"); dst != "" {
		data, _ := os.ReadFile(filepath.Join(dir, "shot.png"))
		os.WriteFile(dst, data, 0o644)
	}
}

// TestNotRunNeverOK: a trajectory without electronic states cannot run
// the populations and hop checks; no output calls them ok (issue 13: "ok
// flagged: force-noise: 0 of 8 fail" when nothing ran). JSON gives "n/a",
// the finding says "not run:", the ensemble count says "not run", and the
// HTML matrix says "not run" in those cells.
func TestNotRunNeverOK(t *testing.T) {
	o := wells(0, 77)
	o.steps = 2000
	rep, err := Ensemble(context.Background(), []string{o.run(t)}, DefaultSettings, 1, nil)
	if err != nil {
		t.Fatal(err)
	}
	notRun := map[string]bool{"populations": true, "hop-probability": true, "hops": true}
	for _, c := range rep.Trajectories[0].Checks {
		if notRun[c.Name] && c.Verdict != NA {
			t.Errorf("%s on a file without states: %s", c.Name, c.Verdict)
		}
	}
	for _, c := range rep.Ensemble {
		name := strings.TrimPrefix(c.Name, FlaggedPrefix)
		if notRun[name] && (c.Verdict != NA || !strings.Contains(c.Summary, "1 not run")) {
			t.Errorf("%s: %s %q", c.Name, c.Verdict, c.Summary)
		}
	}
	for _, f := range rep.Findings {
		name, _, _ := strings.Cut(f.Message, ":")
		if notRun[name] && !strings.HasPrefix(f.Message, name+": not run: ") {
			t.Errorf("finding %q", f.Message)
		}
	}
	var b bytes.Buffer
	if err := rep.WriteHTML(&b, "test"); err != nil {
		t.Fatal(err)
	}
	if n := strings.Count(b.String(), `<td class="n/a" title="no electronic states stored">not run</td>`); n != len(notRun) {
		t.Errorf("HTML matrix shows %d not-run cells, want %d", n, len(notRun))
	}
	if !strings.Contains(b.String(), "Rules and thresholds in force") {
		t.Error("HTML lacks the thresholds")
	}
}
