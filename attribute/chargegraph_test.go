package attribute

import (
	"strconv"
	"strings"
	"testing"

	"github.com/culprithq/culprit/attribute/internal/testinput"

	"github.com/culprithq/culprit/callgraph"
	"gonum.org/v1/gonum/graph/formats/dot"
	"gonum.org/v1/gonum/graph/formats/dot/ast"
)

// The attribution graph of the methods reference §1 example, encoded
// with gonum's DOT encoder, parses back with gonum's DOT parser into the
// expected nodes, classes and edge weights.
func TestChargeGraphDOT(t *testing.T) {
	tree, cls := loadTree(t, buildProfile(t, methodsExample()), DefaultRules())
	out, err := ChargeGraph(tree, cls, Options{Value: "samples"}, 0).MarshalDOT()
	if err != nil {
		t.Fatal(err)
	}
	nodes, edges := parseDOT(t, out)
	wantNodes := map[string]string{
		"main.main":                         "application",
		"example.com/shop/api.handler":      "application",
		"example.com/shop/store.loadUser":   "application",
		"example.com/shop/store.loadOrders": "application",
		"example.com/shop/tree.walk":        "application",
		"database/sql.(*DB).Query":          "database",
	}
	if len(nodes) != len(wantNodes) {
		t.Errorf("nodes = %v, want %d (render reaches no boundary and is absent)", nodes, len(wantNodes))
	}
	for n, class := range wantNodes {
		if nodes[n]["class"] != class {
			t.Errorf("node %s: attrs %v, want class %s", n, nodes[n], class)
		}
	}
	// Edge weights are the cost charged along them, each path once: the
	// recursive walk's self-edge carries its 5 samples once, not twice.
	wantEdges := map[string]string{
		"main.main -> example.com/shop/api.handler":                         "40",
		"example.com/shop/api.handler -> example.com/shop/store.loadOrders": "30",
		"example.com/shop/store.loadOrders -> database/sql.(*DB).Query":     "30",
		"example.com/shop/store.loadUser -> database/sql.(*DB).Query":       "10",
		"main.main -> example.com/shop/tree.walk":                           "5",
		"example.com/shop/tree.walk -> example.com/shop/tree.walk":          "5",
		"example.com/shop/tree.walk -> database/sql.(*DB).Query":            "5",
	}
	for e, w := range wantEdges {
		if edges[e] != w {
			t.Errorf("edge %s weight %q, want %s", e, edges[e], w)
		}
	}
	if nodes["main.main"]["cost"] != "45" {
		t.Errorf("main.main cost = %s, want 45", nodes["main.main"]["cost"])
	}
	// Pruning: at 25% of the 45, loadUser (10, 22%) and walk (5) go.
	pruned, _ := ChargeGraph(tree, cls, Options{Value: "samples"}, 0.25).MarshalDOT()
	if strings.Contains(string(pruned), "loadUser") || strings.Contains(string(pruned), "tree.walk") ||
		!strings.Contains(string(pruned), "loadOrders") {
		t.Errorf("--min-share 0.25 kept the wrong nodes:\n%s", pruned)
	}
}

// TestChargeGraphAgreesWithRank checks that the graph reads the ranking's
// charges: on a span source every charged path ends at exactly one
// boundary node, so the boundary nodes' costs add up to the ranking's
// database + network total, and each root cause's node carries at least
// its charged cost.
func TestChargeGraphAgreesWithRank(t *testing.T) {
	src := testinput.SpanSource("shop.jsonl", 60e9, testinput.ShopTraces(1, 60, func(r int) int { return 2 + r%9 }))
	cls := NewClassifier(src, DefaultRules())
	tree := callgraph.NewTree(src, callgraph.TreeOptions{Keep: cls.Keep})
	res := Attribute(tree, cls, Options{})
	g := ChargeGraph(tree, cls, Options{}, 0)
	var boundary int64
	cost := map[string]int64{}
	out, err := g.MarshalDOT()
	if err != nil {
		t.Fatal(err)
	}
	nodes, _ := parseDOT(t, out)
	for name, attrs := range nodes {
		c, err := strconv.ParseInt(attrs["cost"], 10, 64)
		if err != nil {
			t.Fatalf("node %s: cost %q", name, attrs["cost"])
		}
		cost[name] = c
		if attrs["class"] == "database" || attrs["class"] == "network" {
			boundary += c
		}
	}
	if want := res.Totals.Database + res.Totals.Network; boundary != want || want == 0 {
		t.Errorf("boundary nodes cost %d, ranking charged %d", boundary, want)
	}
	for _, c := range res.Causes {
		if !c.NoAppFrame && cost[c.Function] < c.Cost {
			t.Errorf("%s: node cost %d below its charged %d", c.Function, cost[c.Function], c.Cost)
		}
	}
}

// parseDOT reads DOT back with gonum's DOT parser: each node's attributes
// by node name, and each edge's weight by "from -> to".
func parseDOT(t *testing.T, out []byte) (map[string]map[string]string, map[string]string) {
	t.Helper()
	file, err := dot.ParseString(string(out))
	if err != nil {
		t.Fatalf("DOT does not parse: %v\n%s", err, out)
	}
	if len(file.Graphs) != 1 || !file.Graphs[0].Directed {
		t.Fatalf("want one directed graph")
	}
	unquote := func(s string) string {
		if u, err := strconv.Unquote(s); err == nil {
			return u
		}
		return s
	}
	// Node IDs are numbers; the name is the label's first line. Edge
	// weights are shares scaled for Graphviz: the cost is in "cost".
	nodes := map[string]map[string]string{}
	names := map[string]string{}
	edges := map[string]string{}
	for _, st := range file.Graphs[0].Stmts {
		switch st := st.(type) {
		case *ast.NodeStmt:
			attrs := map[string]string{}
			for _, a := range st.Attrs {
				attrs[a.Key] = unquote(a.Val)
			}
			name, _, _ := strings.Cut(attrs["label"], "\n")
			names[unquote(st.Node.ID)] = name
			nodes[name] = attrs
		case *ast.EdgeStmt:
			from := names[unquote(st.From.(*ast.Node).ID)]
			to := names[unquote(st.To.Vertex.(*ast.Node).ID)]
			for _, a := range st.Attrs {
				if a.Key == "cost" {
					edges[from+" -> "+to] = unquote(a.Val)
				}
			}
		}
	}
	return nodes, edges
}
