package attribute

import (
	"strconv"

	"github.com/culprithq/culprit/callgraph"
	"github.com/culprithq/culprit/traces"
)

// Node styles of the charge graph by class: culprit's own shapes, so that
// the classes read apart in greyscale too.
var classStyle = map[Class][]callgraph.Attr{
	Database:    {{Key: "shape", Value: "cylinder"}, {Key: "style", Value: "filled"}, {Key: "fillcolor", Value: "lightblue"}},
	Network:     {{Key: "shape", Value: "hexagon"}, {Key: "style", Value: "filled"}, {Key: "fillcolor", Value: "plum"}},
	Entry:       {{Key: "shape", Value: "house"}},
	Application: {{Key: "shape", Value: "box"}, {Key: "style", Value: "bold"}},
	Library:     {{Key: "shape", Value: "box"}, {Key: "style", Value: "dashed"}},
}

// ChargeGraph returns the attribution subgraph: the functions on paths that
// reach a boundary (entry points, application frames and the boundary
// calls; library frames in between are elided), with edges weighted by the
// cost charged along them, each path counted once per edge. Nodes whose
// charged share of database and network cost is below minShare are pruned
// with their edges. Every node carries "class" and "cost" attributes and
// every edge "weight" and "label" attributes.
func ChargeGraph(t *callgraph.Tree, c *Classifier, opts Options, minShare float64) *callgraph.Digraph {
	wk := newWalk(t, c, &opts, false)
	src := wk.src
	wr := wk.newWalker()
	var r charge

	type nodeInfo struct {
		class Class
		entry bool
		cost  int64
		order int
	}
	nodes := map[string]*nodeInfo{}
	type edge struct{ from, to string }
	edges := map[edge]int64{}
	var edgeOrder []edge
	var denom int64
	pathCache := map[callgraph.NodeID][]traces.FrameID{}
	for pi := range src.Paths.Len() {
		wr.next(pi, &r)
		if r.state != chargeBoundary {
			continue
		}
		val, b := r.cost, r.boundary
		denom += val
		kept, ok := pathCache[b]
		if !ok {
			for _, f := range t.Path(b) {
				if keptInExplanation(c.Verdict(f)) {
					kept = append(kept, f)
				}
			}
			pathCache[b] = kept
		}
		seenNode := map[string]bool{}
		seenEdge := map[edge]bool{}
		prev := ""
		for _, f := range kept {
			name := src.Frames[f].Function
			ni := nodes[name]
			if ni == nil {
				v := c.Verdict(f)
				ni = &nodeInfo{class: v.Class, entry: v.EntryPoint, order: len(nodes)}
				nodes[name] = ni
			}
			if !seenNode[name] {
				ni.cost += val
				seenNode[name] = true
			}
			if prev != "" {
				e := edge{prev, name}
				if _, ok := edges[e]; !ok {
					edgeOrder = append(edgeOrder, e)
				}
				if !seenEdge[e] {
					edges[e] += val
					seenEdge[e] = true
				}
			}
			prev = name
		}
	}
	keep := func(name string) bool {
		return denom > 0 && float64(nodes[name].cost)/float64(denom) >= minShare
	}
	g := callgraph.NewDigraph("culprit", callgraph.Attr{Key: "rankdir", Value: "LR"})
	g.Total = float64(denom)
	// Add nodes in first-seen order, which follows the source's path order.
	names := make([]string, len(nodes))
	for name, ni := range nodes {
		names[ni.order] = name
	}
	byName := map[string]*callgraph.DigraphNode{}
	for _, name := range names {
		if !keep(name) {
			continue
		}
		ni := nodes[name]
		style := classStyle[ni.class]
		if ni.entry {
			style = classStyle[Entry] // trace entry points are application spans
		}
		attrs := append([]callgraph.Attr{
			{Key: "class", Value: ni.class.String()},
			{Key: "cost", Value: strconv.FormatInt(ni.cost, 10)},
		}, style...)
		byName[name] = g.AddNode(name, attrs...)
		byName[name].W = float64(ni.cost)
	}
	for _, e := range edgeOrder {
		from, to := byName[e.from], byName[e.to]
		if from == nil || to == nil {
			continue
		}
		w := edges[e]
		ge := g.AddWeight(from, to, float64(w))
		ge.Attrs = []callgraph.Attr{{Key: "cost", Value: strconv.FormatInt(w, 10)}}
	}
	return g
}
