package stats

import (
	"math"
	"math/rand/v2"
	"slices"
	"testing"
)

func TestQuantile(t *testing.T) {
	x := []float64{1, 2, 3, 4, 5, 6, 7, 8, 9, 10}
	// Hyndman & Fan (Am. Stat. 50, 1996) type 7, computed by hand from the
	// definition: h = 9q.
	for _, tt := range []struct {
		name string
		x    []float64
		q    float64
		want float64
	}{
		{"q0", x, 0, 1},
		{"q1", x, 1, 10},
		{"q0.1", x, 0.1, 1.9},
		{"q0.25", x, 0.25, 3.25},
		{"q0.5", x, 0.5, 5.5},
		{"q0.95", x, 0.95, 9.55},
		{"clamped low", x, -1, 1},
		{"clamped high", x, 2, 10},
		{"single", []float64{4}, 0.3, 4},
		{"infinite top", []float64{1, math.Inf(1)}, 0.5, math.Inf(1)},
		{"infinite bottom", []float64{math.Inf(-1), 1}, 0.5, math.Inf(-1)},
		{"equal infinities", []float64{math.Inf(1), math.Inf(1)}, 0.5, math.Inf(1)},
	} {
		t.Run(tt.name, func(t *testing.T) {
			checkNear(t, "Quantile", Quantile(tt.x, tt.q), tt.want, 1e-12)
		})
	}
	t.Run("nan", func(t *testing.T) {
		if v := Quantile(nil, 0.5); !math.IsNaN(v) {
			t.Errorf("empty: %g", v)
		}
		if v := Quantile(x, math.NaN()); !math.IsNaN(v) {
			t.Errorf("NaN q: %g", v)
		}
	})
}

func TestBootstrapRatios(t *testing.T) {
	t.Run("coverage", func(t *testing.T) {
		// Seeded coverage run of the percentile interval (Efron, Ann. Stat. 7,
		// 1979): lognormal costs, σ = 0.5 on the log scale, n = 60 per side,
		// true ratio of means 1.2. At least 90 % of 200 nominal 95 % intervals
		// must cover it (common practice for a coverage smoke test; the
		// percentile interval undercovers a little for skewed data).
		const reps, n, ratio = 200, 60, 1.2
		rng := rand.New(rand.NewPCG(2024, 11))
		covered := 0
		b, c := make([]float64, n), make([]float64, n)
		for rep := range reps {
			for i := range n {
				b[i] = math.Exp(0.5 * rng.NormFloat64())
				c[i] = ratio * math.Exp(0.5*rng.NormFloat64())
			}
			lo, hi := BootstrapRatioBounds(BootstrapRatios(b, c, 1000, uint64(rep)), 0.05)
			if lo <= ratio && ratio <= hi {
				covered++
			}
		}
		if covered < reps*9/10 {
			t.Errorf("covered %d of %d, want ≥ %d", covered, reps, reps*9/10)
		}
		t.Logf("coverage %d/%d", covered, reps)
	})
	b := []float64{12.1, 11.8, 12.6, 13.0, 12.2}
	c := []float64{13.4, 12.9, 14.8, 13.9, 15.1}
	t.Run("deterministic", func(t *testing.T) {
		r1, r2, r3 := BootstrapRatios(b, c, 500, 42), BootstrapRatios(b, c, 500, 42), BootstrapRatios(b, c, 500, 43)
		if !slices.Equal(r1, r2) {
			t.Error("same seed, different resamples")
		}
		if slices.Equal(r1, r3) {
			t.Error("seeds 42 and 43 gave the same resamples")
		}
		if lo, hi := BootstrapRatioBounds(r1, 0.05); !(lo < 1.1361 && 1.1361 < hi) {
			t.Errorf("(%g, %g) misses the sample ratio 1.1361", lo, hi)
		}
		if !slices.Equal(BootstrapRatios(b, c, 0, 5), BootstrapRatios(b, c, DefaultBootstrapResamples, 5)) {
			t.Error("B = 0 is not the default")
		}
	})
	t.Run("p-value and interval agree", func(t *testing.T) {
		// The p-value inverts the interval: for every level γ the bounds
		// exclude 1 exactly when p ≤ γ (Efron & Tibshirani, An
		// Introduction to the Bootstrap, 1993, §16.4).
		rng := rand.New(rand.NewPCG(5, 6))
		for rep := range 200 {
			n := 5 + rep%40
			x, y := make([]float64, n), make([]float64, n)
			shift := 1 + 0.05*float64(rep%7)
			for i := range n {
				x[i] = math.Exp(rng.NormFloat64())
				y[i] = shift * math.Exp(rng.NormFloat64())
			}
			r := BootstrapRatios(x, y, 400, uint64(rep))
			p := BootstrapRatioP(r)
			for _, gamma := range []float64{0.001, 0.01, 0.05, 0.2} {
				lo, hi := BootstrapRatioBounds(r, gamma)
				if excl := lo > 1 || hi < 1; excl != (p <= gamma) {
					t.Fatalf("rep %d γ %g: p %g, interval (%g, %g)", rep, gamma, p, lo, hi)
				}
			}
		}
	})
	t.Run("invalid", func(t *testing.T) {
		if r := BootstrapRatios(nil, c, 100, 1); r != nil {
			t.Errorf("empty base: %v", r)
		}
		if lo, hi := BootstrapRatioBounds(BootstrapRatios(b, c, 100, 1), 1); !math.IsNaN(lo) || !math.IsNaN(hi) {
			t.Errorf("γ 1: (%g, %g), want NaN", lo, hi)
		}
		// An all-zero base makes every ratio +Inf (or NaN, dropped, when c is
		// zero too).
		if r := BootstrapRatios([]float64{0, 0}, []float64{1, 2}, 100, 1); !math.IsInf(r[0], 1) || BootstrapRatioP(r) != 0 {
			t.Errorf("zero base: %v", r[:3])
		}
		if r := BootstrapRatios([]float64{0, 0}, []float64{0, 0}, 100, 1); len(r) != 0 || !math.IsNaN(BootstrapRatioP(r)) {
			t.Errorf("all zero: %v", r)
		}
	})
}
