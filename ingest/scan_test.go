package ingest

import (
	"context"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"
	"runtime"
	"strings"
	"testing"

	"trajvault/internal/demo"
	"trajvault/internal/finding"
	"trajvault/internal/h5"
	"trajvault/internal/trajfile"
	"trajvault/provenance"
)

func testdata(parts ...string) string {
	_, self, _, _ := runtime.Caller(0)
	return filepath.Join(append([]string{filepath.Dir(self), "..", "testdata"}, parts...)...)
}

var posUnit = Options{Units: map[string]string{"position": "angstrom"}}

// TestScanPlanted: each folder of testdata/ensembles/problems plants one
// problem, named by the folder's prefix (p5-... plants P5); scan must
// report it.
func TestScanPlanted(t *testing.T) {
	trajs, err := Discover(testdata("ensembles", "problems"), nil)
	if err != nil {
		t.Fatal(err)
	}
	if len(trajs) < 12 {
		t.Fatalf("found %d fixtures", len(trajs))
	}
	for _, tr := range trajs {
		want := strings.ToUpper(strings.SplitN(tr.Name, "-", 2)[0])
		t.Run(tr.Name, func(t *testing.T) {
			rep, _ := Scan(context.Background(), tr, posUnit)
			found := false
			for _, p := range rep.Problems {
				if p.Code == want {
					found = true
					t.Logf("%s %s:%d %s", p.Code, filepath.Base(p.File), p.Line, p.Message)
				}
			}
			if !found {
				t.Errorf("want %s, got %+v", want, rep.Problems)
			}
		})
	}
	rc, err := LoadRecipe(testdata("ensembles", "p2-missing", "recipe.yaml"))
	if err != nil {
		t.Fatal(err)
	}
	trajs, err = Discover(testdata("ensembles", "p2-missing"), rc)
	if err != nil {
		t.Fatal(err)
	}
	if rep, _ := Scan(context.Background(), trajs[0], Options{Recipe: rc}); !hasCode(rep, PMissing) {
		t.Errorf("want P2, got %+v", rep.Problems)
	}
}

func hasCode(r *TrajReport, code string) bool {
	for _, p := range r.Problems {
		if p.Code == code {
			return true
		}
	}
	return false
}

func TestScanClean(t *testing.T) {
	trajs, err := Discover(testdata("ensembles", "clean"), nil)
	if err != nil {
		t.Fatal(err)
	}
	for _, tr := range trajs {
		rep, _ := Scan(context.Background(), tr, posUnit)
		if rep.Findings() != 0 {
			t.Errorf("%s: %+v", tr.Name, rep.Problems)
		}
		if rep.Frames != 6 || rep.Atoms != 3 || rep.LastStep != 50 || rep.TimeLast != 25 {
			t.Errorf("%s: %d frames %d atoms steps ..%d time ..%g", tr.Name, rep.Frames, rep.Atoms, rep.LastStep, rep.TimeLast)
		}
	}
}

// TestParseErrorsLocate: bad input names file, line and column.
func TestParseErrorsLocate(t *testing.T) {
	p := testdata("ensembles", "problems", "p9-bad-number", "energies.dat")
	f, _ := os.Open(p)
	defer f.Close()
	tr, err := NewTableReader(f, p)
	if err != nil {
		t.Fatal(err)
	}
	row := make([]float64, len(tr.Columns))
	var perr error
	for perr == nil {
		_, perr = tr.Next(row)
	}
	pe, ok := perr.(*ParseError)
	if !ok || pe.Line != 3 || pe.Column != 21 || !strings.Contains(pe.Error(), `found "x.00110000"`) {
		t.Errorf("error = %v", perr)
	}
}

// TestConvertRestartAndPartial: a restart keeps the later occurrence and
// records the dropped records; a cut last frame converts only with
// DropPartial, which is recorded too.
func TestConvertRestartAndPartial(t *testing.T) {
	tr, _ := TrajectoryFrom([]string{testdata("ensembles", "problems", "p5-restart")}, nil)
	rep, _ := Scan(context.Background(), tr, posUnit)
	out := filepath.Join(t.TempDir(), "r.h5")
	res, err := Convert(context.Background(), rep, out, ConvertOptions{Options: posUnit})
	if err != nil {
		t.Fatal(err)
	}
	if res.Frames != 6 || len(res.Dropped) != 2 {
		t.Errorf("frames %d, dropped %v", res.Frames, res.Dropped)
	}
	steps := readAll(t, out, "/particles/all/position/step")
	if len(steps) != 6 || steps[2] != 20 || steps[3] != 30 {
		t.Errorf("steps %v", steps)
	}

	tr, _ = TrajectoryFrom([]string{testdata("ensembles", "problems", "p1-truncated-frame")}, nil)
	rep, _ = Scan(context.Background(), tr, posUnit)
	if _, err := Convert(context.Background(), rep, filepath.Join(t.TempDir(), "p.h5"), ConvertOptions{Options: posUnit}); err == nil {
		t.Error("a cut frame converted without DropPartial")
	}
	o := posUnit
	o.DropPartial = true
	res, err = Convert(context.Background(), rep, filepath.Join(t.TempDir(), "p.h5"), ConvertOptions{Options: o})
	if err != nil {
		t.Fatal(err)
	}
	if res.Frames != 5 || len(res.Dropped) != 1 || !strings.Contains(res.Dropped[0], "drop-partial") {
		t.Errorf("frames %d dropped %v", res.Frames, res.Dropped)
	}
}

// TestProvenanceRecorded: the converted file carries its provenance: the
// SHA-256 of every source and of the recipe, the embedded recipe text,
// units, storage and the constant set.
func TestProvenanceRecorded(t *testing.T) {
	rc, err := LoadRecipe(testdata("recipes", "tarnol.yaml"))
	if err != nil {
		t.Fatal(err)
	}
	dir := filepath.Join(t.TempDir(), "traj-001")
	o := demo.LogOptions{Options: demo.DefaultOptions, Decimals: 8}
	o.Steps = 200
	if err := demo.WriteLogs(dir, o); err != nil {
		t.Fatal(err)
	}
	out := convertDir(t, dir, ConvertOptions{Options: Options{Recipe: rc}, ToolVersion: "test", CommandLine: []string{"trajvault", "convert"}})
	f, err := h5.Open(out)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	a, err := f.Attr("/parameters", "trajvault_provenance")
	if err != nil || len(a.Strings) != 1 {
		t.Fatalf("no provenance: %v", err)
	}
	var rec provenance.Record
	if err := json.Unmarshal([]byte(a.Strings[0]), &rec); err != nil {
		t.Fatal(err)
	}
	if len(rec.Sources) != 5 || rec.Recipe == "" || !strings.Contains(rec.ConstantSet, "CODATA 2018") || rec.Units["position"] != "angstrom" {
		t.Errorf("record: %+v", rec)
	}
	for _, s := range rec.Sources {
		b, err := os.ReadFile(s.Path)
		if err != nil {
			t.Fatal(err)
		}
		sum := sha256.Sum256(b)
		if hex.EncodeToString(sum[:]) != s.SHA256 || int64(len(b)) != s.Bytes {
			t.Errorf("%s: recorded %s, file %x", s.Path, s.SHA256, sum)
		}
	}
}

// TestActiveStatesOnly (issue 10): a state column numbered from 1 without
// populations or state energies gives the states seen (two, not three),
// says how it counted (P14, P18), and records the numbering base.
// Surface-hopping logs number states from 1 or 0 (common practice).
func TestActiveStatesOnly(t *testing.T) {
	cases := []struct {
		name         string
		states       []int
		want, base   int
		wantP14Notes int
	}{
		{"1-based, two states (issue 10 row)", []int{1, 1, 2, 2, 1}, 2, 1, 1},
		{"0-based, two states", []int{0, 1, 1, 0, 0}, 2, 0, 0},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			dir := filepath.Join(t.TempDir(), "run")
			os.MkdirAll(dir, 0o755)
			var geo, tab strings.Builder
			tab.WriteString("# step time[fs] state\n")
			for i, s := range c.states {
				fmt.Fprintf(&geo, "2\nstep=%d time=%d.0\nH 0.0 0.0 %d.0\nH 0.0 0.0 %d.7\n", i, i, i, i)
				fmt.Fprintf(&tab, "%d %d.0 %d\n", i, i, s)
			}
			os.WriteFile(filepath.Join(dir, "geom.xyz"), []byte(geo.String()), 0o644)
			os.WriteFile(filepath.Join(dir, "states.dat"), []byte(tab.String()), 0o644)
			tr, err := TrajectoryFrom([]string{dir}, nil)
			if err != nil {
				t.Fatal(err)
			}
			rep, err := Scan(context.Background(), tr, Options{Units: map[string]string{"position": "angstrom", "time": "fs"}})
			if err != nil {
				t.Fatal(err)
			}
			if rep.States != c.want || rep.base != c.base {
				t.Errorf("states %d base %d, want %d base %d: %+v", rep.States, rep.base, c.want, c.base, rep.Problems)
			}
			n14, n18 := 0, 0
			for _, p := range rep.Problems {
				switch p.Code {
				case PStateBase:
					n14++
				case PStateCount:
					n18++
					if p.Severity != finding.Note {
						t.Errorf("P18 is a %s", p.Severity)
					}
				}
			}
			if n14 != c.wantP14Notes || n18 != 1 {
				t.Errorf("P14 %d, P18 %d notes: %+v", n14, n18, rep.Problems)
			}
			out := filepath.Join(t.TempDir(), "s.h5")
			if _, err := Convert(context.Background(), rep, out, ConvertOptions{Options: Options{Units: map[string]string{"position": "angstrom", "time": "fs"}}}); err != nil {
				t.Fatal(err)
			}
			f, err := h5.Open(out)
			if err != nil {
				t.Fatal(err)
			}
			defer f.Close()
			n, _, err := f.ReadFloat64(trajfile.NStates)
			if err != nil || len(n) != 1 || int(n[0]) != c.want {
				t.Errorf("n_states %v %v", n, err)
			}
			a, err := f.Attr(trajfile.ParametersGroup, "trajvault_state_base")
			if err != nil || a.Strings[0] != fmt.Sprint(c.base) {
				t.Errorf("state base attribute %+v %v", a, err)
			}
			act, _, _ := f.ReadFloat64(trajfile.ActiveState + trajfile.Value)
			for i, s := range c.states {
				if i < len(act) && int(act[i]) != s-c.base {
					t.Errorf("frame %d active state %v, want %d", i, act[i], s-c.base)
				}
			}
		})
	}
}
