package traces

import (
	"cmp"
	"math/rand/v2"
	"slices"
	"testing"
)

func TestSortKeys(t *testing.T) {
	// Assembly orders a trace's spans by span ID, the first read first
	// among equal IDs (the one kept), and its paths by start time and span
	// ID. Short runs are sorted by insertion, long ones by the library;
	// both must give what a stable sort of the input order gives.
	r := rand.New(rand.NewPCG(5, 5))
	for n := range 130 {
		keys := make([]assemblyKey, n)
		for i := range keys {
			keys[i] = assemblyKey{id: r.Uint64N(uint64(n/2 + 1)), i: int32(i)} // equal IDs
			if n%2 == 1 {
				keys[i].major = r.Int64N(int64(n/3 + 1)) // equal start times
			}
		}
		want := slices.Clone(keys)
		slices.SortStableFunc(want, func(a, b assemblyKey) int {
			return cmp.Or(cmp.Compare(a.major, b.major), cmp.Compare(a.id, b.id))
		})
		sortKeys(keys)
		if !slices.Equal(keys, want) {
			t.Fatalf("%d keys: got %v, want %v", n, keys, want)
		}
	}
}
