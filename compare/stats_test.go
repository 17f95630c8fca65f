package compare

import (
	"encoding/json"
	"math"
	"math/rand/v2"
	"os/exec"
	"strings"
	"testing"

	"gonum.org/v1/gonum/stat"
	"gonum.org/v1/gonum/stat/distuv"

	"trajvault/internal/testenv"
)

// TestWilsonPublished checks the score interval against the worked
// examples of R. G. Newcombe, Stat. Med. 17, 857 (1998), Table I, method
// 3 (Wilson score, 95 %), printed to 4 decimals (from memory).
func TestWilsonPublished(t *testing.T) {
	cases := []struct {
		k, n   int
		lo, hi float64
	}{
		{81, 263, 0.2553, 0.3662},
		{15, 148, 0.0624, 0.1605},
		{0, 20, 0.0000, 0.1611},
		{1, 29, 0.0061, 0.1718},
	}
	for _, c := range cases {
		lo, hi := Wilson(c.k, c.n, 1.959963984540054)
		if math.Abs(lo-c.lo) > 6e-5 || math.Abs(hi-c.hi) > 6e-5 {
			t.Errorf("Wilson(%d/%d) = [%.5f, %.5f], published [%.4f, %.4f]", c.k, c.n, lo, hi, c.lo, c.hi)
		}
	}
}

// TestKolmogorovTable checks Q(lambda) at the asymptotic critical values
// of the Kolmogorov distribution found in statistical tables (common
// practice): 1.224 (10 %), 1.358 (5 %), 1.628 (1 %).
func TestKolmogorovTable(t *testing.T) {
	for _, c := range []struct{ l, p float64 }{{1.224, 0.10}, {1.358, 0.05}, {1.628, 0.01}} {
		if got := kolmogorovQ(c.l); math.Abs(got-c.p)/c.p > 0.01 {
			t.Errorf("Q(%g) = %.5f, table %g", c.l, got, c.p)
		}
	}
}

// TestHomogeneityIsTwoProportionZ: for two categories Pearson's X^2 is
// the square of the pooled two-proportion z statistic (NIST/SEMATECH
// e-Handbook, section 7.3.3), so the p-values agree.
func TestHomogeneityIsTwoProportionZ(t *testing.T) {
	a, b := []int{30, 34}, []int{44, 20}
	_, df, p := Homogeneity(a, b)
	na, nb := 64.0, 64.0
	p1, p2 := 30/na, 44/nb
	pp := (30 + 44) / (na + nb)
	z := (p1 - p2) / math.Sqrt(pp*(1-pp)*(1/na+1/nb))
	want := 2 * distuv.UnitNormal.Survival(math.Abs(z))
	if df != 1 || math.Abs(p-want) > 1e-12 {
		t.Errorf("p = %v (df %d), two-proportion z gives %v", p, df, want)
	}
}

// TestDetectableSampleSize: the textbook sample size for a difference of
// 0.1 near p = 1/2 at alpha 0.05 (two-sided) and power 0.8 is 392 per
// group (Fleiss, Levin, Paik, Statistical Methods for Rates and
// Proportions, 3rd ed., section 4.2, without continuity correction;
// common practice).
func TestDetectableSampleSize(t *testing.T) {
	if d := Detectable(392, 392, 0.05, 0.8); math.Abs(d-0.1) > 0.001 {
		t.Errorf("detectable difference at n = 392: %v, want 0.100", d)
	}
}

// TestHolmWorked follows the step-down rule of Holm (Scand. J. Stat. 6,
// 65 (1979)) by hand on four p-values: sorted 0.005, 0.01, 0.03, 0.04
// times 4, 3, 2, 1 give 0.02, 0.03, 0.06, 0.04 -> monotone 0.06. NaN is a
// test not made and leaves m at 4.
func TestHolmWorked(t *testing.T) {
	got := Holm([]float64{0.01, 0.04, math.NaN(), 0.03, 0.005})
	want := []float64{0.03, 0.06, math.NaN(), 0.06, 0.02}
	for i := range want {
		if !(math.Abs(got[i]-want[i]) < 1e-12 || math.IsNaN(got[i]) && math.IsNaN(want[i])) {
			t.Errorf("Holm = %v, want %v", got, want)
			break
		}
	}
}

// TestAgainstSciPy compares the Wilson interval, the KS test, the
// chi-squared test of homogeneity, Welch's t test and the Student t
// interval of a mean with SciPy (Debian python3-scipy):
// binomtest(...).proportion_ci(method="wilson"), kstwobign.sf (the
// Kolmogorov survival function), chi2_contingency(correction=False),
// ttest_ind(equal_var=False) and t.interval.
func TestAgainstSciPy(t *testing.T) {
	py := testenv.Python()
	if err := exec.Command(py, "-c", "import scipy.stats").Run(); err != nil {
		t.Skip("SciPy not available to", py, "(apt-get install python3-scipy)")
	}
	rng := rand.New(rand.NewPCG(3, 4))
	x := make([]float64, 40)
	y := make([]float64, 55)
	for i := range x {
		x[i] = rng.ExpFloat64()
	}
	for i := range y {
		y[i] = 1.4 * rng.ExpFloat64()
	}
	in, _ := json.Marshal(map[string]any{"x": x, "y": y})
	script := `
import json, sys, math
from scipy import stats
d = json.loads(sys.argv[1])
ci = stats.binomtest(17, 50).proportion_ci(confidence_level=0.95, method="wilson")
ks = stats.ks_2samp(d["x"], d["y"], method="asymp")
n, m = len(d["x"]), len(d["y"])
en = n * m / (n + m)
lam = (math.sqrt(en) + 0.12 + 0.11 / math.sqrt(en)) * ks.statistic
chi = stats.chi2_contingency([[12, 30, 7], [20, 22, 3]], correction=False)
w = stats.ttest_ind(d["x"], d["y"], equal_var=False)
mx = sum(d["x"]) / n
se = stats.sem(d["x"])
lo, hi = stats.t.interval(0.95, n - 1, loc=mx, scale=se)
print(json.dumps({"lo": ci.low, "hi": ci.high, "d": ks.statistic, "q": stats.kstwobign.sf(lam),
                  "x2": chi[0], "p": chi[1], "df": int(chi[2]),
                  "wt": w.statistic, "wp": w.pvalue, "mlo": lo, "mhi": hi}))
`
	out, err := exec.Command(py, "-c", script, string(in)).Output()
	if err != nil {
		t.Fatalf("scipy: %v", err)
	}
	var want struct{ Lo, Hi, D, Q, X2, P, WT, WP, MLo, MHi float64 }
	if err := json.Unmarshal([]byte(strings.TrimSpace(string(out))), &want); err != nil {
		t.Fatal(err)
	}
	lo, hi := Wilson(17, 50, 1.959963984540054)
	d, q := KS(x, y)
	x2, df, p := Homogeneity([]int{12, 30, 7}, []int{20, 22, 3})
	mx, vx := stat.MeanVariance(x, nil)
	my, vy := stat.MeanVariance(y, nil)
	wt, _, wp := Welch(mx, vx, len(x), my, vy, len(y))
	// The x values are not populations; scaled into [0, 1] the interval
	// is not clipped, and scaled back it must be SciPy's.
	const sc = 20
	mlo, mhi, _ := MeanInterval(mx/sc, vx/(sc*sc), len(x), 1.959963984540054)
	checks := []struct {
		name      string
		got, want float64
		tol       float64
	}{
		{"wilson low", lo, want.Lo, 1e-9}, {"wilson high", hi, want.Hi, 1e-9},
		{"KS D", d, want.D, 1e-12}, {"KS p", q, want.Q, 1e-6},
		{"chi2", x2, want.X2, 1e-9}, {"chi2 p", p, want.P, 1e-9},
		{"Welch t", wt, want.WT, 1e-9}, {"Welch p", wp, want.WP, 1e-7},
		// z goes through Phi(z) to the t quantile: 1e-8, not 1e-9.
		{"t interval low", mlo * sc, want.MLo, 1e-8}, {"t interval high", mhi * sc, want.MHi, 1e-8},
	}
	for _, c := range checks {
		if math.Abs(c.got-c.want) > c.tol*math.Max(1, math.Abs(c.want)) {
			t.Errorf("%s: got %.10g, scipy %.10g", c.name, c.got, c.want)
		}
	}
	if df != 2 {
		t.Errorf("df %d, want 2", df)
	}
}

// TestExpFitRecoversRate: noiseless d = d0 exp(rate t) gives the rate
// and R^2 = 1 (least squares on a straight line).
func TestExpFitRecoversRate(t *testing.T) {
	var ts, ds []float64
	for i := 0; i < 30; i++ {
		ts = append(ts, float64(i)*0.5)
		ds = append(ds, 1e-9*math.Exp(0.37*float64(i)*0.5))
	}
	rate, icpt, r2 := expFit(ts, ds)
	if math.Abs(rate-0.37) > 1e-9 || math.Abs(math.Exp(icpt)-1e-9) > 1e-15 || r2 < 1-1e-12 {
		t.Errorf("rate %v, d0 %v, R2 %v", rate, math.Exp(icpt), r2)
	}
}
