package stats

import (
	"math"
	"math/rand/v2"
	"slices"
)

// DefaultBootstrapResamples is the number of resamples BootstrapRatios draws
// when asked for zero or fewer: enough for stable 95 % percentile bounds
// (common practice).
const DefaultBootstrapResamples = 2000

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
