package attribute

import (
	"math/rand/v2"
	"reflect"
	"testing"
)

// span is a test span: interval [start, end] in ms and its parent (-1 for the root).
type span struct {
	start, end int64
	parent     int32
}

func buildCP(spans []span) *cpSpans {
	s := &cpSpans{kidAt: make([]int32, len(spans)+1)}
	for _, sp := range spans {
		s.start = append(s.start, sp.start)
		s.end = append(s.end, sp.end)
		if sp.parent >= 0 {
			s.kidAt[sp.parent+1]++
		}
	}
	for i := 1; i < len(s.kidAt); i++ {
		s.kidAt[i] += s.kidAt[i-1]
	}
	s.kids = make([]int32, len(spans))
	fill := append([]int32(nil), s.kidAt...)
	for i, sp := range spans {
		if sp.parent >= 0 {
			s.kids[fill[sp.parent]] = int32(i)
			fill[sp.parent]++
		}
	}
	s.kids = s.kids[:s.kidAt[len(spans)]]
	return s
}

// onPath runs the critical path from span 0 and returns each span's time on it.
func onPath(spans []span, opaque map[int32]bool) []int64 {
	s := buildCP(spans)
	got := make([]int64, len(spans))
	var sc cpScratch
	criticalPath(s, 0, func(i int32) bool { return !opaque[i] },
		func(p cpPiece) { got[p.span] += p.dur }, &sc)
	return got
}

// TestCriticalPathWorkedExamples checks the critical path on small
// requests computed by hand. Times are in ms; "own" is the root's (or a
// span's) time covered by none of its children on the path.
func TestCriticalPathWorkedExamples(t *testing.T) {
	tests := []struct {
		name   string
		spans  []span
		opaque map[int32]bool
		want   []int64
	}{
		{
			// Root [0,100]; calls A [10,30], B [30,70], C [75,95] one after another.
			// Backwards from 100: C ends last (95): own 100-95=5, C 95-75=20;
			// from 75: B ends at 70: own 5, B 40; from 30: A ends at 30: A 20;
			// from 10: nothing: own 10. Own = 5+5+10 = 20; 20+20+40+20 = 100.
			name:  "sequential calls",
			spans: []span{{0, 100, -1}, {10, 30, 0}, {30, 70, 0}, {75, 95, 0}},
			want:  []int64{20, 20, 40, 20},
		},
		{
			// Root [0,100]; A [10,90], B [10,60], C [10,40] all started at 10 (Promise.all).
			// From 100: A ends last at 90: own 10, A 80; from 10: no child starts
			// before 10: own 10. B and C are hidden behind A: 0.
			// The parallel section costs the longest branch (80), not the sum (160).
			name:  "fully parallel calls",
			spans: []span{{0, 100, -1}, {10, 90, 0}, {10, 60, 0}, {10, 40, 0}},
			want:  []int64{20, 80, 0, 0},
		},
		{
			// Root [0,100]; A [10,60], B [40,80] overlap from 40 to 60.
			// From 100: B ends last (80): own 20, B 80-40 = 40; from 40: A
			// starts before 40, its end is clipped to 40: A 40-10 = 30; from 10:
			// own 10. Own 30, A 30, B 40: 100.
			name:  "partly overlapping calls",
			spans: []span{{0, 100, -1}, {10, 60, 0}, {40, 80, 0}},
			want:  []int64{30, 30, 40},
		},
		{
			// Root [0,100] → S [0,90] (app span) → in S, X [10,50] and Y [20,80] in parallel;
			// X has children X1 [10,30], X2 [30,50] (sequential).
			// From 100: S ends at 90: root own 10. In S from 90: Y ends last (80):
			// S own 10, Y 80-20 = 60; from 20: X starts before 20, end clipped to
			// 20: X's walk over [10,20]: X1 [10,30] clipped to [10,20] → X1 10,
			// X own 0; from 10: S own 10. S = 20, X = 0, X1 = 10, Y = 60, root 10.
			// 10+20+0+60+10+0 = 100.
			name: "nested parallelism",
			spans: []span{
				{0, 100, -1}, // 0 root
				{0, 90, 0},   // 1 S
				{10, 50, 1},  // 2 X
				{20, 80, 1},  // 3 Y
				{10, 30, 2},  // 4 X1
				{30, 50, 2},  // 5 X2
			},
			want: []int64{10, 20, 0, 60, 10, 0},
		},
		{
			// Root [0,100]; A [20,50]; an async child B [60,300] outlives the root:
			// clipped to [60,100]. From 100: B ends last (clipped 100): B 40;
			// from 60: A ends at 50: own 10, A 30; from 20: own 20. Own 30.
			name:  "async child outlives its parent",
			spans: []span{{0, 100, -1}, {20, 50, 0}, {60, 300, 0}},
			want:  []int64{30, 30, 40},
		},
		{
			// Root [0,100] with one call [40,50]: 90 ms of gaps (before and
			// after) with no span are the root's own time.
			name:  "gaps with no span",
			spans: []span{{0, 100, -1}, {40, 50, 0}},
			want:  []int64{90, 10},
		},
		{
			// A database call [10,90] whose driver spans (children) the walk must
			// not enter: the call is one piece of 80.
			name:   "a call is not entered",
			spans:  []span{{0, 100, -1}, {10, 90, 0}, {20, 30, 1}},
			opaque: map[int32]bool{1: true},
			want:   []int64{20, 80, 0},
		},
		{
			// Two children end together at 90: A [10,90] and B [50,90]. The one
			// that started first (A) is taken: A 80, B 0, own 20.
			name:  "equal ends take the earlier start",
			spans: []span{{0, 100, -1}, {10, 90, 0}, {50, 90, 0}},
			want:  []int64{20, 80, 0},
		},
		{
			// A child that starts before its parent (skew left unrepaired) is
			// clipped to [0,100]: A [-20,30] → [0,30]. From 100: own 70, A 30.
			name:  "child starting before its parent is clipped",
			spans: []span{{0, 100, -1}, {-20, 30, 0}},
			want:  []int64{70, 30},
		},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			got := onPath(tt.spans, tt.opaque)
			if !reflect.DeepEqual(got, tt.want) {
				t.Errorf("time on path = %v, want %v", got, tt.want)
			}
		})
	}
}

// TestCriticalPathProperties checks, on random trees: the pieces add up to
// the root's duration; no span has more time on the path than its
// duration; a tree whose children never overlap (sequential) puts every
// span's whole exclusive time on the path.
func TestCriticalPathProperties(t *testing.T) {
	rng := rand.New(rand.NewPCG(7, 11))
	for iter := range 2000 {
		sequential := iter%2 == 0
		spans := randomTree(rng, 1+rng.IntN(40), sequential)
		got := onPath(spans, nil)
		var sum int64
		for i, d := range got {
			sum += d
			if dur := spans[i].end - spans[i].start; d > dur || d < 0 {
				t.Fatalf("iter %d: span %d has %d on the path, duration %d: %v", iter, i, d, dur, spans)
			}
		}
		if want := spans[0].end - spans[0].start; sum != want {
			t.Fatalf("iter %d: pieces add up to %d, root lasts %d: %v", iter, sum, want, spans)
		}
		if sequential {
			// Every span lies on the path: its time on it is its duration
			// less its children's (which do not overlap and lie inside it).
			for i := range spans {
				excl := spans[i].end - spans[i].start
				for _, c := range spans {
					if c.parent == int32(i) {
						excl -= c.end - c.start
					}
				}
				if got[i] != excl {
					t.Fatalf("iter %d: sequential span %d on path %d, exclusive time %d: %v", iter, i, got[i], excl, spans)
				}
			}
		}
	}
}

// randomTree makes a request of n spans: span 0 is the root; others nest
// inside a random earlier span. With sequential, siblings never overlap;
// otherwise they overlap freely and some outlive their parent.
func randomTree(rng *rand.Rand, n int, sequential bool) []span {
	spans := []span{{0, int64(100 + rng.IntN(1000)), -1}}
	free := [][2]int64{{spans[0].start, spans[0].end}} // sequential: free gaps per span
	gaps := [][][2]int64{free}
	for i := 1; i < n; i++ {
		p := int32(rng.IntN(len(spans)))
		ps, pe := spans[p].start, spans[p].end
		var s, e int64
		if sequential {
			g := gaps[p]
			if len(g) == 0 {
				gaps = append(gaps, nil)
				spans = append(spans, span{ps, ps, p})
				continue
			}
			k := rng.IntN(len(g))
			gs, ge := g[k][0], g[k][1]
			s = gs + rng.Int64N(ge-gs+1)
			e = s + rng.Int64N(ge-s+1)
			// Split the gap around the new span.
			ng := append([][2]int64{}, g[:k]...)
			if s > gs {
				ng = append(ng, [2]int64{gs, s})
			}
			if ge > e {
				ng = append(ng, [2]int64{e, ge})
			}
			gaps[p] = append(ng, g[k+1:]...)
		} else {
			s = ps + rng.Int64N(pe-ps+1) - 5
			e = s + rng.Int64N(pe-ps+20)
		}
		spans = append(spans, span{s, e, p})
		gaps = append(gaps, [][2]int64{{s, e}})
		if e <= s {
			gaps[len(gaps)-1] = nil
		}
	}
	return spans
}
