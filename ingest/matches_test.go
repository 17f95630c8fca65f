package ingest

import (
	"context"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"trajvault/internal/demo"
	"trajvault/internal/finding"
)

// TestRecipeRulesAndHopEvents: the demo's text logs (fewest switches;
// the energy table's state column changes exactly at the logged accepted
// hops) read with the demo's recipe give neither P19 nor P20; with a hop
// rule that matches nothing (issue 13: "scan says 0 hop events while the
// active state changes 8 times"), scan reports the rule (P19, warning)
// and the unaccounted changes (P20, warning, with the step of the
// first); a recipe that also reads no table with active states leaves a
// hop rule matching nothing as a note.
func TestRecipeRulesAndHopEvents(t *testing.T) {
	dir := t.TempDir()
	o := demo.LogOptions{Options: demo.DefaultOptions, Decimals: 6}
	o.Steps, o.Faults = 2000, demo.Faults{CouplingScale: 0.1}
	if err := demo.WriteLogs(filepath.Join(dir, "traj-001"), o); err != nil {
		t.Fatal(err)
	}
	// The truth: accepted hops the generator made (each changes the
	// active state).
	m := demo.Tarnol()
	m.Faults = o.Faults
	hops := 0
	m.Run(o.Seed, o.Steps, o.DtFs*41.34137333518, o.Temp, func(s *demo.Step) {
		if s.HopTo >= 0 && !s.Frustrated {
			hops++
		}
	})
	if hops == 0 {
		t.Fatal("no hops in the demo run; pick another seed")
	}
	good, err := os.ReadFile(testdata("recipes", "tarnol.yaml"))
	if err != nil {
		t.Fatal(err)
	}
	cases := []struct {
		name      string
		recipe    string
		want      map[string]finding.Severity // code -> severity; absent: must not occur
		wantCount int                         // P20: changes without a hop
	}{
		{"demo recipe", string(good), map[string]finding.Severity{}, 0},
		{"hop rule matching nothing", strings.Replace(string(good), "switch", "swap", 1),
			map[string]finding.Severity{PRuleUnmatched: finding.Warning, PHopMissing: finding.Warning}, hops},
		{"no active states read", strings.Replace(strings.Replace(string(good), "switch", "swap", 1), "  - file: energies.dat", "  - file: energies.dat\n    columns: {state: ignore}", 1),
			map[string]finding.Severity{PRuleUnmatched: finding.Note}, 0},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			p := filepath.Join(t.TempDir(), "recipe.yaml")
			if err := os.WriteFile(p, []byte(c.recipe), 0o644); err != nil {
				t.Fatal(err)
			}
			rc, err := LoadRecipe(p)
			if err != nil {
				t.Fatal(err)
			}
			trajs, err := Discover(dir, rc)
			if err != nil || len(trajs) != 1 {
				t.Fatalf("discover: %v, %d", err, len(trajs))
			}
			rep, err := Scan(context.Background(), trajs[0], Options{Recipe: rc})
			if err != nil {
				t.Fatal(err)
			}
			got := map[string]finding.Finding{}
			for _, f := range rep.Problems {
				if f.Code == PRuleUnmatched || f.Code == PHopMissing {
					got[f.Code] = f
					t.Logf("%s %s %s:%d %s", f.Code, f.Severity, filepath.Base(f.File), f.Line, f.Message)
				}
			}
			for _, code := range []string{PRuleUnmatched, PHopMissing} {
				sev, want := c.want[code]
				f, ok := got[code]
				if ok != want || ok && f.Severity != sev {
					t.Errorf("%s: got %v (%+v), want %v %s", code, ok, f, want, sev)
				}
			}
			if c.wantCount > 0 && !strings.Contains(got[PHopMissing].Message, " changes "+itoa(c.wantCount)+" times") {
				t.Errorf("P20 does not count the %d changes: %s", c.wantCount, got[PHopMissing].Message)
			}
		})
	}
}

func itoa(n int) string { return strconv.Itoa(n) }
