package compare

import (
	"math"
	"sort"

	"gonum.org/v1/gonum/stat"
	"gonum.org/v1/gonum/stat/distuv"
)

// Wilson is the Wilson score interval of a binomial proportion k/n at
// normal quantile z:
//
//	centre = (p + z^2/2n) / (1 + z^2/n)
//	half   = z/(1 + z^2/n) sqrt(p(1-p)/n + z^2/4n^2),  p = k/n
//
// Unlike p +- z sqrt(p(1-p)/n) it stays inside [0, 1] and does not
// collapse to zero width at k = 0 or k = n. Preconditions: 0 <= k <= n,
// n > 0 (n == 0 gives the whole interval [0, 1]).
// Source: E. B. Wilson, J. Am. Stat. Assoc. 22, 209 (1927), eq. (4).
func Wilson(k, n int, z float64) (lo, hi float64) {
	if n <= 0 {
		return 0, 1
	}
	if k < 0 || k > n {
		panic("compare: Wilson: k outside [0, n]")
	}
	nf := float64(n)
	p := float64(k) / nf
	d := 1 + z*z/nf
	c := (p + z*z/(2*nf)) / d
	h := z / d * math.Sqrt(p*(1-p)/nf+z*z/(4*nf*nf))
	lo, hi = math.Max(0, c-h), math.Min(1, c+h)
	// Exact ends: at k = 0 (k = n) c = h analytically; keep round-off out.
	if k == 0 {
		lo = 0
	}
	if k == n {
		hi = 1
	}
	return lo, hi
}

// Homogeneity is Pearson's chi-squared test that two samples of counts
// over the same categories come from one distribution (a 2 x K
// contingency table):
//
//	X^2 = sum_ij (O_ij - E_ij)^2 / E_ij,  E_ij = row_i col_j / total
//
// with (K' - 1) degrees of freedom, K' the categories seen at all. The
// p-value is the chi-squared survival function (gonum distuv). For K = 2
// X^2 is the square of the pooled two-proportion z statistic. Returns
// p = 1 when fewer than two categories are seen or a sample is empty.
// Source: NIST/SEMATECH e-Handbook of Statistical Methods, section
// 7.4.5 (chi-square test of homogeneity); K. Pearson, Philos. Mag. 50,
// 157 (1900).
func Homogeneity(a, b []int) (x2 float64, df int, p float64) {
	if len(a) != len(b) {
		panic("compare: Homogeneity: count vectors differ in length")
	}
	na, nb := 0, 0
	for i := range a {
		na += a[i]
		nb += b[i]
	}
	if na == 0 || nb == 0 {
		return 0, 0, 1
	}
	n := float64(na + nb)
	for i := range a {
		col := float64(a[i] + b[i])
		if col == 0 {
			continue
		}
		df++
		ea, eb := float64(na)*col/n, float64(nb)*col/n
		x2 += (float64(a[i])-ea)*(float64(a[i])-ea)/ea + (float64(b[i])-eb)*(float64(b[i])-eb)/eb
	}
	df--
	if df < 1 {
		return 0, 0, 1
	}
	return x2, df, distuv.ChiSquared{K: float64(df)}.Survival(x2)
}

// KS is the two-sample Kolmogorov-Smirnov test: D = sup_x |F_a(x) -
// F_b(x)| (gonum stat.KolmogorovSmirnov) and its asymptotic p-value
//
//	p = Q(lambda),  Q(l) = 2 sum_{j>=1} (-1)^(j-1) exp(-2 j^2 l^2),
//	lambda = (sqrt(Ne) + 0.12 + 0.11/sqrt(Ne)) D,  Ne = na nb/(na + nb)
//
// Gonum has no Kolmogorov distribution, so Q is summed here; the series
// converges fast for lambda > 0.2 and Q -> 1 below. The approximation is
// good for Ne >= 4; smaller samples give p = NaN (the test is not made).
// Sources: Numerical Recipes, 3rd ed. (Cambridge University Press, 2007),
// section 14.3.3, eqs. 14.3.13 and 14.3.18; M. A. Stephens, J. R. Stat.
// Soc. B 32, 115 (1970) for the effective-size correction.
func KS(a, b []float64) (d, p float64) {
	if len(a) == 0 || len(b) == 0 {
		return math.NaN(), math.NaN()
	}
	x := append([]float64(nil), a...)
	y := append([]float64(nil), b...)
	sort.Float64s(x)
	sort.Float64s(y)
	d = stat.KolmogorovSmirnov(x, nil, y, nil)
	ne := float64(len(x)*len(y)) / float64(len(x)+len(y))
	if ne < 4 {
		return d, math.NaN()
	}
	sq := math.Sqrt(ne)
	return d, kolmogorovQ((sq + 0.12 + 0.11/sq) * d)
}

// kolmogorovQ is the Kolmogorov survival function Q(l) (see KS).
func kolmogorovQ(l float64) float64 {
	if l < 0.2 {
		return 1
	}
	sum, sign := 0.0, 1.0
	for j := 1; j <= 100; j++ {
		t := sign * 2 * math.Exp(-2*float64(j*j)*l*l)
		sum += t
		if math.Abs(t) < 1e-16*math.Abs(sum) {
			break
		}
		sign = -sign
	}
	return math.Min(1, math.Max(0, sum))
}

// Holm returns Holm's step-down adjusted p-values: with p sorted
// ascending p_(1) <= ... <= p_(m),
//
//	adj_(i) = max_{j <= i} min(1, (m - j + 1) p_(j))
//
// and rejecting where adj <= alpha keeps the family-wise error rate at
// alpha under any dependence between the tests. NaN entries (tests not
// made) stay NaN and do not count in m.
// Source: S. Holm, Scand. J. Stat. 6, 65 (1979).
func Holm(p []float64) []float64 {
	idx := make([]int, 0, len(p))
	for i, x := range p {
		if !math.IsNaN(x) {
			idx = append(idx, i)
		}
	}
	sort.SliceStable(idx, func(i, j int) bool { return p[idx[i]] < p[idx[j]] })
	out := make([]float64, len(p))
	for i := range out {
		out[i] = math.NaN()
	}
	m := len(idx)
	run := 0.0
	for r, i := range idx {
		run = math.Max(run, math.Min(1, float64(m-r)*p[i]))
		out[i] = run
	}
	return out
}

// Detectable is the smallest difference between two proportions that a
// two-sided two-proportion z test at level alpha detects with the given
// power, at sizes na and nb, in the worst case p = 1/2:
//
//	delta = (z_{1-alpha/2} + z_power) sqrt(p(1-p) (1/na + 1/nb))
//
// (the normal approximation without continuity correction), capped at 1.
// Source: J. L. Fleiss, B. Levin, M. C. Paik, Statistical Methods for
// Rates and Proportions, 3rd ed. (Wiley, 2003), section 4.2, eq. 4.14
// solved for the difference.
func Detectable(na, nb int, alpha, power float64) float64 {
	if na <= 0 || nb <= 0 {
		return math.Inf(1)
	}
	z := distuv.UnitNormal.Quantile(1-alpha/2) + distuv.UnitNormal.Quantile(power)
	// A difference of proportions is at most 1: larger means "none".
	return math.Min(1, z*math.Sqrt(0.25*(1/float64(na)+1/float64(nb))))
}

// expFit fits ln d = a + rate t by least squares (gonum stat.LinearRegression)
// and returns the rate, the intercept and the coefficient of
// determination R^2 of the fit. Source: ordinary least squares, NIST/
// SEMATECH e-Handbook of Statistical Methods, section 4.1.4.1.
func expFit(t, d []float64) (rate, intercept, r2 float64) {
	y := make([]float64, len(d))
	for i, v := range d {
		y[i] = math.Log(v)
	}
	intercept, rate = stat.LinearRegression(t, y, nil, false)
	r2 = stat.RSquared(t, y, nil, intercept, rate)
	return rate, intercept, r2
}

// MeanInterval is the Student t confidence interval of a mean from n
// independent values with sample mean m and variance v (n - 1 in the
// denominator):
//
//	m -+ t_{n-1}(q) sqrt(v/n),  q = Phi(z)
//
// at the confidence of the normal quantile z (z = 1.96: 95 %), clipped to
// [0, 1] (the values are populations) unless m lies outside. ok is false for n < 2 or a
// variance that is not finite. Source: NIST/SEMATECH e-Handbook of
// Statistical Methods, section 7.2.2.1 (confidence limits for the mean);
// common practice.
func MeanInterval(m, v float64, n int, z float64) (lo, hi float64, ok bool) {
	if n < 2 || math.IsNaN(v) || math.IsInf(v, 0) || v < 0 {
		return 0, 0, false
	}
	q := distuv.UnitNormal.CDF(z)
	h := distuv.StudentsT{Mu: 0, Sigma: 1, Nu: float64(n - 1)}.Quantile(q) * math.Sqrt(v/float64(n))
	// Clipped to [0, 1], but never so far that the interval loses the
	// mean itself (amplitudes of a faulty run can give |c|^2 > 1).
	return math.Max(m-h, math.Min(m, 0)), math.Min(m+h, math.Max(m, 1)), true
}

// Welch is Welch's two-sample t test of equal means without assuming
// equal variances: with sample means ma, mb, variances va, vb (n - 1 in
// the denominator) and sizes na, nb,
//
//	t  = (ma - mb) / sqrt(va/na + vb/nb)
//	df = (va/na + vb/nb)^2 / ((va/na)^2/(na-1) + (vb/nb)^2/(nb-1))
//	p  = 2 P(T_df > |t|)
//
// (two-sided). p is NaN when the test cannot be made: a side with fewer
// than 2 values, or no spread on either side. Sources: B. L. Welch,
// Biometrika 34, 28 (1947); NIST/SEMATECH e-Handbook of Statistical
// Methods, section 1.3.5.3 (two-sample t-test, unequal variances).
func Welch(ma, va float64, na int, mb, vb float64, nb int) (t, df, p float64) {
	if na < 2 || nb < 2 || math.IsNaN(va+vb) {
		return math.NaN(), math.NaN(), math.NaN()
	}
	sa, sb := va/float64(na), vb/float64(nb)
	if sa+sb == 0 {
		return math.NaN(), math.NaN(), math.NaN()
	}
	t = (ma - mb) / math.Sqrt(sa+sb)
	df = (sa + sb) * (sa + sb) / (sa*sa/float64(na-1) + sb*sb/float64(nb-1))
	p = 2 * distuv.StudentsT{Mu: 0, Sigma: 1, Nu: df}.Survival(math.Abs(t))
	return t, df, math.Min(1, p)
}
