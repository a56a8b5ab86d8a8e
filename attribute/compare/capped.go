package compare

import (
	"cmp"
	"fmt"
	"math"
	"slices"
)

// CappedValues is a mergeable sample of non-negative per-request values.
//
// Up to MaxVectorValues values it holds all of them. Beyond that it holds a
// systematic subsample of the sorted values: the k = MaxVectorValues order
// statistics at ranks ⌊(i+½)·Count/k⌋, i = 0…k−1, each standing for
// Count/k values. Sum stays exact, so means (Sum/Count, or Sum over all
// requests) are exact. The thinning error is bounded: the empirical
// distribution of Values differs from that of all values by at most 1/k in
// every quantile (Kolmogorov distance ≤ 1/k), and the plain mean of Values
// differs from the exact mean by at most (max − min)/k, because each kept
// value lies inside the block of Count/k consecutive order statistics it
// stands for. Merging thinned vectors (MergeSnapshots) thins again and can
// add the same error once more. Tests run on a thinned vector see k values,
// not Count: their p-values and intervals are those of a smaller sample,
// i.e. conservative.
type CappedValues struct {
	// Values are ascending, finite and non-negative; at most
	// MaxVectorValues of them.
	Values []float64 `json:"values"`
	// Count is the number of values Values stands for (≥ len(Values)).
	Count int64 `json:"count"`
	// Sum is the exact sum of all Count values.
	Sum float64 `json:"sum"`
}

// newCappedValues returns the capped form of the ascending values sorted,
// or nil for an empty slice.
func newCappedValues(sorted []float64) *CappedValues {
	if len(sorted) == 0 {
		return nil
	}
	s := 0.0
	for _, v := range sorted {
		s += v
	}
	return &CappedValues{Values: systematic(sorted, MaxVectorValues), Count: int64(len(sorted)), Sum: s}
}

// systematic returns sorted itself when it has at most k values, else the k
// values at ranks ⌊(i+½)·n/k⌋ in a new slice.
func systematic(sorted []float64, k int) []float64 {
	n := len(sorted)
	if n <= k {
		return sorted
	}
	out := make([]float64, k)
	for i := range out {
		out[i] = sorted[int((float64(i)+0.5)*float64(n)/float64(k))]
	}
	return out
}

// mergeCapped merges capped vectors as if all the values they stand for
// were pooled: unthinned vectors whose values fit are concatenated; else
// each value weighs Count/len(Values) and the result is the systematic
// subsample of the weighted pooled distribution. Nil vectors are skipped;
// the result is nil when all are nil.
func mergeCapped(vs ...*CappedValues) *CappedValues {
	var out CappedValues
	exact := true
	n := 0
	for _, v := range vs {
		if v == nil {
			continue
		}
		out.Count += v.Count
		out.Sum += v.Sum
		n += len(v.Values)
		if int64(len(v.Values)) != v.Count {
			exact = false
		}
	}
	if out.Count == 0 {
		return nil
	}
	if exact && n <= MaxVectorValues {
		out.Values = make([]float64, 0, n)
		for _, v := range vs {
			if v != nil {
				out.Values = append(out.Values, v.Values...)
			}
		}
		slices.Sort(out.Values)
		return &out
	}
	type wv struct{ v, w float64 }
	pool := make([]wv, 0, n)
	for _, v := range vs {
		if v == nil || len(v.Values) == 0 {
			continue
		}
		w := float64(v.Count) / float64(len(v.Values))
		for _, x := range v.Values {
			pool = append(pool, wv{x, w})
		}
	}
	if len(pool) == 0 {
		return nil // counts without values: not a valid vector
	}
	slices.SortStableFunc(pool, func(a, b wv) int { return cmp.Compare(a.v, b.v) })
	k := int(min(out.Count, MaxVectorValues))
	out.Values = make([]float64, k)
	total := float64(out.Count)
	j, cum := 0, pool[0].w
	for i := range out.Values {
		target := (float64(i) + 0.5) * total / float64(k)
		for cum <= target && j < len(pool)-1 {
			j++
			cum += pool[j].w
		}
		out.Values[i] = pool[j].v
	}
	return &out
}

func (v *CappedValues) validate(requests int64) error {
	if v == nil {
		return nil
	}
	n := int64(len(v.Values))
	switch {
	case n > MaxVectorValues:
		return fmt.Errorf("%d values, more than %d", n, MaxVectorValues)
	case v.Count < n:
		return fmt.Errorf("count %d is below its %d values", v.Count, n)
	case n == 0 && v.Count > 0:
		return fmt.Errorf("count %d with no values", v.Count)
	case requests > 0 && v.Count > requests:
		return fmt.Errorf("count %d exceeds the %d requests", v.Count, requests)
	case !(v.Sum >= 0) || math.IsInf(v.Sum, 1):
		return fmt.Errorf("sum %v is not a finite non-negative number", v.Sum)
	}
	for i, x := range v.Values {
		if !(x >= 0) || math.IsInf(x, 1) {
			return fmt.Errorf("value %d (%v) is not finite and non-negative", i, x)
		}
		if i > 0 && x < v.Values[i-1] {
			return fmt.Errorf("values are not ascending at %d", i)
		}
	}
	if n == v.Count {
		var s float64
		for _, x := range v.Values {
			s += x
		}
		if math.Abs(s-v.Sum) > 1e-9*math.Max(1, math.Abs(v.Sum)) {
			return fmt.Errorf("sum %v differs from the sum of its values %v", v.Sum, s)
		}
	}
	return nil
}

func cloneCapped(v *CappedValues) *CappedValues {
	if v == nil {
		return nil
	}
	return &CappedValues{Values: slices.Clone(v.Values), Count: v.Count, Sum: v.Sum}
}
