package callgraph

import (
	"slices"

	"gonum.org/v1/gonum/graph"
	"gonum.org/v1/gonum/graph/iterator"
)

// Adjacency is a compact, immutable directed graph over nodes 0..n-1 in
// compressed sparse row form, for running gonum algorithms (strongly
// connected components, topological sort) over large edge lists without
// per-edge maps. Self-edges are allowed; parallel edges are merged.
type Adjacency struct {
	n       int
	fromOff []int32
	fromTo  []int32
	toOff   []int32
	toFrom  []int32
}

var _ graph.Directed = (*Adjacency)(nil)

// PackEdge encodes the edge u → v for NewAdjacency.
func PackEdge(u, v int32) uint64 { return uint64(uint32(u))<<32 | uint64(uint32(v)) }

// NewAdjacency builds the graph of n nodes from packed edges (PackEdge).
// It sorts edges in place.
func NewAdjacency(n int, edges []uint64) *Adjacency {
	slices.Sort(edges)
	edges = slices.Compact(edges)
	a := &Adjacency{n: n, fromOff: make([]int32, n+1), toOff: make([]int32, n+1)}
	a.fromTo = make([]int32, len(edges))
	a.toFrom = make([]int32, len(edges))
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
		u, v := int32(e>>32), int32(uint32(e))
		a.fromTo[i] = v // edges are sorted by u, then v
		a.toFrom[fill[v]] = u
		fill[v]++
	}
	return a
}

// Node implements graph.Graph.
func (a *Adjacency) Node(id int64) graph.Node {
	if id < 0 || id >= int64(a.n) {
		return nil
	}
	return adjNode(id)
}

// Nodes implements graph.Graph.
func (a *Adjacency) Nodes() graph.Nodes {
	return iterator.NewImplicitNodes(0, a.n, func(id int) graph.Node { return adjNode(id) })
}

func (a *Adjacency) list(ids []int32) graph.Nodes {
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
func (a *Adjacency) From(id int64) graph.Nodes {
	if id < 0 || id >= int64(a.n) {
		return graph.Empty
	}
	return a.list(a.fromTo[a.fromOff[id]:a.fromOff[id+1]])
}

// To implements graph.Directed, in ID order.
func (a *Adjacency) To(id int64) graph.Nodes {
	if id < 0 || id >= int64(a.n) {
		return graph.Empty
	}
	return a.list(a.toFrom[a.toOff[id]:a.toOff[id+1]])
}

// HasEdgeFromTo implements graph.Directed.
func (a *Adjacency) HasEdgeFromTo(uid, vid int64) bool {
	if uid < 0 || uid >= int64(a.n) {
		return false
	}
	_, ok := slices.BinarySearch(a.fromTo[a.fromOff[uid]:a.fromOff[uid+1]], int32(vid))
	return ok
}

// HasEdgeBetween implements graph.Graph.
func (a *Adjacency) HasEdgeBetween(xid, yid int64) bool {
	return a.HasEdgeFromTo(xid, yid) || a.HasEdgeFromTo(yid, xid)
}

// Edge implements graph.Graph.
func (a *Adjacency) Edge(uid, vid int64) graph.Edge {
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
