package audit

import (
	"context"
	"testing"
)

// TestZPEDiagnostic: an O-H bond vibrating with exactly its zero-point
// energy (3700 cm-1: ZPE = hc omega/2 = 0.229 eV, derived) is not flagged;
// the same bond drained to 20 % of it is.
func TestZPEDiagnostic(t *testing.T) {
	omega := 3700 * cmAu
	zpe := 0.5 * omega // hartree
	if ev := zpe * hartreeEV; ev < 0.2290 || ev > 0.2297 {
		t.Fatalf("ZPE %.4f eV, want 0.229 (derived)", ev)
	}
	for _, c := range []struct {
		frac float64
		want Verdict
	}{{1, OK}, {0.2, Warn}} {
		o := oscillators{species: []int{8, 1}, omega: []float64{omega}, diatom: true, energy: c.frac * zpe, dtFs: 0.05, steps: 4000}
		res, err := File(context.Background(), o.run(t), DefaultSettings)
		if err != nil {
			t.Fatal(err)
		}
		z := check(t, res, "zpe-leakage")
		if z.Verdict != c.want {
			t.Errorf("energy %.0f %% of ZPE: %s (%s)", 100*c.frac, z.Verdict, z.Summary)
		}
	}
}
