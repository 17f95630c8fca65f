package main

import (
	"encoding/json"
	"fmt"
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
}

// TestInspectValuesJSON: --values --json prints the one envelope of every
// command (envelope.schema.json), the selection and its values in
// result, and the same numbers as the CSV.
func TestInspectValuesJSON(t *testing.T) {
	f := demoFile(t)
	code, stdout, stderr := runCLI("inspect", "--values", "--json", f, "--frames", "5:8", "--atoms", "0", "--quantities", "active_state,position,hops")
	if code != 0 {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	var res struct {
		Selection struct {
			FrameCount int   `json:"frame_count"`
			Atoms      []int `json:"atoms"`
		} `json:"selection"`
		Frame  []int `json:"frame"`
		Values struct {
			ActiveState []int         `json:"active_state"`
			Position    [][][]float64 `json:"position"`
		} `json:"values"`
		Hops []json.RawMessage `json:"hops"`
	}
	env := readEnvelope(t, stdout, &res)
	if env.Command != "inspect" || !env.OK || len(env.Findings) != 0 {
		t.Errorf("envelope: command %q, ok %v, findings %v", env.Command, env.OK, env.Findings)
	}
	if res.Selection.FrameCount != 3 || len(res.Frame) != 3 || res.Frame[0] != 5 || len(res.Values.ActiveState) != 3 ||
		len(res.Values.Position) != 3 || len(res.Values.Position[0]) != 1 || len(res.Values.Position[0][0]) != 3 || res.Hops == nil {
		t.Fatalf("result: %+v\n%s", res, stdout)
	}
	// The CSV of the same selection has the same numbers.
	code, csv, _ := runCLI("inspect", "--values", f, "--frames", "5:8", "--atoms", "0", "--quantities", "active_state,position")
	rows := strings.Split(strings.TrimSpace(csv), "\n")[2:]
	if code != 0 || len(rows) != 3 {
		t.Fatalf("csv: exit %d, %q", code, csv)
	}
	for i, row := range rows {
		var fr, step, state int
		var tm, x, y, z float64
		if _, err := fmt.Sscanf(strings.ReplaceAll(row, ",", " "), "%d %d %g %d %g %g %g", &fr, &step, &tm, &state, &x, &y, &z); err != nil {
			t.Fatalf("csv row %q: %v", row, err)
		}
		p := res.Values.Position[i][0]
		if fr != res.Frame[i] || state != res.Values.ActiveState[i] || x != p[0] || y != p[1] || z != p[2] {
			t.Errorf("frame %d: csv %q, json state %d position %v", res.Frame[i], row, res.Values.ActiveState[i], p)
		}
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
