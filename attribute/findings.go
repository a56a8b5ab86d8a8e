package attribute

import (
	"fmt"
	"sort"

	"github.com/culprithq/culprit/callgraph"
)

// FindingOptions are the thresholds of the pattern findings. Zero fields
// take the defaults in DefaultFindingOptions.
type FindingOptions struct {
	// RepeatMin is how many times one statement must be issued from one
	// root cause within one request to count as repeated.
	RepeatMin int
	// PerItemMin is how many network calls to one peer from one root
	// cause within one request count as per-item calls.
	PerItemMin int
	// MinRequestShare is the fraction of the root cause's requests in
	// which the pattern must occur for a finding.
	MinRequestShare float64
}

// DefaultFindingOptions are the documented defaults: 5 per request in at
// least 10% of the requests where the root cause appears.
var DefaultFindingOptions = FindingOptions{RepeatMin: 5, PerItemMin: 5, MinRequestShare: 0.10}

func (o FindingOptions) withDefaults() FindingOptions {
	d := DefaultFindingOptions
	if o.RepeatMin > 0 {
		d.RepeatMin = o.RepeatMin
	}
	if o.PerItemMin > 0 {
		d.PerItemMin = o.PerItemMin
	}
	if o.MinRequestShare > 0 {
		d.MinRequestShare = o.MinRequestShare
	}
	return d
}

// recursionFinder confirms recursion reaching a boundary on real paths.
// Candidates are the functions on a cycle (callgraph.FuncGraph.Recursive:
// strongly connected components) of the graph of application functions
// calling application functions above boundaries; a merged graph can show cycles
// that no single path has, so each candidate is confirmed on the path.
type recursionFinder struct {
	t          *callgraph.Tree
	c          *Classifier
	funcOf     []int32 // frame → application function index, -1 for others
	names      []string
	candidate  []bool // by function index
	stamp      []int32
	count      []int32
	epoch      int32
	cache      map[callgraph.NodeID]recursionHit
	known      []uint64 // bit set by tree node: the boundary node has been walked
	candidates int
}

type recursionHit struct {
	fn    string
	depth int
}

func newRecursionFinder(t *callgraph.Tree, c *Classifier, w *walkState) *recursionFinder {
	src := t.Source()
	r := &recursionFinder{t: t, c: c, funcOf: make([]int32, len(src.Frames)), cache: map[callgraph.NodeID]recursionHit{}}
	appID := make([]int32, len(c.fnNames)) // classifier function → application function + 1
	for i := range src.Frames {
		r.funcOf[i] = -1
		if i == 0 || c.classes[i]&^entryBit != uint8(Application) {
			continue
		}
		fn := c.fn[i]
		if appID[fn] == 0 {
			r.names = append(r.names, c.fnNames[fn])
			appID[fn] = int32(len(r.names))
		}
		r.funcOf[i] = appID[fn] - 1
	}
	// The function graph of application functions: an edge between
	// consecutive application frames above a boundary.
	var calls callgraph.Calls
	seen := newEdgeSet(len(r.names))
	for i := 1; i < t.Len(); i++ {
		n := callgraph.NodeID(i)
		fn := r.funcOf[t.Frame(n)]
		if fn < 0 || w.at[n].boundary != 0 {
			continue
		}
		above := w.at[t.Parent(n)].lastApp
		if above == 0 {
			continue
		}
		caller := r.funcOf[t.Frame(above)]
		if seen.add(caller, fn, uint64(uint32(caller))<<32|uint64(uint32(fn))) {
			calls.Add(callgraph.FuncID(caller), callgraph.FuncID(fn))
		}
	}
	r.candidate = callgraph.NewFuncGraph(len(r.names), &calls).Recursive()
	for _, c := range r.candidate {
		if c {
			r.candidates++
		}
	}
	r.stamp = make([]int32, len(r.names))
	r.count = make([]int32, len(r.names))
	return r
}

// edgeSet remembers the edges of a graph of n nodes: a bit matrix for up
// to 4096 nodes (2 MiB), a map beyond. A tree has an edge per node, but
// few distinct ones: keeping the distinct ones only saves sorting millions.
type edgeSet struct {
	n    int
	bits []uint64
	m    map[uint64]struct{}
}

func newEdgeSet(n int) *edgeSet {
	if n <= 4096 {
		return &edgeSet{n: n, bits: make([]uint64, (n*n+63)/64)}
	}
	return &edgeSet{n: n, m: map[uint64]struct{}{}}
}

// add records the edge u → v (packed as e) and reports whether it is new.
func (s *edgeSet) add(u, v int32, e uint64) bool {
	if s.bits != nil {
		i := int(u)*s.n + int(v)
		w, b := i/64, uint64(1)<<(i%64)
		if s.bits[w]&b != 0 {
			return false
		}
		s.bits[w] |= b
		return true
	}
	if _, ok := s.m[e]; ok {
		return false
	}
	s.m[e] = struct{}{}
	return true
}

// fork returns a copy of r for another goroutine: it shares the graph
// and candidates, and has caches of its own.
func (r *recursionFinder) fork() *recursionFinder {
	f := *r
	f.cache = map[callgraph.NodeID]recursionHit{}
	f.known = nil
	f.stamp = make([]int32, len(r.names))
	f.count = make([]int32, len(r.names))
	f.epoch = 0
	return &f
}

// at returns the application function that occurs most often (at least
// twice) on the path above boundary node b, and how often; "" if none.
func (r *recursionFinder) at(b callgraph.NodeID) (string, int) {
	if r.candidates == 0 {
		return "", 0
	}
	if r.known == nil {
		r.known = make([]uint64, (r.t.Len()+63)/64)
	}
	if r.known[b/64]&(1<<(b%64)) != 0 {
		h := r.cache[b] // absent (no recursion) reads as the zero hit
		return h.fn, h.depth
	}
	r.known[b/64] |= 1 << (b % 64)
	r.epoch++
	best := recursionHit{}
	for n := r.t.Parent(b); n != callgraph.Root; n = r.t.Parent(n) {
		fn := r.funcOf[r.t.Frame(n)]
		if fn < 0 || !r.candidate[fn] {
			continue
		}
		if r.stamp[fn] != r.epoch {
			r.stamp[fn], r.count[fn] = r.epoch, 0
		}
		r.count[fn]++
		k := int(r.count[fn])
		if k >= 2 && (k > best.depth || (k == best.depth && r.names[fn] < best.fn)) {
			best = recursionHit{fn: r.names[fn], depth: k}
		}
	}
	if best.depth > 0 {
		r.cache[b] = best
	}
	return best.fn, best.depth
}

// findings derives the pattern findings from the per-cause tallies.
func findings(res *Result, accs map[string]*causeAcc, o FindingOptions, denom int64) []Finding {
	var out []Finding
	share := func(cost int64) float64 {
		if denom == 0 {
			return 0
		}
		return float64(cost) / float64(denom)
	}
	names := make([]string, 0, len(accs))
	for n := range accs {
		names = append(names, n)
	}
	sort.Strings(names)
	for _, name := range names {
		acc := accs[name]
		if acc.recursion >= 2 {
			out = append(out, Finding{
				Kind:     "recursive-access",
				Function: name,
				Cost:     acc.recCost,
				Share:    share(acc.recCost),
				Depth:    acc.recursion,
				Evidence: fmt.Sprintf("calls itself (directly or through other functions) up to %d times deep on paths that reach the %s", acc.recursion, boundaryWord(acc)),
			})
		}
		if acc.cause.NoAppFrame {
			continue
		}
		seen := len(acc.perReq)
		if seen == 0 {
			continue
		}
		for did, perReq := range acc.stmtReq {
			if len(perReq) == 0 {
				continue
			}
			dk := acc.details[did]
			if dk.Kind == KindConnection {
				continue // waits for a connection are not calls
			}
			min := o.RepeatMin
			kind := "repeated-statement"
			if dk.Kind == KindNetwork {
				min = o.PerItemMin
				kind = "per-item-calls"
			}
			var counts []float64
			for _, st := range perReq {
				if int(st.calls) >= min {
					counts = append(counts, float64(st.calls))
				}
			}
			if len(counts) == 0 || float64(len(counts)) < o.MinRequestShare*float64(seen) {
				continue
			}
			cost := dk.Cost
			f := Finding{
				Kind:         kind,
				Function:     name,
				Cost:         cost,
				Share:        share(cost),
				PerRequest:   distribution(counts),
				Requests:     len(counts),
				RequestsSeen: seen,
			}
			if kind == "per-item-calls" {
				f.Peer = dk.Peer
				f.Statement = dk.Statement
				f.Evidence = fmt.Sprintf("%.0f calls per request (median; max %.0f) to %s in %d of %d requests",
					f.PerRequest.Median, f.PerRequest.Max, orUnknown(dk.Peer), len(counts), seen)
			} else {
				f.Statement = dk.Statement
				f.Evidence = fmt.Sprintf("the same statement %.0f times per request (median; max %.0f) in %d of %d requests",
					f.PerRequest.Median, f.PerRequest.Max, len(counts), seen)
			}
			out = append(out, f)
		}
	}
	SortFindings(out)
	return out
}

func boundaryWord(acc *causeAcc) string {
	switch {
	case acc.cause.Database > 0 && acc.cause.Network > 0:
		return "database and network"
	case acc.cause.Network > 0:
		return "network"
	}
	return "database"
}

func orUnknown(s string) string {
	if s == "" {
		return "an unnamed peer"
	}
	return s
}
