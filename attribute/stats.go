package attribute

import (
	"cmp"
	"math"
	"slices"

	"gonum.org/v1/gonum/mathext"
)

// rateConf is the confidence level of the intervals that PoissonRateTest and
// Welch report.
const rateConf = 0.95

// RateTest is the comparison of two event counts, each from a Poisson process
// observed for a known exposure (requests served, else seconds of profile).
// "Base" is the first build and "candidate" the second.
type RateTest struct {
	// Base and Candidate are the two counts after rounding to integers.
	Base, Candidate float64
	// RR is the rate ratio (Candidate/tc)/(Base/tb): above 1 when the
	// candidate's rate is higher. It is +Inf when Base is 0 and NaN when both
	// counts are 0.
	RR float64
	// Lo and Hi bound the exact 95 % confidence interval of RR: the
	// Clopper–Pearson limits for π = Candidate/(Base+Candidate) mapped by
	// RR = π/(1−π)·tb/tc. Lo is 0 when Candidate is 0; Hi is +Inf when Base
	// is 0; the interval is (0, +Inf) when both are 0.
	Lo, Hi float64
	// WaldLo and WaldHi bound the 95 % Wald interval exp(ln RR ± z·√(1/Base +
	// 1/Candidate)); they are 0 and +Inf when either count is 0.
	WaldLo, WaldHi float64
	// P is the two-sided p-value of the exact conditional test, 1 when both
	// counts are 0.
	P float64
}

// PoissonRateTest compares the candidate's count xc over exposure tc with the
// base's count xb over exposure tb by the exact conditional test of
// Przyborowski & Wilenski (Biometrika 31, 1940): given n = xb + xc, under
// equal rates xc ~ Bin(n, tc/(tb+tc)). The two-sided p-value is the doubled
// smaller tail, min(1, 2·min(P[X ≤ xc], P[X ≥ xc])). The exact interval uses
// Clopper & Pearson (Biometrika 26, 1934). Counts are rounded to the nearest
// integer. A negative count, one above 2⁵³ or NaN, or an exposure that is not
// positive and finite, yields a RateTest whose every field is NaN.
func PoissonRateTest(xb, xc float64, tb, tc float64) RateTest {
	xb, xc = math.Round(xb), math.Round(xc)
	if !validCount(xb) || !validCount(xc) || !validExposure(tb) || !validExposure(tc) {
		nan := math.NaN()
		return RateTest{nan, nan, nan, nan, nan, nan, nan, nan}
	}
	r := RateTest{Base: xb, Candidate: xc, RR: (xc / tc) / (xb / tb)}
	n := int(xb + xc)
	k := int(xc)
	if n == 0 {
		r.Lo, r.Hi, r.WaldLo, r.WaldHi, r.P = 0, math.Inf(1), 0, math.Inf(1), 1
		return r
	}
	pi0 := tc / (tb + tc)
	r.P = math.Min(1, 2*math.Min(binomCDF(k, n, pi0), binomSF(k, n, pi0)))
	lo, hi := ClopperPearson(k, n, rateConf)
	odds := tb / tc
	r.Lo, r.Hi = lo/(1-lo)*odds, hi/(1-hi)*odds
	if xb == 0 || xc == 0 {
		r.WaldLo, r.WaldHi = 0, math.Inf(1)
	} else {
		w := normQuantile(1-(1-rateConf)/2) * math.Sqrt(1/xb+1/xc)
		r.WaldLo, r.WaldHi = r.RR*math.Exp(-w), r.RR*math.Exp(w)
	}
	return r
}

// NormalRateTest is the large-sample comparison of two Poisson counts.
type NormalRateTest struct {
	// E and V are the mean and variance of the candidate's count given the
	// total n under equal rates: E = nπ0, V = nπ0(1−π0), π0 = tc/(tb+tc).
	E, V float64
	// Z is (|xc − E| − 0.5)/√V with the sign of xc − E and never past 0 (with
	// continuity correction); P is its two-sided p-value 2(1 − Φ(|Z|)).
	Z, P float64
	// ZUncorrected is (xc − E)/√V and PUncorrected its two-sided p-value.
	ZUncorrected, PUncorrected float64
	// Valid reports V ≥ 5, the condition under which Rosner recommends the
	// approximation; otherwise prefer PoissonRateTest.
	Valid bool
}

// PoissonRateNormal compares two Poisson counts as PoissonRateTest does, but by
// the normal approximation to the conditional binomial (Rosner, Fundamentals of
// Biostatistics, ch. 14). Counts are rounded; invalid input (as for
// PoissonRateTest) or a zero total yields NaN fields and Valid false.
func PoissonRateNormal(xb, xc float64, tb, tc float64) NormalRateTest {
	xb, xc = math.Round(xb), math.Round(xc)
	nan := math.NaN()
	if !validCount(xb) || !validCount(xc) || !validExposure(tb) || !validExposure(tc) || xb+xc == 0 {
		return NormalRateTest{nan, nan, nan, nan, nan, nan, false}
	}
	pi0 := tc / (tb + tc)
	n := xb + xc
	r := NormalRateTest{E: n * pi0, V: n * pi0 * (1 - pi0)}
	r.Valid = r.V >= 5
	d, sd := xc-r.E, math.Sqrt(r.V)
	r.ZUncorrected = d / sd
	r.Z = math.Copysign(math.Max(0, math.Abs(d)-0.5), d) / sd
	r.PUncorrected = twoSidedNormal(r.ZUncorrected)
	r.P = twoSidedNormal(r.Z)
	return r
}

// ClopperPearson returns the exact (Clopper & Pearson, Biometrika 26, 1934)
// two-sided confidence interval at level conf (e.g. 0.95) for a binomial
// proportion with k successes in n trials. It returns (0, 1) when n is 0, and
// NaN bounds when k is outside [0, n] or conf outside (0, 1).
func ClopperPearson(k, n int, conf float64) (lo, hi float64) {
	if n < 0 || k < 0 || k > n || !(conf > 0 && conf < 1) {
		return math.NaN(), math.NaN()
	}
	a := (1 - conf) / 2
	lo, hi = 0, 1
	if k > 0 {
		lo = mathext.InvRegIncBeta(float64(k), float64(n-k+1), a)
	}
	if k < n {
		hi = mathext.InvRegIncBeta(float64(k+1), float64(n-k), 1-a)
	}
	return lo, hi
}

// Wilson returns the score interval of Wilson (JASA 22, 1927) at level conf
// for k successes in n trials; it behaves well for small k. It returns (0, 1)
// when n is 0, and NaN bounds for k outside [0, n] or conf outside (0, 1).
func Wilson(k, n int, conf float64) (lo, hi float64) {
	if n < 0 || k < 0 || k > n || !(conf > 0 && conf < 1) {
		return math.NaN(), math.NaN()
	}
	if n == 0 {
		return 0, 1
	}
	z := normQuantile(1 - (1-conf)/2)
	nf, p := float64(n), float64(k)/float64(n)
	den := 1 + z*z/nf
	mid := (p + z*z/(2*nf)) / den
	half := z / den * math.Sqrt(p*(1-p)/nf+z*z/(4*nf*nf))
	return math.Max(0, mid-half), math.Min(1, mid+half)
}

// BinomialSE returns the standard error √(p̂(1−p̂)/n) of the proportion
// p̂ = k/n (the sampling error of a profile share), or NaN when n ≤ 0 or k is
// outside [0, n].
func BinomialSE(k, n int) float64 {
	if n <= 0 || k < 0 || k > n {
		return math.NaN()
	}
	p := float64(k) / float64(n)
	return math.Sqrt(p * (1 - p) / float64(n))
}

// WelchResult is Welch's comparison of two means.
type WelchResult struct {
	// Diff is mean(c) − mean(b); SE its standard error √(s_b²/n_b + s_c²/n_c).
	Diff, SE float64
	// T is Diff/SE and DF the Welch–Satterthwaite degrees of freedom.
	T, DF float64
	// P is the two-sided p-value from Student's t with DF degrees of freedom.
	P float64
	// Lo and Hi bound the 95 % confidence interval of Diff.
	Lo, Hi float64
}

// Welch compares the mean of c (candidate) with the mean of b (base) by
// Welch's t test (Welch, Biometrika 34, 1947) with the degrees of freedom of
// Satterthwaite (Biometrics Bull. 2, 1946). Either side needs at least two
// values, else every field is NaN. When both samples are constant, DF is NaN
// and the test is decided by Diff alone: P is 1 if Diff is 0, else 0.
func Welch(b, c []float64) WelchResult {
	nan := math.NaN()
	if len(b) < 2 || len(c) < 2 {
		return WelchResult{nan, nan, nan, nan, nan, nan, nan}
	}
	mb, vb := meanVar(b)
	mc, vc := meanVar(c)
	vb, vc = vb/float64(len(b)), vc/float64(len(c))
	r := WelchResult{Diff: mc - mb, SE: math.Sqrt(vb + vc)}
	if r.SE == 0 {
		r.T, r.DF, r.P, r.Lo, r.Hi = math.Copysign(math.Inf(1), r.Diff), nan, 0, r.Diff, r.Diff
		if r.Diff == 0 {
			r.T, r.P = 0, 1
		}
		return r
	}
	r.T = r.Diff / r.SE
	r.DF = welchDF(vb, vc, len(b), len(c))
	r.P = tTwoSided(r.T, r.DF)
	w := tQuantile(1-(1-rateConf)/2, r.DF) * r.SE
	r.Lo, r.Hi = r.Diff-w, r.Diff+w
	return r
}

// FiellerRatio returns the ratio mean(c)/mean(b) and its confidence interval
// at level conf by Fieller's theorem (Fieller, JRSS B 16, 1954) for two
// independent samples, with the t quantile taken at Welch's degrees of
// freedom. ok is false, and the bounds NaN, when the interval is unbounded
// (t²·s_b²/n_b ≥ mean(b)², the base mean not clearly away from 0), when
// either side has fewer than two values, or when conf is outside (0, 1).
func FiellerRatio(b, c []float64, conf float64) (ratio, lo, hi float64, ok bool) {
	nan := math.NaN()
	if len(b) < 2 || len(c) < 2 || !(conf > 0 && conf < 1) {
		return nan, nan, nan, false
	}
	mb, vb := meanVar(b)
	mc, vc := meanVar(c)
	vb, vc = vb/float64(len(b)), vc/float64(len(c))
	ratio = mc / mb
	if vb+vc == 0 {
		if mb == 0 {
			return ratio, nan, nan, false
		}
		return ratio, ratio, ratio, true
	}
	t := tQuantile(1-(1-conf)/2, welchDF(vb, vc, len(b), len(c)))
	den := mb*mb - t*t*vb
	if !(den > 0) {
		return ratio, nan, nan, false
	}
	w := t * math.Sqrt(mc*mc*vb+mb*mb*vc-t*t*vc*vb)
	lo, hi = (mc*mb-w)/den, (mc*mb+w)/den
	return ratio, lo, hi, true
}

// BenjaminiHochberg returns the false-discovery-rate adjusted p-values
// (q-values) of Benjamini & Hochberg (JRSS B 57, 1995), in the order of p:
// q(i) = min over j ≥ i of min(1, m·p(j)/j) over the ascending order.
// Rejecting every hypothesis with q ≤ α controls the FDR at α under
// independence or positive dependence. NaN entries (tests not run) stay NaN
// and do not count toward m. It returns nil for an empty p.
func BenjaminiHochberg(p []float64) []float64 {
	return stepUp(p, 1)
}

// BenjaminiYekutieli returns the adjusted p-values of Benjamini & Yekutieli
// (Ann. Stat. 29, 2001), valid under any dependence: the Benjamini–Hochberg
// values multiplied by Σ_{i≤m} 1/i and capped at 1. NaN entries are handled
// as by BenjaminiHochberg.
func BenjaminiYekutieli(p []float64) []float64 {
	h := 0.0
	for i := range countNotNaN(p) {
		h += 1 / float64(i+1)
	}
	return stepUp(p, h)
}

// stepUp computes Benjamini–Hochberg adjusted values with every p-value
// multiplied by c.
func stepUp(p []float64, c float64) []float64 {
	if len(p) == 0 {
		return nil
	}
	idx := make([]int, 0, len(p))
	q := make([]float64, len(p))
	for i, v := range p {
		if math.IsNaN(v) {
			q[i] = v
			continue
		}
		idx = append(idx, i)
	}
	slices.SortStableFunc(idx, func(i, j int) int { return cmp.Compare(p[i], p[j]) })
	m := float64(len(idx))
	run := 1.0
	for r := len(idx) - 1; r >= 0; r-- {
		run = math.Min(run, c*m*p[idx[r]]/float64(r+1))
		q[idx[r]] = run
	}
	return q
}

// MinDetectableRatio returns the smallest rate ratio (above 1) that a
// two-sided test at level alpha detects with the given power when the counts
// are cb and cc: exp((z_{1−α/2} + z_{power})·√(1/cb + 1/cc)), the normal
// approximation on the log scale (common practice in sample-size planning).
// It is +Inf when a count is not positive, NaN for alpha or power outside (0, 1).
func MinDetectableRatio(cb, cc float64, alpha, power float64) float64 {
	z := powerZ(alpha, power)
	if math.IsNaN(z) || math.IsNaN(cb) || math.IsNaN(cc) {
		return math.NaN()
	}
	if cb <= 0 || cc <= 0 {
		return math.Inf(1)
	}
	return math.Exp(z * math.Sqrt(1/cb+1/cc))
}

// MinDetectableDiff returns the smallest difference of means detectable by a
// two-sided test at level alpha with the given power, for standard deviations
// sb, sc and sample sizes nb, nc: (z_{1−α/2} + z_{power})·√(sb²/nb + sc²/nc),
// in the unit of the data. It is +Inf when a sample size is not positive, NaN
// for alpha or power outside (0, 1).
func MinDetectableDiff(sb, nb, sc, nc float64, alpha, power float64) float64 {
	z := powerZ(alpha, power)
	if math.IsNaN(z) || math.IsNaN(nb) || math.IsNaN(nc) {
		return math.NaN()
	}
	if nb <= 0 || nc <= 0 {
		return math.Inf(1)
	}
	return z * math.Sqrt(sb*sb/nb+sc*sc/nc)
}

// meanVar returns the mean and the unbiased sample variance of x (len ≥ 2),
// computed in two passes.
func meanVar(x []float64) (mean, variance float64) {
	for _, v := range x {
		mean += v
	}
	mean /= float64(len(x))
	for _, v := range x {
		variance += (v - mean) * (v - mean)
	}
	return mean, variance / float64(len(x)-1)
}

// welchDF returns the Welch–Satterthwaite degrees of freedom for squared
// standard errors vb, vc of means of nb and nc values.
func welchDF(vb, vc float64, nb, nc int) float64 {
	return (vb + vc) * (vb + vc) / (vb*vb/float64(nb-1) + vc*vc/float64(nc-1))
}

// powerZ returns z_{1−α/2} + z_{power}, or NaN for arguments outside (0, 1).
func powerZ(alpha, power float64) float64 {
	if !(alpha > 0 && alpha < 1 && power > 0 && power < 1) {
		return math.NaN()
	}
	return normQuantile(1-alpha/2) + normQuantile(power)
}

func validCount(x float64) bool    { return x >= 0 && x <= 1<<53 }
func validExposure(t float64) bool { return t > 0 && !math.IsInf(t, 1) }

func countNotNaN(p []float64) int {
	n := 0
	for _, v := range p {
		if !math.IsNaN(v) {
			n++
		}
	}
	return n
}

// normSF returns P[Z > z] for a standard normal Z, accurate in the far tail.
func normSF(z float64) float64 { return 0.5 * math.Erfc(z/math.Sqrt2) }

// twoSidedNormal returns P[|Z| ≥ |z|] for a standard normal Z.
func twoSidedNormal(z float64) float64 { return math.Min(1, 2*normSF(math.Abs(z))) }

// normQuantile returns the p quantile of the standard normal, NaN outside [0, 1].
func normQuantile(p float64) float64 {
	if !(p >= 0 && p <= 1) {
		return math.NaN()
	}
	return mathext.NormalQuantile(p)
}

// tTwoSided returns P[|T| ≥ |t|] for Student's t with df > 0 degrees of
// freedom, via the regularized incomplete beta function I_{df/(df+t²)}(df/2, 1/2).
func tTwoSided(t, df float64) float64 {
	switch {
	case math.IsNaN(t) || !(df > 0):
		return math.NaN()
	case math.IsInf(t, 0):
		return 0
	case math.IsInf(df, 1):
		return twoSidedNormal(t)
	}
	return mathext.RegIncBeta(df/2, 0.5, df/(df+t*t))
}

// tQuantile returns the p quantile of Student's t with df > 0 degrees of
// freedom, NaN for p outside (0, 1).
func tQuantile(p, df float64) float64 {
	switch {
	case !(p > 0 && p < 1) || !(df > 0):
		return math.NaN()
	case math.IsInf(df, 1):
		return normQuantile(p)
	case p == 0.5:
		return 0
	}
	x := mathext.InvRegIncBeta(df/2, 0.5, 2*math.Min(p, 1-p))
	y := math.Sqrt(df * (1 - x) / x)
	if p < 0.5 {
		return -y
	}
	return y
}

// binomCDF returns P[X ≤ k] for X ~ Bin(n, p), p in [0, 1], as the
// regularized incomplete beta I_{1−p}(n−k, k+1).
func binomCDF(k, n int, p float64) float64 {
	switch {
	case k < 0:
		return 0
	case k >= n:
		return 1
	}
	return mathext.RegIncBeta(float64(n-k), float64(k+1), 1-p)
}

// binomSF returns P[X ≥ k] for X ~ Bin(n, p), p in [0, 1], as I_p(k, n−k+1).
func binomSF(k, n int, p float64) float64 {
	switch {
	case k <= 0:
		return 1
	case k > n:
		return 0
	}
	return mathext.RegIncBeta(float64(k), float64(n-k+1), p)
}
