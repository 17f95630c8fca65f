package compare

import (
	"context"
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"testing"

	"trajvault/internal/demo"
)

// writeDemo writes a short demo trajectory of seed to dir/name.h5.
func writeDemo(t *testing.T, dir, name string, seed uint64) {
	t.Helper()
	o := demo.DefaultOptions
	o.Seed, o.Steps = seed, 60
	if err := demo.WriteH5(filepath.Join(dir, name+".h5"), o); err != nil {
		t.Fatal(err)
	}
}

// TestMatchByStart: a rerun whose files are named otherwise is paired
// by initial conditions (the demo draws positions and velocities from
// the seed, so the same seed is the same start); a file whose start
// matches two on the other side is not paired, and the finding says why.
func TestMatchByStart(t *testing.T) {
	a, b := t.TempDir(), t.TempDir()
	for i, n := range []string{"traj-001", "traj-002", "traj-003", "traj-004"} {
		writeDemo(t, a, n, uint64(i+1))
	}
	writeDemo(t, b, "run-c", 3)
	writeDemo(t, b, "run-a", 1)
	writeDemo(t, b, "run-b", 2)
	writeDemo(t, b, "traj-004", 4) // by name
	writeDemo(t, b, "run-x", 99)   // no partner
	rep, err := Run(context.Background(), a, b, Options{Settings: DefaultSettings})
	if err != nil {
		t.Fatal(err)
	}
	validJSON(t, rep)
	got := map[string]string{}
	for _, p := range rep.Pairs {
		got[p.Name] = p.MatchedBy + " " + p.NameB
		if p.Verdict != Identical {
			t.Errorf("%s ~ %s: %s (%s)", p.Name, p.NameB, p.Verdict, p.Reason)
		}
	}
	want := map[string]string{
		"traj-001": "initial conditions run-a", "traj-002": "initial conditions run-b",
		"traj-003": "initial conditions run-c", "traj-004": "name ",
	}
	if !reflect.DeepEqual(got, want) || len(rep.OnlyA) != 0 || !reflect.DeepEqual(rep.OnlyB, []string{"run-x"}) {
		t.Errorf("pairs %v, only in A %v, only in B %v; want %v and run-x alone", got, rep.OnlyA, rep.OnlyB, want)
	}

	// Two files of B start like traj-001: neither is paired.
	writeDemo(t, b, "run-a2", 1)
	rep, err = Run(context.Background(), a, b, Options{Settings: DefaultSettings})
	if err != nil {
		t.Fatal(err)
	}
	for _, p := range rep.Pairs {
		if p.Name == "traj-001" {
			t.Errorf("traj-001 paired with %s despite two candidates", p.NameB)
		}
	}
	msg := ""
	for _, f := range rep.Findings {
		if f.Code == "C4" && strings.Contains(f.Message, "traj-001") {
			msg = f.Message
		}
	}
	if !strings.Contains(msg, "starts like run-a, run-a2 of B; not paired") {
		t.Errorf("finding for traj-001: %q", msg)
	}
	os.Remove(filepath.Join(b, "run-a2.h5"))
}

// TestSameStartPrecision: one unit in the last printed place is the
// same start; two units are not (tolerance, printed precision of either
// side). Tolerances carry tolerance()'s 1e-6 relative slack, which keeps
// decimal differences that binary rounds up inside one unit.
func TestSameStartPrecision(t *testing.T) {
	const u = 1e-6 * (1 + 1e-6)
	base := &start{species: []int{1}, pos: []float64{1.000001, 0, 0}, posTol: []float64{u, u, u}}
	for _, c := range []struct {
		name string
		x    float64
		tol  float64
		want bool
	}{
		{"equal", 1.000001, u, true},
		{"one unit", 1.000002, u, true},
		{"two units", 1.000003, u, false},
		{"coarser B", 1.00001, 10 * u, true},
	} {
		b := &start{species: []int{1}, pos: []float64{c.x, 0, 0}, posTol: []float64{c.tol, c.tol, c.tol}}
		if got := sameStart(base, b); got != c.want {
			t.Errorf("%s: sameStart = %v, want %v", c.name, got, c.want)
		}
	}
}
