package callgraph

import (
	"math"
	"regexp"
	"sort"
	"strconv"
	"strings"
	"unicode"
	"unicode/utf8"

	"gonum.org/v1/gonum/graph"
	"gonum.org/v1/gonum/graph/encoding"
	"gonum.org/v1/gonum/graph/encoding/dot"
	"gonum.org/v1/gonum/graph/iterator"
)

// Attr is one DOT attribute of a graph, node or edge. Its value may be any
// text: MarshalDOT quotes it.
type Attr struct{ Key, Value string }

// Digraph is a small weighted directed graph of named nodes carrying DOT
// attributes, built for export (culprit graph). It accepts self-edges
// (recursion) and adds weights on repeated AddWeight calls instead of
// replacing them. Node IDs are assigned in insertion order; the DOT output
// is sorted by ID, so it is deterministic.
//
// Names are data, often chosen by whoever sent a request to the service
// profiled: MarshalDOT writes them only inside quoted labels (see
// MarshalDOT), never as DOT identifiers.
type Digraph struct {
	name  string
	attrs []Attr
	nodes []*DigraphNode
	index map[string]int64
	edges map[[2]int64]*DigraphEdge
	from  map[int64][]int64

	// Total is the cost that labels and edge weights take shares of; zero
	// means the heaviest edge's weight.
	Total float64
	// Format renders a cost in a label (for example "1.20s"); nil writes
	// the number.
	Format func(float64) string
}

// NewDigraph returns an empty graph with DOT graph attributes attrs.
func NewDigraph(name string, attrs ...Attr) *Digraph {
	return &Digraph{
		name:  name,
		attrs: attrs,
		index: map[string]int64{},
		edges: map[[2]int64]*DigraphEdge{},
		from:  map[int64][]int64{},
	}
}

// DigraphNode is a named node with a cost and DOT attributes.
type DigraphNode struct {
	id    int64
	Name  string
	W     float64
	Attrs []Attr
}

// DigraphEdge is a weighted edge with DOT attributes.
type DigraphEdge struct {
	F, T  *DigraphNode
	W     float64
	Attrs []Attr
}

// AddNode returns the node named name, creating it with attrs if new.
func (g *Digraph) AddNode(name string, attrs ...Attr) *DigraphNode {
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
	}
	e.W += w
	return e
}

// Nodes returns every node in ID (insertion) order.
func (g *Digraph) Nodes() []*DigraphNode { return g.nodes }

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

// MarshalDOT encodes the graph in Graphviz DOT with gonum's encoder, with
// culprit's own quoting so that any name is inert:
//
//   - node IDs are quoted numbers ("0", "1", ...); names appear only in
//     labels, so no name can be read as an HTML-like ID (<…>), which
//     Graphviz would parse as markup, or close a string and add attributes;
//   - every value is a double-quoted string in which '"' and '\' are
//     escaped, '&' is written &amp; (Graphviz decodes entities in labels),
//     and control, format (bidirectional and invisible) and line-separator
//     characters are shown as \uXXXX text, invalid UTF-8 as \ufffd;
//   - labels are cut in the middle to maxLabelRunes runes, far below
//     Graphviz's 16,384-byte limit on a string;
//   - an edge's weight is its share of Total scaled to 1–100, since dot
//     ranks with integer weights and fails on very large ones; its label
//     gives the cost and the share ("1.20s, 38%"), as does each node's
//     second label line.
func (g *Digraph) MarshalDOT() ([]byte, error) {
	return dot.Marshal(dotGraph{g, g.total()}, dotQuote(g.name), "", "  ")
}

// maxLabelRunes is how much of a name a DOT label keeps (common practice:
// a node wider than a screen helps no one). Escaped, even a name of
// astral-plane format characters stays under 16 KB.
const maxLabelRunes = 1000

var dotIdent = regexp.MustCompile(`^[a-z_]+$`)

// dotKey returns an attribute key as a DOT ID: bare when it is a plain
// lower-case name, quoted otherwise.
func dotKey(k string) string {
	if dotIdent.MatchString(k) {
		return k
	}
	return dotQuote(k)
}

// dotQuote returns s as a double-quoted DOT string (see MarshalDOT). The
// result is also a valid Go string literal, which gonum's encoder then
// leaves as it is.
func dotQuote(s string) string { return `"` + dotEscape(s) + `"` }

// dotEscape escapes s for the inside of a quoted DOT string.
func dotEscape(s string) string {
	if utf8.RuneCountInString(s) > maxLabelRunes {
		// Keep both ends: a package path's start and a function's name.
		rs := []rune(s)
		half := maxLabelRunes / 2
		s = string(rs[:half]) + "…" + string(rs[len(rs)-(maxLabelRunes-half-1):])
	}
	var b strings.Builder
	for _, r := range s {
		switch {
		case r == '"':
			b.WriteString(`\"`)
		case r == '\\':
			b.WriteString(`\\`)
		case r == '&':
			b.WriteString("&amp;")
		case unicode.IsControl(r) || unicode.In(r, unicode.Cf, unicode.Zl, unicode.Zp) || r == utf8.RuneError:
			// Shown as text: a backslash (escaped for DOT) and the code.
			if r > 0xFFFF {
				b.WriteString(`\\U` + hex(r, 8))
			} else {
				b.WriteString(`\\u` + hex(r, 4))
			}
		default:
			b.WriteRune(r)
		}
	}
	return b.String()
}

func hex(r rune, width int) string {
	h := strconv.FormatInt(int64(r), 16)
	return strings.Repeat("0", max(0, width-len(h))) + h
}

// costLabel is "COST, SHARE" for a label.
func (g *Digraph) costLabel(w, total float64) string {
	text := strconv.FormatFloat(w, 'f', -1, 64)
	if g.Format != nil {
		text = g.Format(w)
	}
	if total > 0 {
		pct := 100 * w / total
		prec := 0
		if pct < 9.95 {
			prec = 1
		}
		text += ", " + strconv.FormatFloat(pct, 'f', prec, 64) + "%"
	}
	return text
}

// total is the cost shares are taken of.
func (g *Digraph) total() float64 {
	if g.Total > 0 {
		return g.Total
	}
	var top float64
	for _, e := range g.edges {
		top = max(top, e.W)
	}
	return top
}

// edgeWeight scales w to an integer from 1 to 100 by its share of total.
func edgeWeight(w, total float64) int {
	if !(total > 0) || !(w > 0) {
		return 1
	}
	return int(min(100, max(1, math.Round(100*w/total))))
}

// The types below adapt a Digraph to gonum's graph and DOT interfaces for
// MarshalDOT only, so that no gonum type is part of this package's API.

type dotGraph struct {
	g     *Digraph
	total float64
}

type dotNode struct {
	n     *DigraphNode
	total float64
	g     *Digraph
}

type dotEdge struct {
	e     *DigraphEdge
	total float64
	g     *Digraph
}

type dotAttrs []encoding.Attribute

func (a dotAttrs) Attributes() []encoding.Attribute { return a }

func quoteAttrs(attrs []Attr) []encoding.Attribute {
	out := make([]encoding.Attribute, len(attrs))
	for i, a := range attrs {
		out[i] = encoding.Attribute{Key: dotKey(a.Key), Value: dotQuote(a.Value)}
	}
	return out
}

func (n dotNode) ID() int64     { return n.n.id }
func (n dotNode) DOTID() string { return `"` + strconv.FormatInt(n.n.id, 10) + `"` }
func (n dotNode) Attributes() []encoding.Attribute {
	label := `"` + dotEscape(n.n.Name) + `\n` + dotEscape(n.g.costLabel(n.n.W, n.total)) + `"`
	return append([]encoding.Attribute{{Key: "label", Value: label}}, quoteAttrs(n.n.Attrs)...)
}

func (e dotEdge) From() graph.Node { return e.g.node(e.e.F.id, e.total) }
func (e dotEdge) To() graph.Node   { return e.g.node(e.e.T.id, e.total) }
func (e dotEdge) ReversedEdge() graph.Edge {
	return dotEdge{&DigraphEdge{F: e.e.T, T: e.e.F, W: e.e.W, Attrs: e.e.Attrs}, e.total, e.g}
}
func (e dotEdge) Attributes() []encoding.Attribute {
	return append([]encoding.Attribute{
		{Key: "weight", Value: dotQuote(strconv.Itoa(edgeWeight(e.e.W, e.total)))},
		{Key: "label", Value: dotQuote(e.g.costLabel(e.e.W, e.total))},
	}, quoteAttrs(e.e.Attrs)...)
}

func (g *Digraph) node(id int64, total float64) graph.Node {
	if id < 0 || id >= int64(len(g.nodes)) {
		return nil
	}
	return dotNode{g.nodes[id], total, g}
}

func (d dotGraph) nodesOf(ids []int64) graph.Nodes {
	if len(ids) == 0 {
		return graph.Empty
	}
	cp := append([]int64(nil), ids...)
	sort.Slice(cp, func(i, j int) bool { return cp[i] < cp[j] })
	total := d.total
	ns := make([]graph.Node, len(cp))
	for i, id := range cp {
		ns[i] = d.g.node(id, total)
	}
	return iterator.NewOrderedNodes(ns)
}

func (d dotGraph) Node(id int64) graph.Node { return d.g.node(id, d.total) }
func (d dotGraph) Nodes() graph.Nodes {
	ids := make([]int64, len(d.g.nodes))
	for i := range ids {
		ids[i] = int64(i)
	}
	return d.nodesOf(ids)
}
func (d dotGraph) From(id int64) graph.Nodes { return d.nodesOf(d.g.from[id]) }
func (d dotGraph) To(id int64) graph.Nodes {
	var ids []int64
	for k := range d.g.edges {
		if k[1] == id {
			ids = append(ids, k[0])
		}
	}
	return d.nodesOf(ids)
}
func (d dotGraph) HasEdgeBetween(x, y int64) bool {
	return d.HasEdgeFromTo(x, y) || d.HasEdgeFromTo(y, x)
}
func (d dotGraph) HasEdgeFromTo(u, v int64) bool {
	_, ok := d.g.edges[[2]int64{u, v}]
	return ok
}
func (d dotGraph) Edge(u, v int64) graph.Edge {
	if e, ok := d.g.edges[[2]int64{u, v}]; ok {
		return dotEdge{e, d.total, d.g}
	}
	return nil
}

// DOTAttributers implements dot.Attributers: graph-level attributes.
func (d dotGraph) DOTAttributers() (graph, node, edge encoding.Attributer) {
	return dotAttrs(quoteAttrs(d.g.attrs)), dotAttrs(nil), dotAttrs(nil)
}
