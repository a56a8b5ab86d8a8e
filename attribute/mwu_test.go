package attribute

import (
	"fmt"
	"math"
	"math/bits"
	"math/rand/v2"
	"slices"
	"testing"
)

func TestMannWhitneyReference(t *testing.T) {
	tests := []struct {
		name               string
		a, b               []float64
		r1, u1, u2, tieSum string
		sigma, z, p, pCorr string
		pExact, effect     string
		exact              bool
	}{
		// [pub] Shier, "Statistics: 2.3 The Mann–Whitney U test", Mathematics
		// Learning Support Centre, 2004 (reused in SciPy docs): U = 17 and 3;
		// exact two-sided p = 0.1111; normal, no correction 0.0864 (handout
		// ≈ 0.09); corrected 0.1113. A = 0.85 [comp].
		{
			name: "shier 2004",
			a:    []float64{19, 22, 16, 29, 24}, b: []float64{20, 11, 17, 12},
			u1: "17", u2: "3", tieSum: "0", p: "0.0864", pCorr: "0.1113", pExact: "0.1111", effect: "0.85",
			exact: true,
		},
		// [comp] ties: R1 = 50, U1 = 29, Σ(t³−t) = 48, σ = 6.1570, z = 1.7866,
		// p = 0.0740 (0.0881 with correction).
		{
			name: "ties",
			a:    []float64{12, 15, 15, 18, 20, 22}, b: []float64{10, 12, 12, 14, 15, 16},
			r1: "50", u1: "29", tieSum: "48", sigma: "6.1570", z: "1.7866", p: "0.0740", pCorr: "0.0881",
		},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			r := MannWhitney(tt.a, tt.b)
			for _, c := range []struct {
				what string
				got  float64
				want string
			}{
				{"R1", r.R1, tt.r1}, {"U1", r.U1, tt.u1}, {"U2", r.U2, tt.u2}, {"TieSum", r.TieSum, tt.tieSum},
				{"Sigma", r.Sigma, tt.sigma}, {"Z", r.Z, tt.z}, {"P", r.P, tt.p},
				{"PCorrected", r.PCorrected, tt.pCorr}, {"PExact", r.PExact, tt.pExact}, {"A", r.A, tt.effect},
			} {
				if c.want != "" {
					checkPub(t, c.what, c.got, c.want)
				}
			}
			if r.Exact != tt.exact {
				t.Errorf("Exact = %v, want %v", r.Exact, tt.exact)
			}
			if !r.Exact && !math.IsNaN(r.PExact) {
				t.Errorf("PExact = %g without Exact, want NaN", r.PExact)
			}
			if want := bruteHL(tt.a, tt.b); r.HL != want {
				t.Errorf("HL = %g, want %g (median of all differences)", r.HL, want)
			}
		})
	}
}

func TestMannWhitneyProperties(t *testing.T) {
	t.Run("swap", func(t *testing.T) {
		a := []float64{3.1, 4.7, 2.2, 9.0, 5.5, 5.5, 6.1}
		b := []float64{1.0, 2.2, 3.3, 4.4, 0.5}
		x, y := MannWhitney(a, b), MannWhitney(b, a)
		checkNear(t, "U1↔U2", x.U1, y.U2, 0)
		checkNear(t, "Z", x.Z, -y.Z, 1e-12)
		checkNear(t, "P", x.P, y.P, 1e-12)
		checkNear(t, "PCorrected", x.PCorrected, y.PCorrected, 1e-12)
		checkNear(t, "A", x.A, 1-y.A, 1e-12)
		checkNear(t, "HL", x.HL, -y.HL, 1e-12)
	})
	t.Run("U counts pairs", func(t *testing.T) {
		// U1 is the number of pairs with a_i > b_j plus half the ties
		// (Mann & Whitney, Ann. Math. Stat. 18, 1947), counted directly.
		rng := rand.New(rand.NewPCG(3, 4))
		for range 50 {
			a, b := roundedSample(rng, 1+rng.IntN(30)), roundedSample(rng, 1+rng.IntN(30))
			want := 0.0
			for _, x := range a {
				for _, y := range b {
					switch {
					case x > y:
						want++
					case x == y:
						want += 0.5
					}
				}
			}
			r := MannWhitney(a, b)
			checkNear(t, "U1", r.U1, want, 1e-9)
			checkNear(t, "HL", r.HL, bruteHL(a, b), 0)
		}
	})
	t.Run("all tied", func(t *testing.T) {
		r := MannWhitney([]float64{4, 4, 4}, []float64{4, 4})
		if r.Sigma != 0 || r.Z != 0 || r.P != 1 || r.PCorrected != 1 || r.A != 0.5 || r.HL != 0 || r.Exact {
			t.Errorf("got %+v, want σ 0, Z 0, p 1, A 0.5, HL 0, not exact", r)
		}
	})
	t.Run("empty side", func(t *testing.T) {
		for _, r := range []MWUResult{MannWhitney(nil, []float64{1, 2}), MannWhitney([]float64{1}, nil)} {
			if r.P != 1 || r.PCorrected != 1 || !math.IsNaN(r.A) || !math.IsNaN(r.HL) || r.Exact {
				t.Errorf("got %+v, want p 1 and NaN effect sizes", r)
			}
		}
	})
	t.Run("non-finite dropped", func(t *testing.T) {
		got := MannWhitney([]float64{19, math.NaN(), 22, 16, 29, 24, math.Inf(1)}, []float64{20, 11, math.Inf(-1), 17, 12})
		want := MannWhitney([]float64{19, 22, 16, 29, 24}, []float64{20, 11, 17, 12})
		if got.N1 != 5 || got.N2 != 4 || got.U1 != want.U1 || got.PExact != want.PExact || got.HL != want.HL {
			t.Errorf("got %+v, want %+v", got, want)
		}
	})
	t.Run("input not modified", func(t *testing.T) {
		a := []float64{3, 1, 2}
		MannWhitney(a, []float64{0})
		if !slices.Equal(a, []float64{3, 1, 2}) {
			t.Errorf("input changed to %v", a)
		}
	})
	t.Run("exact limits", func(t *testing.T) {
		a, b := make([]float64, 21), make([]float64, 3)
		for i := range a {
			a[i] = float64(2 * i)
		}
		for i := range b {
			b[i] = float64(2*i + 1)
		}
		if MannWhitney(a, b).Exact {
			t.Error("Exact with n1 = 21")
		}
		if !MannWhitney(a[:20], b).Exact {
			t.Error("not Exact with n1 = 20, no ties")
		}
	})
	t.Run("large samples", func(t *testing.T) {
		// 20,000 per side: 4·10⁸ pairs; the Hodges–Lehmann median must still
		// be exact. b is a shifted by 0.25 (plus noise), so HL ≈ −0.25 and A < 0.5.
		rng := rand.New(rand.NewPCG(9, 9))
		a, b := make([]float64, 20000), make([]float64, 20000)
		for i := range a {
			a[i] = rng.ExpFloat64()
			b[i] = rng.ExpFloat64() + 0.25
		}
		r := MannWhitney(a, b)
		checkNear(t, "HL", r.HL, -0.25, 0.03)
		if !(r.A < 0.5 && r.P < 1e-6) {
			t.Errorf("A = %g, P = %g: shift not detected", r.A, r.P)
		}
		// Cross-check the selection on a subsample small enough for brute force.
		checkNear(t, "HL subsample", MannWhitney(a[:300], b[:250]).HL, bruteHL(a[:300], b[:250]), 0)
	})
}

func TestMannWhitneyExactDistribution(t *testing.T) {
	// The exact null of U (Mann & Whitney, Ann. Math. Stat. 18, 1947) by
	// enumerating every placement of the a's among n1+n2 ranks.
	for _, sz := range [][2]int{{1, 1}, {1, 5}, {3, 3}, {4, 5}, {5, 4}, {6, 7}, {2, 9}} {
		n1, n2 := sz[0], sz[1]
		t.Run(fmt.Sprintf("%dx%d", n1, n2), func(t *testing.T) {
			counts := make([]int, n1*n2+1)
			total := 0
			for mask := 0; mask < 1<<(n1+n2); mask++ {
				if bits.OnesCount(uint(mask)) != n1 {
					continue
				}
				u, bsBelow := 0, 0
				for pos := range n1 + n2 {
					if mask>>pos&1 == 1 {
						u += bsBelow
					} else {
						bsBelow++
					}
				}
				counts[u]++
				total++
			}
			for u := range counts {
				lower := 0
				for _, c := range counts[:u+1] {
					lower += c
				}
				want := math.Min(1, 2*float64(lower)/float64(total))
				if u > n1*n2/2 {
					continue // only the smaller U is passed
				}
				checkNear(t, "p", mwuExactP(u, n1, n2), want, 1e-15)
			}
		})
	}
	t.Run("table value", func(t *testing.T) {
		// n1 = n2 = 3, U = 0: one arrangement of C(6,3) = 20, two-sided
		// p = 0.1 (computed by hand).
		checkNear(t, "p", mwuExactP(0, 3, 3), 0.1, 1e-15)
		// Largest case: n1 = n2 = 20, C(40,20) = 137846528820 arrangements;
		// U = 0 gives 2/137846528820 (computed by hand).
		checkNear(t, "p", mwuExactP(0, 20, 20)*137846528820, 2, 1e-9)
	})
}

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

func TestFloatKey(t *testing.T) {
	vals := []float64{math.Inf(-1), -1e308, -3.5, -math.SmallestNonzeroFloat64, math.Copysign(0, -1), 0,
		math.SmallestNonzeroFloat64, 1, 2.5, 1e308, math.Inf(1)}
	for i, v := range vals {
		if got := keyFloat(floatKey(v)); math.Float64bits(got) != math.Float64bits(v) {
			t.Errorf("round trip of %g gave %g", v, got)
		}
		if i > 0 && !(floatKey(vals[i-1]) < floatKey(v)) {
			t.Errorf("key order broken between %g and %g", vals[i-1], v)
		}
	}
}

// bruteHL returns the median of all differences a_i − b_j.
func bruteHL(a, b []float64) float64 {
	var d []float64
	for _, x := range a {
		for _, y := range b {
			d = append(d, x-y)
		}
	}
	return median(d)
}

// roundedSample returns n values on a coarse grid, so that ties are common.
func roundedSample(rng *rand.Rand, n int) []float64 {
	x := make([]float64, n)
	for i := range x {
		x[i] = math.Round(rng.NormFloat64()*4) / 2
	}
	return x
}

// median returns the median of x (a sorted copy's Quantile at 0.5).
func median(x []float64) float64 {
	s := slices.Clone(x)
	slices.Sort(s)
	return Quantile(s, 0.5)
}
