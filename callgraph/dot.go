package callgraph

import (
	"sort"

	"gonum.org/v1/gonum/graph"
	"gonum.org/v1/gonum/graph/encoding"
	"gonum.org/v1/gonum/graph/encoding/dot"
	"gonum.org/v1/gonum/graph/iterator"
)

// Digraph is a small weighted directed graph of named nodes carrying DOT
// attributes, built for export (culprit graph). Unlike gonum's simple
// graphs it accepts self-edges (recursion) and adds weights on repeated
// AddWeight calls instead of replacing them. Node IDs are assigned in
// insertion order; the DOT output is sorted by ID, so it is deterministic.
type Digraph struct {
	name  string
	attrs []encoding.Attribute
	nodes []*DigraphNode
	index map[string]int64
	edges map[[2]int64]*DigraphEdge
	from  map[int64][]int64
	to    map[int64][]int64
}

var _ graph.WeightedDirected = (*Digraph)(nil)

// NewDigraph returns an empty graph with DOT graph attributes attrs.
func NewDigraph(name string, attrs ...encoding.Attribute) *Digraph {
	return &Digraph{
		name:  name,
		attrs: attrs,
		index: map[string]int64{},
		edges: map[[2]int64]*DigraphEdge{},
		from:  map[int64][]int64{},
		to:    map[int64][]int64{},
	}
}

// DigraphNode is a named node with DOT attributes.
type DigraphNode struct {
	id    int64
	Name  string
	Attrs []encoding.Attribute
}

// ID implements graph.Node.
func (n *DigraphNode) ID() int64 { return n.id }

// DOTID implements dot.Node: the node's name is its DOT identifier.
func (n *DigraphNode) DOTID() string { return n.Name }

// Attributes implements encoding.Attributer.
func (n *DigraphNode) Attributes() []encoding.Attribute { return n.Attrs }

// DigraphEdge is a weighted edge with DOT attributes.
type DigraphEdge struct {
	F, T  *DigraphNode
	W     float64
	Attrs []encoding.Attribute
}

// From implements graph.Edge.
func (e *DigraphEdge) From() graph.Node { return e.F }

// To implements graph.Edge.
func (e *DigraphEdge) To() graph.Node { return e.T }

// ReversedEdge implements graph.Edge.
func (e *DigraphEdge) ReversedEdge() graph.Edge {
	return &DigraphEdge{F: e.T, T: e.F, W: e.W, Attrs: e.Attrs}
}

// Weight implements graph.WeightedEdge.
func (e *DigraphEdge) Weight() float64 { return e.W }

// Attributes implements encoding.Attributer.
func (e *DigraphEdge) Attributes() []encoding.Attribute { return e.Attrs }

// AddNode returns the node named name, creating it with attrs if new.
func (g *Digraph) AddNode(name string, attrs ...encoding.Attribute) *DigraphNode {
	if id, ok := g.index[name]; ok {
		return g.nodes[id]
	}
	n := &DigraphNode{id: int64(len(g.nodes)), Name: name, Attrs: attrs}
	g.nodes = append(g.nodes, n)
	g.index[name] = n.id
	return n
}

// AddWeight adds w to the edge from → to, creating it if needed.
func (g *Digraph) AddWeight(from, to *DigraphNode, w float64) *DigraphEdge {
	k := [2]int64{from.id, to.id}
	e := g.edges[k]
	if e == nil {
		e = &DigraphEdge{F: from, T: to}
		g.edges[k] = e
		g.from[from.id] = append(g.from[from.id], to.id)
		g.to[to.id] = append(g.to[to.id], from.id)
	}
	e.W += w
	return e
}

// Edges returns every edge sorted by (from, to) ID.
func (g *Digraph) Edges() []*DigraphEdge {
	out := make([]*DigraphEdge, 0, len(g.edges))
	for _, e := range g.edges {
		out = append(out, e)
	}
	sort.Slice(out, func(i, j int) bool {
		if out[i].F.id != out[j].F.id {
			return out[i].F.id < out[j].F.id
		}
		return out[i].T.id < out[j].T.id
	})
	return out
}

// MarshalDOT encodes the graph with gonum's DOT encoder.
func (g *Digraph) MarshalDOT() ([]byte, error) {
	return dot.Marshal(g, g.name, "", "  ")
}

// DOTAttributers implements dot.Attributers: graph-level attributes.
func (g *Digraph) DOTAttributers() (graph, node, edge encoding.Attributer) {
	return attrList(g.attrs), attrList(nil), attrList(nil)
}

type attrList []encoding.Attribute

func (a attrList) Attributes() []encoding.Attribute { return a }

// Node implements graph.Graph.
func (g *Digraph) Node(id int64) graph.Node {
	if id < 0 || id >= int64(len(g.nodes)) {
		return nil
	}
	return g.nodes[id]
}

// Nodes implements graph.Graph, in ID order.
func (g *Digraph) Nodes() graph.Nodes {
	ns := make([]graph.Node, len(g.nodes))
	for i, n := range g.nodes {
		ns[i] = n
	}
	return iterator.NewOrderedNodes(ns)
}

func (g *Digraph) sorted(ids []int64) graph.Nodes {
	if len(ids) == 0 {
		return graph.Empty
	}
	cp := append([]int64(nil), ids...)
	sort.Slice(cp, func(i, j int) bool { return cp[i] < cp[j] })
	ns := make([]graph.Node, len(cp))
	for i, id := range cp {
		ns[i] = g.nodes[id]
	}
	return iterator.NewOrderedNodes(ns)
}

// From implements graph.Directed.
func (g *Digraph) From(id int64) graph.Nodes { return g.sorted(g.from[id]) }

// To implements graph.Directed.
func (g *Digraph) To(id int64) graph.Nodes { return g.sorted(g.to[id]) }

// HasEdgeFromTo implements graph.Directed.
func (g *Digraph) HasEdgeFromTo(uid, vid int64) bool {
	_, ok := g.edges[[2]int64{uid, vid}]
	return ok
}

// HasEdgeBetween implements graph.Graph.
func (g *Digraph) HasEdgeBetween(xid, yid int64) bool {
	return g.HasEdgeFromTo(xid, yid) || g.HasEdgeFromTo(yid, xid)
}

// Edge implements graph.Graph.
func (g *Digraph) Edge(uid, vid int64) graph.Edge { return g.WeightedEdge(uid, vid) }

// WeightedEdge implements graph.Weighted.
func (g *Digraph) WeightedEdge(uid, vid int64) graph.WeightedEdge {
	if e, ok := g.edges[[2]int64{uid, vid}]; ok {
		return e
	}
	return nil
}

// Weight implements graph.Weighted.
func (g *Digraph) Weight(xid, yid int64) (float64, bool) {
	if e, ok := g.edges[[2]int64{xid, yid}]; ok {
		return e.W, true
	}
	return 0, xid == yid
}
