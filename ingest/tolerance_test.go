package ingest

import (
	"context"
	"math"
	"path/filepath"
	"testing"

	"trajvault/internal/h5"
	"trajvault/internal/testenv"
)

func convertDir(t *testing.T, dir string, opt ConvertOptions) string {
	t.Helper()
	out := filepath.Join(t.TempDir(), "out.h5")
	rep, _, err := ConvertFiles(context.Background(), []string{dir}, out, opt)
	if rep != nil {
		for _, p := range rep.Problems {
			t.Logf("scan: %+v", p)
		}
	}
	if err != nil {
		t.Fatal(err)
	}
	return out
}

// TestToleranceBound: lossy storage asked for with a tolerance keeps every
// value within the recorded bound, and validate reports the bound (V29).
func TestToleranceBound(t *testing.T) {
	dir := testenv.LegacyLogs(t, 50)
	const tol = 5e-7
	h5path := convertDir(t, dir, ConvertOptions{Options: Options{Units: testenv.LegacyLogUnits}, Tolerance: map[string]float64{"velocity": tol}})
	exact := convertDir(t, dir, ConvertOptions{Options: Options{Units: testenv.LegacyLogUnits}, BitExact: true})
	lossy := readAll(t, h5path, "/particles/all/velocity/value")
	src := readAll(t, exact, "/particles/all/velocity/value")
	worst := 0.0
	for i := range src {
		worst = math.Max(worst, math.Abs(lossy[i]-src[i]))
	}
	if worst > tol || worst == 0 {
		t.Errorf("max error %g, bound %g (zero means nothing was rounded)", worst, tol)
	}
	f, _ := h5.Open(h5path)
	defer f.Close()
	a, err := f.Attr("/particles/all/velocity/value", "trajvault_tolerance")
	if err != nil || len(a.Floats) != 1 || a.Floats[0] > tol {
		t.Errorf("recorded bound %v %v", a.Floats, err)
	}
}

func readAll(t *testing.T, path, ds string) []float64 {
	f, err := h5.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	v, _, err := f.ReadFloat64(ds)
	if err != nil {
		t.Fatal(err)
	}
	return v
}
