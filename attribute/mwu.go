package attribute

import (
	"cmp"
	"math"
	"math/rand/v2"
	"slices"
)

// DefaultBootstrapResamples is the number of resamples BootstrapRatios draws
// when asked for zero or fewer: enough for stable 95 % percentile bounds
// (common practice).
const DefaultBootstrapResamples = 2000

// mwuExactMax is the largest sample size on either side for which MannWhitney
// computes the exact null distribution (when there are no ties).
const mwuExactMax = 20

// MWUResult is the Mann–Whitney comparison of two samples a and b.
type MWUResult struct {
	// N1 and N2 are the sizes of a and b after dropping NaN and infinite values.
	N1, N2 int
	// R1 is the sum of the ranks of a in the pooled sample, ranked from 1 for
	// the smallest value, tied values sharing their mid-rank.
	R1 float64
	// U1 = R1 − N1(N1+1)/2 counts the pairs (a_i, b_j) with a_i > b_j, ties
	// counting one half; U2 = N1·N2 − U1.
	U1, U2 float64
	// TieSum is Σ(t³ − t) over groups of t tied values (0 without ties).
	TieSum float64
	// Sigma is the tie-corrected standard deviation of U1 under the null:
	// √(N1N2/12·[(n+1) − TieSum/(n(n−1))]), n = N1 + N2.
	Sigma float64
	// Z is (U1 − N1N2/2)/Sigma without continuity correction, positive when a
	// tends to exceed b; P is its two-sided normal p-value.
	Z, P float64
	// ZCorrected moves U1 half a unit toward the mean first (never past it);
	// PCorrected is its two-sided normal p-value.
	ZCorrected, PCorrected float64
	// Exact reports whether PExact was computed: both samples at most 20
	// values, at least one each, and no ties.
	Exact bool
	// PExact is the exact two-sided p-value (doubled smaller tail of the null
	// distribution of U, capped at 1), NaN unless Exact.
	PExact float64
	// A is the Vargha–Delaney effect size U1/(N1·N2): the probability that a
	// value of a exceeds one of b, ties counting one half; 0.5 means no
	// tendency. NaN when a side is empty.
	A float64
	// HL is the Hodges–Lehmann shift: the median of all N1·N2 differences
	// a_i − b_j, positive when a tends to exceed b (in the unit of the data).
	// NaN when a side is empty.
	HL float64
}

// MannWhitney compares a with b by the rank-sum test of Mann & Whitney (Ann.
// Math. Stat. 18, 1947; Wilcoxon, Biometrics Bull. 1, 1945), with mid-ranks
// for ties and the tie-corrected variance; it also reports the effect size A
// of Vargha & Delaney (J. Educ. Behav. Stat. 25, 2000) and the shift estimate
// of Hodges & Lehmann (Ann. Math. Stat. 34, 1963). NaN and infinite values are
// dropped. Ranking costs O(n log n); the Hodges–Lehmann median is exact, found
// by bisection over float64 values with an O(N1+N2) count of differences per
// step, so no subsampling is needed. The exact null distribution (small
// tie-free samples) is counted by the generating function of U, the Gaussian
// binomial coefficient [N1+N2 choose N1]_q. With an empty side, U1 = U2 = 0,
// Z = 0 and every p-value is 1.
func MannWhitney(a, b []float64) MWUResult {
	a, b = finiteSorted(a), finiteSorted(b)
	n1, n2 := len(a), len(b)
	r := MWUResult{N1: n1, N2: n2, PExact: math.NaN(), A: math.NaN(), HL: math.NaN()}
	if n1 == 0 || n2 == 0 {
		r.P, r.PCorrected = 1, 1
		return r
	}
	r.R1, r.TieSum = rankSum(a, b)
	nn := float64(n1) * float64(n2)
	r.U1 = r.R1 - float64(n1)*float64(n1+1)/2
	r.U2 = nn - r.U1
	n := float64(n1 + n2)
	r.Sigma = math.Sqrt(nn / 12 * ((n + 1) - r.TieSum/(n*(n-1))))
	d := r.U1 - nn/2
	if r.Sigma > 0 {
		r.Z = d / r.Sigma
		r.ZCorrected = math.Copysign(math.Max(0, math.Abs(d)-0.5), d) / r.Sigma
	}
	r.P, r.PCorrected = twoSidedNormal(r.Z), twoSidedNormal(r.ZCorrected)
	if r.TieSum == 0 && n1 <= mwuExactMax && n2 <= mwuExactMax {
		r.Exact = true
		r.PExact = mwuExactP(int(math.Min(r.U1, r.U2)), n1, n2)
	}
	r.A = r.U1 / nn
	r.HL = hodgesLehmann(a, b)
	return r
}

// finiteSorted returns the finite values of x in ascending order, in a new slice.
func finiteSorted(x []float64) []float64 {
	s := make([]float64, 0, len(x))
	for _, v := range x {
		if !math.IsNaN(v) && !math.IsInf(v, 0) {
			s = append(s, v)
		}
	}
	slices.Sort(s)
	return s
}

// rankSum merges the sorted samples a and b and returns the sum of a's
// mid-ranks and Σ(t³ − t) over tie groups.
func rankSum(a, b []float64) (r1, tieSum float64) {
	type obs struct {
		v     float64
		fromA bool
	}
	pooled := make([]obs, 0, len(a)+len(b))
	for _, v := range a {
		pooled = append(pooled, obs{v, true})
	}
	for _, v := range b {
		pooled = append(pooled, obs{v, false})
	}
	slices.SortFunc(pooled, func(x, y obs) int { return cmp.Compare(x.v, y.v) })
	for i := 0; i < len(pooled); {
		j := i + 1
		for j < len(pooled) && pooled[j].v == pooled[i].v {
			j++
		}
		mid := float64(i+1+j) / 2 // mean of the ranks i+1 … j
		for _, o := range pooled[i:j] {
			if o.fromA {
				r1 += mid
			}
		}
		t := float64(j - i)
		tieSum += t*t*t - t
		i = j
	}
	return r1, tieSum
}

// mwuExactP returns the exact two-sided p-value min(1, 2·P[U ≤ u]) for the
// smaller of the two U statistics, u, of tie-free samples of sizes n1 and n2
// (each at most mwuExactMax). The count of arrangements with U = k is the
// coefficient of q^k in ∏_{i=1}^{n1} (1 − q^{n2+i})/(1 − q^i).
func mwuExactP(u, n1, n2 int) float64 {
	m := n1 * n2
	c := make([]int64, m+1)
	c[0] = 1
	for i := 1; i <= n1; i++ {
		for k := m; k >= n2+i; k-- { // multiply by 1 − q^(n2+i)
			c[k] -= c[k-n2-i]
		}
		for k := i; k <= m; k++ { // divide by 1 − q^i
			c[k] += c[k-i]
		}
	}
	var tail, total int64
	for k, v := range c {
		total += v
		if k <= u {
			tail += v
		}
	}
	return math.Min(1, 2*float64(tail)/float64(total))
}

// hodgesLehmann returns the median of the differences a_i − b_j for sorted,
// non-empty, finite a and b.
func hodgesLehmann(a, b []float64) float64 {
	n := len(a) * len(b)
	lo := kthDiff(a, b, (n+1)/2)
	if n%2 == 1 {
		return lo
	}
	hi := kthDiff(a, b, n/2+1)
	return lo + (hi-lo)/2
}

// kthDiff returns the k-th smallest (from 1) of the differences a_i − b_j as
// computed in float64, for sorted a and b. Floating-point subtraction is
// monotone in each operand, so the differences form a sorted matrix: the
// number not above d is counted in O(len(a)+len(b)), and the answer is found
// by bisection over the at most 2⁶⁴ float64 values between the smallest and
// largest difference (≤ 64 steps).
func kthDiff(a, b []float64, k int) float64 {
	lo, hi := floatKey(a[0]-b[len(b)-1]), floatKey(a[len(a)-1]-b[0])
	for lo < hi {
		mid := lo + (hi-lo)/2
		if countDiffsAtMost(a, b, keyFloat(mid)) >= k {
			hi = mid
		} else {
			lo = mid + 1
		}
	}
	return keyFloat(lo) + 0 // + 0 turns −0 into 0
}

// countDiffsAtMost returns how many differences a_i − b_j are ≤ d, for sorted
// a and b.
func countDiffsAtMost(a, b []float64, d float64) int {
	n, j := 0, 0
	for _, x := range a {
		for j < len(b) && x-b[j] > d {
			j++
		}
		n += len(b) - j
	}
	return n
}

// floatKey maps a float64 to a uint64 whose unsigned order is the float order
// (−0 just below +0).
func floatKey(f float64) uint64 {
	u := math.Float64bits(f)
	if u>>63 == 1 {
		return ^u
	}
	return u | 1<<63
}

// keyFloat inverts floatKey.
func keyFloat(u uint64) float64 {
	if u>>63 == 1 {
		return math.Float64frombits(u &^ (1 << 63))
	}
	return math.Float64frombits(^u)
}

// Quantile returns the q quantile of sorted (ascending, no NaN) by linear
// interpolation between order statistics, Hyndman & Fan's (Am. Stat. 50,
// 1996) type 7: h = (n−1)q, x[⌊h⌋] + (h−⌊h⌋)(x[⌊h⌋+1] − x[⌊h⌋]) with 0-based x.
// q is clamped to [0, 1]. It returns NaN for an empty slice or a NaN q.
func Quantile(sorted []float64, q float64) float64 {
	if len(sorted) == 0 || math.IsNaN(q) {
		return math.NaN()
	}
	h := float64(len(sorted)-1) * math.Min(1, math.Max(0, q))
	i := int(h)
	f := h - float64(i)
	if f == 0 || i+1 >= len(sorted) {
		return sorted[i]
	}
	x, y := sorted[i], sorted[i+1]
	switch {
	case x == y || math.IsInf(x, -1):
		return x
	case math.IsInf(y, 1):
		return y
	}
	return x + f*(y-x)
}

// resampleMean returns the mean of len(x) values drawn from x with replacement.
func resampleMean(rng *rand.Rand, x []float64) float64 {
	s := 0.0
	for range x {
		s += x[rng.IntN(len(x))]
	}
	return s / float64(len(x))
}

// BootstrapRatios returns the sorted ratios of means mean(c*)/mean(b*) of
// B rounds of the percentile bootstrap (Efron, Ann. Stat. 7, 1979): each
// round resamples b and c with replacement. Rounds whose ratio is 0/0 are
// dropped; a ratio with a zero base mean is +Inf. The result depends only
// on the inputs and seed (a PCG generator from math/rand/v2). B ≤ 0 means
// DefaultBootstrapResamples; nil for an empty side.
func BootstrapRatios(b, c []float64, B int, seed uint64) []float64 {
	if len(b) == 0 || len(c) == 0 {
		return nil
	}
	if B <= 0 {
		B = DefaultBootstrapResamples
	}
	rng := rand.New(rand.NewPCG(seed, 0x9e3779b97f4a7c15))
	ratios := make([]float64, 0, B)
	for range B {
		r := resampleMean(rng, c) / resampleMean(rng, b)
		if !math.IsNaN(r) {
			ratios = append(ratios, r)
		}
	}
	slices.Sort(ratios)
	return ratios
}

// BootstrapRatioP returns the two-sided bootstrap p-value of "ratio = 1"
// from sorted bootstrap ratios: twice the smaller fraction of ratios at or
// below 1 and at or above 1, at most 1 (the p-value got by inverting the
// percentile interval; Efron & Tibshirani, An Introduction to the
// Bootstrap, 1993, §16.4). It is dual to BootstrapRatioBounds: the bounds
// at level 1 − γ exclude 1 exactly when the p-value is at most γ. NaN for
// no ratios.
func BootstrapRatioP(sorted []float64) float64 {
	n := len(sorted)
	if n == 0 {
		return math.NaN()
	}
	below, _ := slices.BinarySearch(sorted, math.Nextafter(1, 2)) // ratios ≤ 1
	atLeast := n - countBelow(sorted, 1)                          // ratios ≥ 1
	return math.Min(1, 2*float64(min(below, atLeast))/float64(n))
}

// countBelow returns the number of sorted values below x.
func countBelow(sorted []float64, x float64) int {
	i, _ := slices.BinarySearch(sorted, x)
	return i
}

// BootstrapRatioBounds returns the percentile interval at level 1 − gamma
// from sorted bootstrap ratios, taking order statistics without
// interpolation: the lower bound is the value of index ⌊γ/2·n⌋ and the upper
// bound that of index n − 1 − ⌊γ/2·n⌋, so that the interval excludes 1
// exactly when BootstrapRatioP ≤ gamma.
func BootstrapRatioBounds(sorted []float64, gamma float64) (lo, hi float64) {
	n := len(sorted)
	if n == 0 || !(gamma > 0 && gamma < 1) {
		return math.NaN(), math.NaN()
	}
	j := int(math.Floor(gamma / 2 * float64(n)))
	return sorted[j], sorted[n-1-j]
}

// BootstrapMDE returns the smallest relative change that a two-sided test at
// level gamma would detect with the given power, from the bootstrap
// distribution of the ratio: exp((z_{1−γ/2} + z_{power})·s) − 1, where s is
// the standard deviation of the log ratios (the normal approximation of
// sample-size planning, common practice), +Inf when any ratio is 0 or
// infinite.
func BootstrapMDE(sorted []float64, gamma, power float64) float64 {
	if len(sorted) < 2 || sorted[0] <= 0 || math.IsInf(sorted[len(sorted)-1], 1) {
		return math.Inf(1)
	}
	logs := make([]float64, len(sorted))
	for i, r := range sorted {
		logs[i] = math.Log(r)
	}
	_, v := meanVar(logs)
	return math.Exp(powerZ(gamma, power)*math.Sqrt(v)) - 1
}
