package audit

import (
	"context"
	"slices"
	"testing"

	"trajvault/internal/demo"
)

// TestZPELoss: zero-point-energy leakage is a loss from quantum initial
// conditions (J. Chem. Theory Comput. 18, 4109 (2022),
// doi:10.1021/acs.jctc.2c00208). An O-H bond at 3700 cm-1 (ZPE = hc
// omega/2 = 0.229 eV, derived) that starts with exactly its ZPE and keeps
// it passes; the same bond started at its ZPE and drained to 20 % of it
// over the run is flagged; one started at 20 % of its ZPE (as thermal
// initial conditions give it) never held the ZPE and the check does not
// apply (not run, never ok or warn).
func TestZPELoss(t *testing.T) {
	omega := 3700 * cmAu
	zpe := 0.5 * omega // hartree
	if ev := zpe * hartreeEV; ev < 0.2290 || ev > 0.2297 {
		t.Fatalf("ZPE %.4f eV, want 0.229 (derived)", ev)
	}
	cases := []struct {
		name          string
		start, drain  float64
		want          Verdict
		wantFracAbove float64 // least fraction of the run below the level
	}{
		{"kept at ZPE", 1, 0, OK, 0},
		{"started at ZPE, drained to 20 %", 1, 0.2, Warn, 0.8},
		{"started at 20 % of ZPE", 0.2, 0, NA, 0},
	}
	for _, c := range cases {
		o := oscillators{species: []int{8, 1}, omega: []float64{omega}, diatom: true, energy: c.start * zpe, drain: c.drain, dtFs: 0.05, steps: 4000}
		res, err := File(context.Background(), o.run(t), DefaultSettings)
		if err != nil {
			t.Fatal(err)
		}
		z := check(t, res, "zpe-leakage")
		t.Logf("%s: %s: %s", c.name, z.Verdict, z.Summary)
		if z.Verdict != c.want || z.Values["fraction_below"] < c.wantFracAbove {
			t.Errorf("%s: %s (%s)", c.name, z.Verdict, z.Summary)
		}
	}
}

// TestZPEThermalRunsNotFlagged: clean runs of the demo model are never
// warned about (issue 13 saw warnings on 84 % of them). Runs from
// thermal initial conditions (300 K Boltzmann sample at the minimum of
// the lower surface) never held the zero-point energy, and the check
// says it does not apply; photoexcited runs start on the upper surface
// at the ground-state geometry, displaced bonds that hold more than
// their ZPE, and keep it.
func TestZPEThermalRunsNotFlagged(t *testing.T) {
	cases := []struct {
		name string
		f    demo.Faults
		want []Verdict
	}{
		{"thermal", demo.Faults{StartLower: true}, []Verdict{NA}},
		{"photoexcited", demo.Faults{}, []Verdict{OK, NA}},
	}
	for _, c := range cases {
		for seed := uint64(1); seed <= 6; seed++ {
			res, err := File(context.Background(), demoRun(t, seed, 2000, c.f), DefaultSettings)
			if err != nil {
				t.Fatal(err)
			}
			z := check(t, res, "zpe-leakage")
			if !slices.Contains(c.want, z.Verdict) {
				t.Errorf("%s seed %d: %s: %s", c.name, seed, z.Verdict, z.Summary)
			}
			t.Logf("%s seed %d: %s: %s", c.name, seed, z.Verdict, z.Summary)
		}
	}
}
