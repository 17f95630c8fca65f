package main

import (
	"bytes"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"trajvault/compare"
	"trajvault/internal/demo"
	"trajvault/internal/testenv"
)

// demoDir writes n demo trajectories from seeds first.. into a new folder.
func demoDir(t *testing.T, first uint64, n, steps int) string {
	t.Helper()
	dir := t.TempDir()
	for i := 0; i < n; i++ {
		o := demo.DefaultOptions
		o.Seed, o.Steps = first+uint64(i), steps
		if err := demo.WriteH5(filepath.Join(dir, fmt.Sprintf("traj-%03d.h5", i+1)), o); err != nil {
			t.Fatal(err)
		}
	}
	return dir
}

func checkWidth(t *testing.T, out string) {
	t.Helper()
	for _, l := range strings.Split(out, "\n") {
		if len(l) > 80 {
			t.Errorf("line longer than 80 columns: %q", l)
		}
	}
}

func TestCompareCommand(t *testing.T) {
	a := demoDir(t, 1, 3, 300)
	rerun := demoDir(t, 1, 3, 300)
	other := demoDir(t, 101, 3, 300)

	// A rerun with the same seeds and settings: identical, exit 0.
	code, out, errs := runCLI("compare", a, rerun)
	if code != 0 || !strings.Contains(out, "3 identical") || !strings.Contains(out, "verdict: identical") {
		t.Errorf("rerun: exit %d\n%s%s", code, out, errs)
	}
	checkWidth(t, out)

	// Other seeds, three trajectories a side: pairs start apart and the
	// ensembles are too small to tell; exit 1.
	code, out, _ = runCLI("compare", a, other)
	if code != 1 || !strings.Contains(out, "verdict: too few trajectories to tell") || !strings.Contains(out, "error   C2") {
		t.Errorf("other seeds: exit %d\n%s", code, out)
	}
	checkWidth(t, out)

	// JSON is the envelope; its result follows compare.schema.json and
	// carries the verdict and pairs.
	for _, b := range []string{rerun, other} {
		_, out, _ := runCLI("compare", "--json", a, b)
		readEnvelope(t, out, nil)
	}
	// A bundle folder (trajectories under data/trajectories) holding
	// two of the three: pairs by name, the third listed as unmatched.
	bundle := filepath.Join(t.TempDir(), "bundle")
	os.MkdirAll(filepath.Join(bundle, "data", "trajectories"), 0o755)
	for _, n := range []string{"traj-001.h5", "traj-002.h5"} {
		if err := os.Link(filepath.Join(rerun, n), filepath.Join(bundle, "data", "trajectories", n)); err != nil {
			t.Fatal(err)
		}
	}
	code, out, _ = runCLI("compare", a, bundle)
	if code != 1 || !strings.Contains(out, "2 identical") || !strings.Contains(out, "only in A: traj-003") {
		t.Errorf("bundle with one trajectory missing: exit %d\n%s", code, out)
	}
	code, out, _ = runCLI("compare", "--json", a, other)
	var doc struct {
		A, B    string
		Verdict string
		Pairs   []struct{ Verdict string }
		Setup   []any `json:"setup_differences"`
	}
	env := readEnvelope(t, out, &doc)
	if env.Tool.Name != "trajvault" || env.OK || code != 1 || doc.A != a || doc.B != other || doc.Verdict == "" || len(doc.Pairs) != 3 || doc.Setup == nil {
		t.Errorf("JSON: exit %d, %+v", code, doc)
	}
}

// TestCompareTextLogs: the text logs of a demo run, converted on the fly,
// agree within their printed precision with the file written directly
// from the same run (the logs print positions at 8 decimals).
func TestCompareTextLogs(t *testing.T) {
	dir := t.TempDir()
	logs := filepath.Join(dir, "logs", "traj-001")
	o := demo.LogOptions{Options: demo.DefaultOptions, Decimals: 8}
	o.Steps = 200
	if err := demo.WriteLogs(logs, o); err != nil {
		t.Fatal(err)
	}
	h5 := filepath.Join(dir, "h5")
	os.Mkdir(h5, 0o755)
	if err := demo.WriteH5(filepath.Join(h5, "traj-001.h5"), o.Options); err != nil {
		t.Fatal(err)
	}
	code, out, errs := runCLI("compare", "--recipe", testenv.Repo("testdata", "recipes", "tarnol.yaml"), filepath.Join(dir, "logs"), h5)
	if code != 0 || !strings.Contains(out, "1 identical") {
		t.Errorf("logs vs file: exit %d\n%s%s", code, out, errs)
	}
	// The setup section comes before any number.
	if i, j := strings.Index(out, "setup:"), strings.Index(out, "pairs:"); i < 0 || j < i {
		t.Errorf("setup not first:\n%s", out)
	}
}

func TestCompareUsage(t *testing.T) {
	f := demoFile(t)
	cases := []struct {
		name string
		args []string
		err  string
	}{
		{"one run", []string{"compare", f}, "name two runs"},
		{"missing", []string{"compare", f, filepath.Join(t.TempDir(), "none.h5")}, "no such file"},
		{"alpha", []string{"compare", "--alpha", "2", f, f}, "--alpha"},
		{"threshold", []string{"compare", "--threshold", "-1", f, f}, "--threshold"},
		{"round-off", []string{"compare", "--round-off", "1", f, f}, "--round-off"},
		{"not hdf5", []string{"compare", f, writeFile(t, "x.h5", "not hdf5")}, "x.h5"},
		{"report not html", []string{"compare", "--report", "out.txt", f, f}, "--report"},
		{"report exists", []string{"compare", "--report", writeFile(t, "old.html", "old"), f, f}, "already exists"},
		{"report folder missing", []string{"compare", "--report", filepath.Join(t.TempDir(), "no", "r.html"), f, f}, "no such file"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			code, _, errs := runCLI(c.args...)
			if code != 2 || !strings.Contains(errs, c.err) || strings.Count(strings.TrimSpace(errs), "\n") > 0 {
				t.Errorf("exit %d, stderr %q; want 2 and one line with %q", code, errs, c.err)
			}
		})
	}
}

func writeFile(t *testing.T, name, text string) string {
	p := filepath.Join(t.TempDir(), name)
	if err := os.WriteFile(p, []byte(text), 0o644); err != nil {
		t.Fatal(err)
	}
	return p
}

// TestCompareReport: --report writes a self-contained HTML page with the
// verdict and the plots whose data exist, and leaves no temporary file;
// a second run refuses to overwrite it (exit 2) and leaves it unchanged.
func TestCompareReport(t *testing.T) {
	a := demoDir(t, 1, 3, 300)
	rerun := demoDir(t, 1, 3, 300)
	dir := t.TempDir()
	report := filepath.Join(dir, "compare.html")
	code, out, errs := runCLI("compare", "--report", report, a, rerun)
	if code != 0 || !strings.Contains(out, "report: "+report) {
		t.Fatalf("exit %d\n%s%s", code, out, errs)
	}
	checkWidth(t, out)
	page, err := os.ReadFile(report)
	if err != nil {
		t.Fatal(err)
	}
	// Identical pairs have no divergence to draw on a log scale; the
	// active-state fractions, mean |c|^2 and hop times of the two
	// ensembles are drawn.
	for _, want := range []string{"<span class=\"ok\">identical</span>", compare.Caution,
		"Not drawn: every pair has zero position difference at every common frame."} {
		if !strings.Contains(string(page), want) {
			t.Errorf("report lacks %q", want)
		}
	}
	if n := strings.Count(string(page), "<svg"); n != 3 {
		t.Errorf("%d <svg> plots, want 3", n)
	}
	if ents, _ := os.ReadDir(dir); len(ents) != 1 {
		t.Errorf("folder holds %d entries, want only the report", len(ents))
	}
	code, _, errs = runCLI("compare", "--report", report, a, rerun)
	if again, _ := os.ReadFile(report); code != 2 || !strings.Contains(errs, "already exists") || !bytes.Equal(again, page) {
		t.Errorf("second run: exit %d, stderr %q, report changed %v", code, errs, !bytes.Equal(again, page))
	}
}

// TestCompareRenamedRerun: a rerun whose files carry other names pairs
// by initial conditions, says so in text and JSON, and the JSON follows
// compare.schema.json.
func TestCompareRenamedRerun(t *testing.T) {
	a := demoDir(t, 1, 3, 200)
	rerun := demoDir(t, 1, 3, 200)
	for i := 1; i <= 3; i++ {
		old := filepath.Join(rerun, fmt.Sprintf("traj-%03d.h5", i))
		if err := os.Rename(old, filepath.Join(rerun, fmt.Sprintf("run%c.h5", 'a'+i-1))); err != nil {
			t.Fatal(err)
		}
	}
	code, out, errs := runCLI("compare", a, rerun)
	if code != 0 || !strings.Contains(out, "3 identical") || !strings.Contains(out, "matched by initial conditions (names differ): traj-001 = runa") {
		t.Errorf("renamed rerun: exit %d\n%s%s", code, out, errs)
	}
	checkWidth(t, out)
	_, out, _ = runCLI("compare", "--json", a, rerun)
	var doc struct {
		Pairs []struct {
			MatchedBy string `json:"matched_by"`
			NameB     string `json:"name_b"`
		}
	}
	readEnvelope(t, out, &doc) // checked against the envelope and compare schemas
	if len(doc.Pairs) != 3 || doc.Pairs[2].MatchedBy != compare.ByStart || doc.Pairs[2].NameB != "runc" {
		t.Errorf("pairs %+v", doc.Pairs)
	}
}
