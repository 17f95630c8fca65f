package audit

import (
	"context"
	"testing"
)

// TestMomentumUsesStoredMasses: the momentum check takes the masses
// stored in the file, never a table of standard atomic weights (issue
// 13: O 15.999 against a run's 15.995 faked drifts). An O-D bond
// vibrating with 0.01 hartree (isotope masses of 16O and 2H, 15.994915
// and 2.014102 u, from memory of the atomic mass evaluation) conserves
// total momentum exactly with those masses (velocity Verlet with a pair
// force; common practice), and the check passes when the file stores
// them. The same run stored with the standard weights of O and H
// (15.999 and 1.008 u, the values an element table would give) does not
// conserve sum m v with the stored masses (P^2/2M about 1e-4 hartree,
// derived), and the check warns: it read the masses from the file.
func TestMomentumUsesStoredMasses(t *testing.T) {
	iso := []float64{15.994915, 2.014102}
	o := oscillators{species: []int{8, 1}, omega: []float64{2700 * cmAu}, diatom: true, energy: 0.01, dtFs: 0.1, steps: 2000, masses: iso}
	cases := []struct {
		name   string
		stored []float64
		want   Verdict
	}{
		{"isotope masses stored", nil, OK},
		{"standard weights stored instead", []float64{15.999, 1.008}, Warn},
	}
	for _, c := range cases {
		o.stored = c.stored
		res, err := File(context.Background(), o.run(t), DefaultSettings)
		if err != nil {
			t.Fatal(err)
		}
		m := check(t, res, "momentum")
		t.Logf("%s: %s: %s", c.name, m.Verdict, m.Summary)
		if m.Verdict != c.want {
			t.Errorf("%s: %s, want %s (%s)", c.name, m.Verdict, c.want, m.Summary)
		}
	}
}
