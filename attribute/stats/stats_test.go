package stats

import (
	"math"
	"math/rand/v2"
	"strconv"
	"strings"
	"testing"

	"gonum.org/v1/gonum/stat/distuv"
)

// Tags in the comments beside reference checks:
//   [pub]  the value is printed in the cited source;
//   [comp] computed with SciPy 1.10 / statsmodels 0.13 or by hand, as noted;
//   (unconfirmed) not checked against the primary text.
// A value written as a string is compared to half a unit in its last shown
// digit (always at least as strict as 1e-3 when three or more decimals are
// shown), so the check agrees with the source to the precision it prints.

// checkPub fails t unless got rounds to the value printed as want.
func checkPub(t *testing.T, what string, got float64, want string) {
	t.Helper()
	w, err := strconv.ParseFloat(want, 64)
	if err != nil {
		t.Fatalf("%s: bad reference value %q: %v", what, want, err)
	}
	tol := 0.5
	if i := strings.IndexByte(want, '.'); i >= 0 {
		tol = 0.5 * math.Pow(10, -float64(len(want)-i-1))
	}
	if !(math.Abs(got-w) <= tol*(1+1e-9)) {
		t.Errorf("%s = %.6g, want %s (±%.1g)", what, got, want, tol)
	}
}

// checkNear fails t unless got is within tol of want (both may be ±Inf).
func checkNear(t *testing.T, what string, got, want, tol float64) {
	t.Helper()
	if got == want {
		return
	}
	if !(math.Abs(got-want) <= tol) {
		t.Errorf("%s = %.12g, want %.12g (±%g)", what, got, want, tol)
	}
}

func TestPoissonRateTest(t *testing.T) {
	tests := []struct {
		name           string
		xb, xc, tb, tc float64
		rr, lo, hi     string
		waldLo, waldHi string
		p              string
	}{
		// [comp] baseline 120 vs candidate 180 samples, equal exposure:
		// RR = 1.5, Wald CI (1.191, 1.890), exact CI (1.184, 1.906), exact p = 0.0006.
		{name: "120 vs 180", xb: 120, xc: 180, tb: 1, tc: 1, rr: "1.5", lo: "1.184", hi: "1.906", waldLo: "1.191", waldHi: "1.890", p: "0.0006"},
		// [comp] 100 vs 130 per 1,000 requests: exact p = 0.0556.
		{name: "100 vs 130", xb: 100, xc: 130, tb: 1000, tc: 1000, rr: "1.30", p: "0.0556"},
		// Counts arrive as float64 and are rounded.
		{name: "rounded counts", xb: 119.6, xc: 180.4, tb: 1, tc: 1, rr: "1.500", p: "0.0006"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			r := PoissonRateTest(tt.xb, tt.xc, tt.tb, tt.tc)
			for _, c := range []struct {
				what string
				got  float64
				want string
			}{
				{"RR", r.RR, tt.rr}, {"Lo", r.Lo, tt.lo}, {"Hi", r.Hi, tt.hi},
				{"WaldLo", r.WaldLo, tt.waldLo}, {"WaldHi", r.WaldHi, tt.waldHi}, {"P", r.P, tt.p},
			} {
				if c.want != "" {
					checkPub(t, c.what, c.got, c.want)
				}
			}
		})
	}

	t.Run("edge counts", func(t *testing.T) {
		// Computed by hand from the definitions: with 0 vs 5 at equal
		// exposure, P = 2·0.5⁵ and the finite exact bound is q/(1−q) with
		// q = 0.025^(1/5) (the one-sided Clopper–Pearson limit).
		inf, q := math.Inf(1), math.Pow(0.025, 0.2)
		for _, tt := range []struct {
			name           string
			xb, xc         float64
			rr, lo, hi     float64
			waldLo, waldHi float64
			p              float64
		}{
			{name: "base zero", xb: 0, xc: 5, rr: inf, lo: q / (1 - q), hi: inf, waldLo: 0, waldHi: inf, p: 2 * math.Pow(0.5, 5)},
			{name: "candidate zero", xb: 5, xc: 0, rr: 0, lo: 0, hi: (1 - q) / q, waldLo: 0, waldHi: inf, p: 2 * math.Pow(0.5, 5)},
			{name: "both zero", xb: 0, xc: 0, rr: math.NaN(), lo: 0, hi: inf, waldLo: 0, waldHi: inf, p: 1},
		} {
			t.Run(tt.name, func(t *testing.T) {
				r := PoissonRateTest(tt.xb, tt.xc, 2, 2)
				checkNear(t, "Lo", r.Lo, tt.lo, 1e-12)
				checkNear(t, "Hi", r.Hi, tt.hi, 1e-12)
				checkNear(t, "WaldLo", r.WaldLo, tt.waldLo, 0)
				checkNear(t, "WaldHi", r.WaldHi, tt.waldHi, 0)
				checkNear(t, "P", r.P, tt.p, 1e-12)
				if math.IsNaN(tt.rr) != math.IsNaN(r.RR) || (!math.IsNaN(tt.rr) && r.RR != tt.rr) {
					t.Errorf("RR = %g, want %g", r.RR, tt.rr)
				}
			})
		}
	})

	t.Run("invalid input", func(t *testing.T) {
		for _, in := range [][4]float64{
			{-1, 3, 1, 1}, {math.NaN(), 3, 1, 1}, {1, math.Inf(1), 1, 1},
			{1, 3, 0, 1}, {1, 3, 1, -2}, {1, 3, math.Inf(1), 1}, {1, 3, 1, math.NaN()},
		} {
			r := PoissonRateTest(in[0], in[1], in[2], in[3])
			if !math.IsNaN(r.P) || !math.IsNaN(r.RR) || !math.IsNaN(r.Lo) {
				t.Errorf("PoissonRateTest(%v) = %+v, want NaN fields", in, r)
			}
		}
	})

	t.Run("swap symmetry", func(t *testing.T) {
		// Swapping the sides inverts RR and its interval and keeps p.
		a := PoissonRateTest(37, 61, 3, 5)
		b := PoissonRateTest(61, 37, 5, 3)
		checkNear(t, "P", b.P, a.P, 1e-12)
		checkNear(t, "RR", b.RR, 1/a.RR, 1e-12)
		checkNear(t, "Lo", b.Lo, 1/a.Hi, 1e-9)
		checkNear(t, "Hi", b.Hi, 1/a.Lo, 1e-9)
	})

	t.Run("exposure scales the ratio", func(t *testing.T) {
		// Same counts, candidate observed twice as long: half the rate ratio.
		a := PoissonRateTest(50, 100, 1, 1)
		b := PoissonRateTest(50, 100, 1, 2)
		checkNear(t, "RR", b.RR, a.RR/2, 1e-12)
		checkNear(t, "Lo", b.Lo, a.Lo/2, 1e-9)
		checkNear(t, "Hi", b.Hi, a.Hi/2, 1e-9)
		if b.P < 0.5 {
			t.Errorf("P = %g for 50 vs 100 at double exposure (no rate change), want large", b.P)
		}
	})

	t.Run("exact p against pmf sum", func(t *testing.T) {
		// The doubled smaller tail, summed term by term from gonum's
		// binomial pmf, for unequal exposure.
		xb, xc, tb, tc := 14.0, 31.0, 2.0, 3.0
		n, k := 45, 31
		d := distuv.Binomial{N: float64(n), P: tc / (tb + tc)}
		var low, high float64
		for i := 0; i <= n; i++ {
			if i <= k {
				low += d.Prob(float64(i))
			}
			if i >= k {
				high += d.Prob(float64(i))
			}
		}
		checkNear(t, "P", PoissonRateTest(xb, xc, tb, tc).P, math.Min(1, 2*math.Min(low, high)), 1e-12)
	})

	t.Run("large counts", func(t *testing.T) {
		// 10⁸ vs 1.0001·10⁸: given n = 2.0001·10⁸, xc is binomial(n, ½)
		// under the null, z = (xc − n/2)/(√n/2) ≈ 0.707, p = erfc(z/√2) ≈
		// 0.4795 (normal approximation, computed by hand); the exact test
		// must agree closely.
		r := PoissonRateTest(1e8, 1.0001e8, 1, 1)
		z := (1.0001e8 - 2.0001e8/2) / (math.Sqrt(2.0001e8) / 2)
		checkNear(t, "P", r.P, math.Erfc(z/math.Sqrt2), 1e-4)
		checkNear(t, "Lo", r.Lo, r.WaldLo, 1e-6)
		checkNear(t, "Hi", r.Hi, r.WaldHi, 1e-6)
	})
}

func TestClopperPearson(t *testing.T) {
	for _, tt := range []struct {
		name string
		k, n int
		conf float64
	}{
		{"middle", 180, 300, 0.95},
		{"small k", 3, 3000, 0.95},
		{"k one", 1, 10, 0.90},
		{"k n-1", 9, 10, 0.99},
	} {
		t.Run(tt.name, func(t *testing.T) {
			// Defining property (Clopper & Pearson, Biometrika 26, 1934): at the
			// lower limit P[X ≥ k] = α/2, at the upper limit P[X ≤ k] = α/2,
			// checked with gonum's binomial distribution.
			lo, hi := ClopperPearson(tt.k, tt.n, tt.conf)
			a := (1 - tt.conf) / 2
			n := float64(tt.n)
			checkNear(t, "P[X≥k] at lo", distuv.Binomial{N: n, P: lo}.Survival(float64(tt.k-1)), a, 1e-9)
			checkNear(t, "P[X≤k] at hi", distuv.Binomial{N: n, P: hi}.CDF(float64(tt.k)), a, 1e-9)
		})
	}
	t.Run("bounds", func(t *testing.T) {
		// k = 0 and k = n: one-sided, α/2 in the other tail (computed by hand:
		// (α/2)^(1/n)).
		lo, hi := ClopperPearson(0, 10, 0.95)
		checkNear(t, "lo", lo, 0, 0)
		checkNear(t, "hi", hi, 1-math.Pow(0.025, 0.1), 1e-9)
		lo, hi = ClopperPearson(10, 10, 0.95)
		checkNear(t, "lo", lo, math.Pow(0.025, 0.1), 1e-9)
		checkNear(t, "hi", hi, 1, 0)
		lo, hi = ClopperPearson(0, 0, 0.95)
		if lo != 0 || hi != 1 {
			t.Errorf("n = 0: (%g, %g), want (0, 1)", lo, hi)
		}
		for _, in := range []struct {
			k, n int
			conf float64
		}{{-1, 5, 0.95}, {6, 5, 0.95}, {1, 5, 1}, {1, 5, 0}, {1, 5, math.NaN()}} {
			if lo, hi := ClopperPearson(in.k, in.n, in.conf); !math.IsNaN(lo) || !math.IsNaN(hi) {
				t.Errorf("ClopperPearson(%d, %d, %g) = (%g, %g), want NaN", in.k, in.n, in.conf, lo, hi)
			}
		}
	})
}

func TestBinomialSE(t *testing.T) {
	t.Run("profile share", func(t *testing.T) {
		// [comp] methods §7: n = 3,000 samples, p̂ = 0.10 → SE 0.548 pp.
		checkPub(t, "SE (pp)", 100*BinomialSE(300, 3000), "0.548")
	})
	t.Run("SE invalid", func(t *testing.T) {
		for _, kn := range [][2]int{{0, 0}, {-1, 4}, {5, 4}} {
			if se := BinomialSE(kn[0], kn[1]); !math.IsNaN(se) {
				t.Errorf("BinomialSE(%d, %d) = %g, want NaN", kn[0], kn[1], se)
			}
		}
		if se := BinomialSE(0, 10); se != 0 {
			t.Errorf("BinomialSE(0, 10) = %g, want 0", se)
		}
	})
}

func TestFalseDiscoveryRate(t *testing.T) {
	// Benjamini & Hochberg, JRSS B 57(1), 1995: the 15 p-values of their
	// example [pub p-values; counts recomputed]; adjusted values [comp].
	p := []float64{0.0001, 0.0004, 0.0019, 0.0095, 0.0201, 0.0278, 0.0298, 0.0344,
		0.0459, 0.3240, 0.4262, 0.5719, 0.6528, 0.7590, 1.000}
	t.Run("bh paper example", func(t *testing.T) {
		q := BenjaminiHochberg(p)
		for i, want := range []string{"0.0015", "0.0030", "0.0095", "0.0356", "0.0603"} {
			checkPub(t, "q["+strconv.Itoa(i)+"]", q[i], want)
		}
		rejected := 0
		for _, v := range q {
			if v <= 0.05 {
				rejected++
			}
		}
		if rejected != 4 {
			t.Errorf("rejected %d at q = 0.05, want 4", rejected)
		}
	})
	t.Run("input order kept", func(t *testing.T) {
		want := BenjaminiHochberg(p)
		perm := rand.New(rand.NewPCG(1, 2)).Perm(len(p))
		shuffled := make([]float64, len(p))
		for i, j := range perm {
			shuffled[i] = p[j]
		}
		got := BenjaminiHochberg(shuffled)
		for i, j := range perm {
			checkNear(t, "q", got[i], want[j], 0)
		}
	})
	t.Run("nan and empty", func(t *testing.T) {
		if q := BenjaminiHochberg(nil); q != nil {
			t.Errorf("nil input: %v, want nil", q)
		}
		q := BenjaminiHochberg([]float64{0.04, math.NaN(), 0.01})
		if !math.IsNaN(q[1]) {
			t.Errorf("q[1] = %g, want NaN", q[1])
		}
		// m = 2 (the NaN does not count): 0.01·2/1 = 0.02, 0.04·2/2 = 0.04.
		checkNear(t, "q[0]", q[0], 0.04, 1e-15)
		checkNear(t, "q[2]", q[2], 0.02, 1e-15)
	})
	t.Run("ties", func(t *testing.T) {
		q := BenjaminiHochberg([]float64{0.03, 0.03, 0.03})
		for i := range q {
			checkNear(t, "q", q[i], 0.03, 1e-15)
		}
	})
}

func TestMinDetectable(t *testing.T) {
	// [comp] methods §6: α = 0.05, power 0.8 → 2.8016 on the log scale.
	for _, tt := range []struct {
		name string
		c    float64
		want string
	}{
		{"100", 100, "1.486"},
		{"400", 400, "1.219"},
		{"2500", 2500, "1.082"},
	} {
		t.Run("ratio "+tt.name, func(t *testing.T) {
			checkPub(t, "ratio", MinDetectableRatio(tt.c, tt.c, 0.05, 0.8), tt.want)
		})
	}
	t.Run("multiplier", func(t *testing.T) {
		// [comp] z_{0.975} + z_{0.8} = 2.8016.
		checkPub(t, "z sum", powerZ(0.05, 0.8), "2.8016")
	})
	t.Run("invalid", func(t *testing.T) {
		if v := MinDetectableRatio(0, 10, 0.05, 0.8); !math.IsInf(v, 1) {
			t.Errorf("zero count: %g, want +Inf", v)
		}
		if v := MinDetectableRatio(10, 10, 0, 0.8); !math.IsNaN(v) {
			t.Errorf("alpha 0: %g, want NaN", v)
		}
		if v := MinDetectableRatio(10, 10, 0.05, 1); !math.IsNaN(v) {
			t.Errorf("power 1: %g, want NaN", v)
		}
	})
}

func TestDistributionTails(t *testing.T) {
	t.Run("binomial", func(t *testing.T) {
		// Against gonum's distuv.Binomial (CDF and Survival) and an
		// independent term-by-term sum of the pmf (our own, from log-gamma:
		// distuv.Binomial.Prob is NaN at P = 0 and P = 1).
		for _, n := range []int{1, 2, 7, 30, 120, 501} {
			for _, p := range []float64{0, 0.01, 0.2, 0.5, 0.73, 0.999, 1} {
				d := distuv.Binomial{N: float64(n), P: p}
				sum := 0.0
				for k := -1; k <= n+1; k++ {
					pmf := binomPMF(k, n, p)
					sum += pmf
					cdf, sf := binomCDF(k, n, p), binomSF(k, n, p)
					checkNear(t, "binomCDF vs distuv", cdf, d.CDF(float64(k)), 1e-12)
					checkNear(t, "binomCDF vs pmf sum", cdf, math.Min(1, sum), 1e-9)
					checkNear(t, "binomSF vs distuv", sf, d.Survival(float64(k-1)), 1e-12)
					checkNear(t, "P[X≤k] + P[X≥k] − P[X=k]", cdf+sf-pmf, 1, 1e-9)
				}
			}
		}
	})
	t.Run("normal", func(t *testing.T) {
		for _, p := range []float64{1e-10, 0.001, 0.025, 0.2, 0.5, 0.8, 0.975, 0.999} {
			checkNear(t, "normQuantile", normQuantile(p), distuv.UnitNormal.Quantile(p), 1e-12)
		}
		// Standard normal table (recalled from memory): z_{0.975} = 1.959964.
		checkPub(t, "z_0.975", normQuantile(0.975), "1.959964")
		if v := normQuantile(1.2); !math.IsNaN(v) {
			t.Errorf("normQuantile(1.2) = %g, want NaN", v)
		}
	})
}

// binomPMF returns P[X = k] for X ~ Bin(n, p), computed from log-gamma.
func binomPMF(k, n int, p float64) float64 {
	switch {
	case k < 0 || k > n:
		return 0
	case p == 0 || p == 1:
		if (p == 0 && k == 0) || (p == 1 && k == n) {
			return 1
		}
		return 0
	}
	lg := func(x int) float64 { v, _ := math.Lgamma(float64(x) + 1); return v }
	return math.Exp(lg(n) - lg(k) - lg(n-k) + float64(k)*math.Log(p) + float64(n-k)*math.Log1p(-p))
}
