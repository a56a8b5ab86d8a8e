package callgraph

import (
	"slices"

	"gonum.org/v1/gonum/graph"
	"gonum.org/v1/gonum/graph/iterator"
	"gonum.org/v1/gonum/graph/topo"
)

// FuncID identifies a function of a FuncGraph: 0 to Len()-1, numbered by
// whoever builds the graph.
type FuncID int32

// Calls collects the edges of a FuncGraph under construction: Add them,
// then pass the set to NewFuncGraph. The zero value is empty.
type Calls struct{ packed []uint64 }

// Add records that caller calls callee directly (with only frames the
// builder does not count as functions in between). Repeats are merged.
func (c *Calls) Add(caller, callee FuncID) {
	c.packed = append(c.packed, uint64(uint32(caller))<<32|uint64(uint32(callee)))
}

// FuncGraph is a function-level call graph: one node per function, one
// edge per distinct caller → callee pair seen on any path. Unlike the
// calling-context Tree it merges paths, so recursion appears as a
// self-edge or a cycle, and so can cycles that no single path has (a
// calls b on one path, b calls a on another): a cycle is a candidate for
// recursion, to be confirmed on the paths.
//
// It is immutable, safe for concurrent reads, and stores its edges in
// compressed sparse rows, so that graphs of many functions and edges
// cost no per-edge maps.
type FuncGraph struct{ a *adjacency }

// NewFuncGraph returns the graph of n functions and the calls collected
// in calls, which it takes over (calls is empty afterwards).
func NewFuncGraph(n int, calls *Calls) *FuncGraph {
	g := &FuncGraph{a: newAdjacency(n, calls.packed)}
	calls.packed = nil
	return g
}

// Recursive reports, by FuncID, the functions on a cycle: members of a
// strongly connected component of two or more functions, or functions
// that call themselves. Components are Tarjan's ("Depth-first search and
// linear graph algorithms", SIAM J. Computing, 1972), computed by
// gonum's topo.TarjanSCC.
func (g *FuncGraph) Recursive() []bool {
	out := make([]bool, g.a.n)
	for _, scc := range topo.TarjanSCC(g.a) {
		for _, n := range scc {
			id := n.ID()
			if len(scc) > 1 || g.a.HasEdgeFromTo(id, id) {
				out[id] = true
			}
		}
	}
	return out
}

// adjacency is a FuncGraph as a gonum graph.Directed (kept unexported:
// gonum's types stay inside this package). Self-edges are allowed.
type adjacency struct {
	n       int
	fromOff []int32
	fromTo  []FuncID
	toOff   []int32
	toFrom  []FuncID
}

var _ graph.Directed = (*adjacency)(nil)

// newAdjacency builds the graph of n nodes from packed edges
// (caller<<32 | callee), which it sorts in place.
func newAdjacency(n int, edges []uint64) *adjacency {
	slices.Sort(edges)
	edges = slices.Compact(edges)
	a := &adjacency{n: n, fromOff: make([]int32, n+1), toOff: make([]int32, n+1)}
	a.fromTo = make([]FuncID, len(edges))
	a.toFrom = make([]FuncID, len(edges))
	for _, e := range edges {
		a.fromOff[int32(e>>32)+1]++
		a.toOff[int32(uint32(e))+1]++
	}
	for i := 0; i < n; i++ {
		a.fromOff[i+1] += a.fromOff[i]
		a.toOff[i+1] += a.toOff[i]
	}
	fill := append([]int32(nil), a.toOff[:n]...)
	for i, e := range edges {
		u, v := FuncID(e>>32), FuncID(uint32(e))
		a.fromTo[i] = v // edges are sorted by u, then v
		a.toFrom[fill[v]] = u
		fill[v]++
	}
	return a
}

// Node implements graph.Graph.
func (a *adjacency) Node(id int64) graph.Node {
	if id < 0 || id >= int64(a.n) {
		return nil
	}
	return adjNode(id)
}

// Nodes implements graph.Graph, in ID order.
func (a *adjacency) Nodes() graph.Nodes {
	return iterator.NewImplicitNodes(0, a.n, func(id int) graph.Node { return adjNode(id) })
}

func (a *adjacency) list(ids []FuncID) graph.Nodes {
	if len(ids) == 0 {
		return graph.Empty
	}
	ns := make([]graph.Node, len(ids))
	for i, id := range ids {
		ns[i] = adjNode(id)
	}
	return iterator.NewOrderedNodes(ns)
}

// From implements graph.Directed, in ID order.
func (a *adjacency) From(id int64) graph.Nodes {
	if id < 0 || id >= int64(a.n) {
		return graph.Empty
	}
	return a.list(a.fromTo[a.fromOff[id]:a.fromOff[id+1]])
}

// To implements graph.Directed, in ID order.
func (a *adjacency) To(id int64) graph.Nodes {
	if id < 0 || id >= int64(a.n) {
		return graph.Empty
	}
	return a.list(a.toFrom[a.toOff[id]:a.toOff[id+1]])
}

// HasEdgeFromTo implements graph.Directed.
func (a *adjacency) HasEdgeFromTo(uid, vid int64) bool {
	if uid < 0 || uid >= int64(a.n) {
		return false
	}
	_, ok := slices.BinarySearch(a.fromTo[a.fromOff[uid]:a.fromOff[uid+1]], FuncID(vid))
	return ok
}

// HasEdgeBetween implements graph.Graph.
func (a *adjacency) HasEdgeBetween(xid, yid int64) bool {
	return a.HasEdgeFromTo(xid, yid) || a.HasEdgeFromTo(yid, xid)
}

// Edge implements graph.Graph.
func (a *adjacency) Edge(uid, vid int64) graph.Edge {
	if !a.HasEdgeFromTo(uid, vid) {
		return nil
	}
	return adjEdge{adjNode(uid), adjNode(vid)}
}

type adjNode int64

func (n adjNode) ID() int64 { return int64(n) }

type adjEdge struct{ f, t adjNode }

func (e adjEdge) From() graph.Node         { return e.f }
func (e adjEdge) To() graph.Node           { return e.t }
func (e adjEdge) ReversedEdge() graph.Edge { return adjEdge{e.t, e.f} }
