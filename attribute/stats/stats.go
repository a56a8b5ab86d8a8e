package stats

import (
	"cmp"
	"math"
	"slices"

	"gonum.org/v1/gonum/mathext"
)

// rateConf is the confidence level of the intervals that PoissonRateTest
// reports.
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

// BenjaminiHochberg returns the false-discovery-rate adjusted p-values
// (q-values) of Benjamini & Hochberg (JRSS B 57, 1995), in the order of p:
// q(i) = min over j ≥ i of min(1, m·p(j)/j) over the ascending order.
// Rejecting every hypothesis with q ≤ α controls the FDR at α under
// independence or positive dependence. NaN entries (tests not run) stay NaN
// and do not count toward m. It returns nil for an empty p.
func BenjaminiHochberg(p []float64) []float64 {
	return stepUp(p, 1)
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

// powerZ returns z_{1−α/2} + z_{power}, or NaN for arguments outside (0, 1).
func powerZ(alpha, power float64) float64 {
	if !(alpha > 0 && alpha < 1 && power > 0 && power < 1) {
		return math.NaN()
	}
	return normQuantile(1-alpha/2) + normQuantile(power)
}

func validCount(x float64) bool    { return x >= 0 && x <= 1<<53 }
func validExposure(t float64) bool { return t > 0 && !math.IsInf(t, 1) }

// normQuantile returns the p quantile of the standard normal, NaN outside [0, 1].
func normQuantile(p float64) float64 {
	if !(p >= 0 && p <= 1) {
		return math.NaN()
	}
	return mathext.NormalQuantile(p)
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
