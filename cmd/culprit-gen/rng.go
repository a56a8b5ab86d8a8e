package main

import (
	"encoding/hex"
	"hash/fnv"
	"math"
	"math/rand/v2"
	"time"
)

// newRand returns a generator determined by the user's seed and a stream
// name, so that each output file has its own stream and changing one part
// of the generator does not shift the random numbers of the others.
func newRand(seed uint64, stream string) *rand.Rand {
	h := fnv.New64a()
	h.Write([]byte(stream))
	return rand.New(rand.NewPCG(seed, h.Sum64()))
}

// between returns a uniformly distributed integer in [lo, hi].
func between(r *rand.Rand, lo, hi int) int {
	return lo + r.IntN(hi-lo+1)
}

// jitter returns a log-normally distributed duration with the given median
// and shape sigma (the standard deviation of its logarithm).
func jitter(r *rand.Rand, median time.Duration, sigma float64) time.Duration {
	return time.Duration(float64(median) * math.Exp(sigma*r.NormFloat64()))
}

// poisson draws from a Poisson distribution with mean lambda: Knuth's
// multiplication method for small means, a rounded normal approximation
// (continuity-corrected) for large ones.
func poisson(r *rand.Rand, lambda float64) int64 {
	switch {
	case lambda <= 0:
		return 0
	case lambda < 30:
		l := math.Exp(-lambda)
		var k int64
		p := 1.0
		for {
			p *= r.Float64()
			if p <= l {
				return k
			}
			k++
		}
	default:
		v := math.Floor(lambda + math.Sqrt(lambda)*r.NormFloat64() + 0.5)
		return int64(math.Max(0, v))
	}
}

// pick returns an index into weights chosen with probability proportional
// to its weight. weights must not all be zero.
func pick(r *rand.Rand, weights []int) int {
	total := 0
	for _, w := range weights {
		total += w
	}
	x := r.IntN(total)
	for i, w := range weights {
		if x < w {
			return i
		}
		x -= w
	}
	return len(weights) - 1
}

// hexID returns n random bytes as lower-case hex, never all zero (an all-zero
// trace or span ID is invalid in OTLP).
func hexID(r *rand.Rand, n int) string {
	b := make([]byte, n)
	for {
		nonzero := false
		for i := range b {
			b[i] = byte(r.Uint32())
			nonzero = nonzero || b[i] != 0
		}
		if nonzero {
			return hex.EncodeToString(b)
		}
	}
}
