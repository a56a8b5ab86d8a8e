package traces

import (
	"cmp"
	"math/rand/v2"
	"slices"
	"testing"
)

func TestSortSpanKeys(t *testing.T) {
	// Assembly orders a trace's spans by span ID, the first read first
	// among equal IDs (the one kept), and its paths by start time and span
	// ID; short runs are sorted by insertion, long ones by the library.
	// Both must give what a stable sort of the input order gives.
	r := rand.New(rand.NewPCG(5, 5))
	for n := range 130 {
		keys := make([]spanKey, n)
		emits := make([]emitKey, n)
		for i := range keys {
			keys[i] = spanKey{id: r.Uint64N(uint64(n/2 + 1)), i: int32(i)} // with equal IDs
			emits[i] = emitKey{start: r.Int64N(int64(n/3 + 1)), id: uint64(i) * 7919 % 131, k: int32(i)}
		}
		want := slices.Clone(keys)
		slices.SortStableFunc(want, func(a, b spanKey) int { return cmp.Compare(a.id, b.id) })
		sortSpanKeys(keys)
		if !slices.Equal(keys, want) {
			t.Fatalf("%d span keys: got %v, want %v", n, keys, want)
		}
		wantE := slices.Clone(emits)
		slices.SortStableFunc(wantE, func(a, b emitKey) int {
			return cmp.Or(cmp.Compare(a.start, b.start), cmp.Compare(a.id, b.id))
		})
		sortEmitKeys(emits)
		if !slices.Equal(emits, wantE) {
			t.Fatalf("%d emit keys: got %v, want %v", n, emits, wantE)
		}
	}
}
