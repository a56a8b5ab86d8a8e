package callgraph

import (
	"sort"

	"gonum.org/v1/gonum/graph"
	"gonum.org/v1/gonum/graph/iterator"
)

// FuncID identifies a Graph node: one distinct function name.
type FuncID int32

// Graph is the function-level call graph derived from a Tree. Node IDs
// are FuncIDs, numbered in order of first appearance in a depth-first walk
// of the tree, so the numbering is deterministic for a given source.
type Graph struct {
	tree    *Tree
	names   []string
	byName  map[string]FuncID
	nodeFn  []FuncID // tree node → function
	flat    []int64  // per function: value of paths ending in it
	cum     []int64  // per function: value of paths through it, once per path
	edges   map[edgeKey]int64
	from    [][]FuncID
	to      [][]FuncID
	valueIx int
}

type edgeKey struct{ from, to FuncID }

var _ graph.WeightedDirected = (*Graph)(nil)

// NewGraph derives the function graph of t, weighting nodes and edges by
// value index v. A function (or edge) repeated on one path by recursion
// counts that path once.
func NewGraph(t *Tree, v int) *Graph {
	src := t.Source()
	g := &Graph{
		tree:    t,
		byName:  map[string]FuncID{},
		nodeFn:  make([]FuncID, t.Len()),
		edges:   map[edgeKey]int64{},
		valueIx: v,
	}
	g.nodeFn[Root] = -1
	// Frames map to functions once; nodes then look their function up by frame.
	frameFn := make([]FuncID, len(src.Frames))
	for i := range frameFn {
		frameFn[i] = -1
	}
	var (
		active     []int32 // per function: occurrences on the current path
		edgeIndex  = map[edgeKey]int32{}
		edgeW      []int64   // per edge index
		edgeKeys   []edgeKey // per edge index
		activeEdge []int32   // per edge index: occurrences on the current path
		nodeEdge   = make([]int32, t.Len())
	)
	// Depth-first with an explicit stack; a negative entry marks leaving a node.
	stack := make([]NodeID, 0, 256)
	for c := t.nodes[Root].firstChild; c != 0; c = t.nodes[c].nextSibling {
		stack = append(stack, c)
	}
	for len(stack) > 0 {
		n := stack[len(stack)-1]
		stack = stack[:len(stack)-1]
		if n < 0 {
			n = -n
			active[g.nodeFn[n]]--
			if e := nodeEdge[n]; e >= 0 {
				activeEdge[e]--
			}
			continue
		}
		f := t.nodes[n].frame
		fn := frameFn[f]
		if fn < 0 {
			fn = g.intern(src.Frames[f].Function)
			frameFn[f] = fn
			for len(active) < len(g.names) {
				active = append(active, 0)
			}
		}
		g.nodeFn[n] = fn
		total := t.Total(n, v)
		if active[fn] == 0 {
			g.cum[fn] += total
		}
		active[fn]++
		g.flat[fn] += t.Self(n, v)
		nodeEdge[n] = -1
		if parentFn := g.nodeFn[t.nodes[n].parent]; parentFn >= 0 {
			k := edgeKey{parentFn, fn}
			e, seen := edgeIndex[k]
			if !seen {
				e = int32(len(edgeW))
				edgeIndex[k] = e
				edgeW = append(edgeW, 0)
				edgeKeys = append(edgeKeys, k)
				activeEdge = append(activeEdge, 0)
				g.from[parentFn] = append(g.from[parentFn], fn)
				g.to[fn] = append(g.to[fn], parentFn)
			}
			if activeEdge[e] == 0 {
				edgeW[e] += total
			}
			activeEdge[e]++
			nodeEdge[n] = e
		}
		stack = append(stack, -n)
		for c := t.nodes[n].firstChild; c != 0; c = t.nodes[c].nextSibling {
			stack = append(stack, c)
		}
	}
	for e, k := range edgeKeys {
		g.edges[k] = edgeW[e]
	}
	for i := range g.from {
		sortFuncs(g.from[i])
		sortFuncs(g.to[i])
	}
	return g
}

func sortFuncs(fs []FuncID) { sort.Slice(fs, func(i, j int) bool { return fs[i] < fs[j] }) }

func (g *Graph) intern(name string) FuncID {
	if id, ok := g.byName[name]; ok {
		return id
	}
	id := FuncID(len(g.names))
	g.names = append(g.names, name)
	g.byName[name] = id
	g.flat = append(g.flat, 0)
	g.cum = append(g.cum, 0)
	g.from = append(g.from, nil)
	g.to = append(g.to, nil)
	return id
}

// Len returns the number of functions.
func (g *Graph) Len() int { return len(g.names) }

// Name returns the function name of id.
func (g *Graph) Name(id FuncID) string { return g.names[id] }

// Lookup returns the ID of a function name.
func (g *Graph) Lookup(name string) (FuncID, bool) {
	id, ok := g.byName[name]
	return id, ok
}

// FuncOf returns the function of a tree node (-1 for the root).
func (g *Graph) FuncOf(n NodeID) FuncID { return g.nodeFn[n] }

// Flat returns the value of paths whose leaf is in function id.
func (g *Graph) Flat(id FuncID) int64 { return g.flat[id] }

// Cum returns the value of paths that pass through function id, each
// path counted once however often recursion repeats id on it.
func (g *Graph) Cum(id FuncID) int64 { return g.cum[id] }

// EdgeValue returns the value of paths on which caller calls callee
// directly, each path counted once, and whether the edge exists.
func (g *Graph) EdgeValue(caller, callee FuncID) (int64, bool) {
	w, ok := g.edges[edgeKey{caller, callee}]
	return w, ok
}

// Callees returns the functions id calls directly, sorted by ID. A
// recursive function lists itself.
func (g *Graph) Callees(id FuncID) []FuncID { return g.from[id] }

// Node implements graph.Graph.
func (g *Graph) Node(id int64) graph.Node {
	if id < 0 || id >= int64(len(g.names)) {
		return nil
	}
	return FuncNode{g: g, id: FuncID(id)}
}

// Nodes implements graph.Graph, in ID order.
func (g *Graph) Nodes() graph.Nodes {
	ns := make([]graph.Node, len(g.names))
	for i := range ns {
		ns[i] = FuncNode{g: g, id: FuncID(i)}
	}
	return iterator.NewOrderedNodes(ns)
}

func (g *Graph) nodes(ids []FuncID) graph.Nodes {
	if len(ids) == 0 {
		return graph.Empty
	}
	ns := make([]graph.Node, len(ids))
	for i, id := range ids {
		ns[i] = FuncNode{g: g, id: id}
	}
	return iterator.NewOrderedNodes(ns)
}

// From implements graph.Directed: the callees of id, sorted by ID.
func (g *Graph) From(id int64) graph.Nodes {
	if id < 0 || id >= int64(len(g.names)) {
		return graph.Empty
	}
	return g.nodes(g.from[id])
}

// To implements graph.Directed: the callers of id, sorted by ID.
func (g *Graph) To(id int64) graph.Nodes {
	if id < 0 || id >= int64(len(g.names)) {
		return graph.Empty
	}
	return g.nodes(g.to[id])
}

// HasEdgeFromTo implements graph.Directed.
func (g *Graph) HasEdgeFromTo(uid, vid int64) bool {
	_, ok := g.edges[edgeKey{FuncID(uid), FuncID(vid)}]
	return ok
}

// HasEdgeBetween implements graph.Graph.
func (g *Graph) HasEdgeBetween(xid, yid int64) bool {
	return g.HasEdgeFromTo(xid, yid) || g.HasEdgeFromTo(yid, xid)
}

// Edge implements graph.Graph.
func (g *Graph) Edge(uid, vid int64) graph.Edge { return g.WeightedEdge(uid, vid) }

// WeightedEdge implements graph.Weighted; the weight is EdgeValue.
func (g *Graph) WeightedEdge(uid, vid int64) graph.WeightedEdge {
	w, ok := g.edges[edgeKey{FuncID(uid), FuncID(vid)}]
	if !ok {
		return nil
	}
	return weightedEdge{from: FuncNode{g: g, id: FuncID(uid)}, to: FuncNode{g: g, id: FuncID(vid)}, w: float64(w)}
}

// Weight implements graph.Weighted. A node's weight to itself is 0 unless
// it has a recursive self-edge.
func (g *Graph) Weight(xid, yid int64) (float64, bool) {
	if e := g.WeightedEdge(xid, yid); e != nil {
		return e.Weight(), true
	}
	if xid == yid {
		return 0, true
	}
	return 0, false
}

// FuncNode is a graph.Node of a Graph.
type FuncNode struct {
	g  *Graph
	id FuncID
}

// ID implements graph.Node.
func (n FuncNode) ID() int64 { return int64(n.id) }

// Name returns the function name.
func (n FuncNode) Name() string { return n.g.names[n.id] }
