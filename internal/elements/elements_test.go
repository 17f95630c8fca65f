package elements

import "testing"

// Atomic numbers: IUPAC periodic table (common practice).
func TestSymbols(t *testing.T) {
	cases := map[string]int{"H": 1, "C": 6, "O": 8, "cl": 17, "Fe": 26, "Og": 118, "Xx": 0}
	for s, z := range cases {
		if got := Number(s); got != z {
			t.Errorf("Number(%q) = %d, want %d", s, got, z)
		}
	}
	if Symbol(118) != "Og" || Symbol(0) != "" {
		t.Error("Symbol out of range")
	}
}

// Hill order (Chemical Abstracts convention, common practice).
func TestFormula(t *testing.T) {
	cases := []struct {
		zs   []int
		want string
	}{
		{[]int{8, 1, 1}, "H2O"},
		{[]int{6, 1, 1, 1, 1}, "CH4"},
		{[]int{6, 6, 8, 1, 1, 1, 1, 1, 1}, "C2H6O"},
		{[]int{17, 1}, "ClH"},
	}
	for _, c := range cases {
		if got := Formula(c.zs); got != c.want {
			t.Errorf("Formula(%v) = %s, want %s", c.zs, got, c.want)
		}
	}
}
