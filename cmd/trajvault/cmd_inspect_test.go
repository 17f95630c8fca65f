package main

import (
	"encoding/json"
	"strings"
	"testing"
)

// TestInspectValues: --values prints a comment line saying what was
// selected, a header and one row per frame.
func TestInspectValues(t *testing.T) {
	f := demoFile(t)
	code, stdout, stderr := runCLI("inspect", "--values", f, "--frames", "10:40:10", "--atoms", "H", "--quantities", "position,total_energy")
	if code != 0 {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	lines := strings.Split(strings.TrimSpace(stdout), "\n")
	if len(lines) != 5 {
		t.Fatalf("want comment, header and 3 rows, got %q", stdout)
	}
	if want := "# selection of run.h5: frames 10:40:10 (3 of 51); atoms 1-2 (H H) of 3"; !strings.HasPrefix(lines[0], want) {
		t.Errorf("comment %q, want prefix %q", lines[0], want)
	}
	if want := "frame,step,time[fs],position_1_x[angstrom]"; !strings.HasPrefix(lines[1], want) {
		t.Errorf("header %q, want prefix %q", lines[1], want)
	}
	if n := strings.Count(lines[1], ","); n != 3+6 {
		t.Errorf("header has %d columns, want 10: %s", n+1, lines[1])
	}
	for i, l := range lines[2:] {
		if !strings.HasPrefix(l, []string{"10,", "20,", "30,"}[i]) {
			t.Errorf("row %d: %q", i, l)
		}
	}
	code, stdout, _ = runCLI("inspect", "--values", "--json", f, "--frames", "5", "--quantities", "active_state")
	var doc struct {
		Selection struct {
			FrameCount int `json:"frame_count"`
		} `json:"selection"`
		Frame  []int            `json:"frame"`
		Values map[string][]int `json:"values"`
	}
	if code != 0 || json.Unmarshal([]byte(stdout), &doc) != nil || doc.Selection.FrameCount != 1 || len(doc.Values["active_state"]) != 1 || doc.Frame[0] != 5 {
		t.Errorf("json values: exit %d, %s", code, stdout)
	}
}

// TestInspectSeveralFiles: inspect takes several files (issue 15), one
// summary each, or one envelope with both summaries with --json.
func TestInspectSeveralFiles(t *testing.T) {
	a, b := demoFile(t), demoFile(t)
	code, out, errs := runCLI("inspect", a, b)
	if code != 0 || strings.Count(out, "DATASET") != 2 || !strings.Contains(out, a) || !strings.Contains(out, b) {
		t.Fatalf("exit %d\n%s%s", code, out, errs)
	}
	code, out, _ = runCLI("inspect", "--json", a, b)
	var all struct{ Files []struct{ File string } }
	if readEnvelope(t, out, &all); code != 0 || len(all.Files) != 2 || all.Files[0].File != a || all.Files[1].File != b {
		t.Errorf("inspect --json of two files: exit %d, %q", code, out)
	}
}
