package callgraph

import (
	"fmt"
	"math/rand/v2"
	"testing"

	"github.com/culprithq/culprit/traces"
	"gonum.org/v1/gonum/graph/topo"
)

// source builds a profile source from paths of function names, root first.
func source(paths map[string]int64, order []string) *traces.Source {
	src := traces.NewSource(traces.Profile, []traces.ValueType{{Type: "samples", Unit: "count"}})
	for _, key := range order {
		var frames []traces.FrameID
		start := 0
		for i := 0; i <= len(key); i++ {
			if i == len(key) || key[i] == '>' {
				frames = append(frames, src.InternFrame(traces.Frame{Function: key[start:i]}))
				start = i + 1
			}
		}
		src.Paths.Append(traces.Path{Frames: frames, Values: []int64{paths[key]}})
	}
	return src
}

// The worked example of the methods reference §1 (constructed; computed
// by hand): inclusive(walk) = 5, not 15; inclusive(handler) = 60.
func TestTreeAndGraphMethodsExample(t *testing.T) {
	order := []string{
		"main>handler>loadUser>sql.Query",
		"main>handler>loadOrders>sql.Query",
		"main>handler>render",
		"main>walk>walk>walk>sql.Query",
	}
	src := source(map[string]int64{order[0]: 10, order[1]: 30, order[2]: 20, order[3]: 5}, order)
	tree := NewTree(src, TreeOptions{})
	// Nodes: root, main, handler, loadUser, sql, loadOrders, sql, render, walk, walk, walk, sql.
	if tree.Len() != 12 {
		t.Errorf("tree has %d nodes, want 12", tree.Len())
	}
	mainNode := tree.Parent(tree.Parent(tree.Parent(tree.Leaf(0))))
	if got := tree.Total(mainNode, 0); got != 65 {
		t.Errorf("total(main) = %d, want 65", got)
	}
	if got := tree.Self(tree.Leaf(2), 0); got != 20 {
		t.Errorf("self(render) = %d, want 20", got)
	}

	g := NewGraph(tree, 0)
	cum := map[string]int64{"main": 65, "handler": 60, "walk": 5, "sql.Query": 45, "loadOrders": 30}
	for name, want := range cum {
		id, ok := g.Lookup(name)
		if !ok || g.Cum(id) != want {
			t.Errorf("cum(%s) = %d, want %d", name, g.Cum(id), want)
		}
	}
	walk, _ := g.Lookup("walk")
	if w, ok := g.EdgeValue(walk, walk); !ok || w != 5 {
		t.Errorf("walk→walk = %d, %v; want 5 (once per path)", w, ok)
	}
	sqlq, _ := g.Lookup("sql.Query")
	if g.Flat(sqlq) != 45 {
		t.Errorf("flat(sql.Query) = %d", g.Flat(sqlq))
	}
	// gonum's Tarjan SCC works over the graph, self-edge included.
	var recursive []string
	for _, scc := range topo.TarjanSCC(g) {
		id := scc[0].ID()
		if len(scc) > 1 || g.HasEdgeFromTo(id, id) {
			recursive = append(recursive, g.Name(FuncID(id)))
		}
	}
	if len(recursive) != 1 || recursive[0] != "walk" {
		t.Errorf("recursive functions = %v, want [walk]", recursive)
	}
}

// A merged graph can show a cycle that no path has (methods reference
// §1: main>A>B>db plus main>B>A>render make A↔B a cycle).
func TestGraphMergedCycle(t *testing.T) {
	order := []string{"main>A>B>db", "main>B>A>render"}
	src := source(map[string]int64{order[0]: 1, order[1]: 1}, order)
	g := NewGraph(NewTree(src, TreeOptions{}), 0)
	a, _ := g.Lookup("A")
	b, _ := g.Lookup("B")
	if !g.HasEdgeFromTo(int64(a), int64(b)) || !g.HasEdgeFromTo(int64(b), int64(a)) {
		t.Fatal("expected the merged A↔B cycle")
	}
	sccs := topo.TarjanSCC(g)
	found := false
	for _, scc := range sccs {
		if len(scc) == 2 {
			found = true
		}
	}
	if !found {
		t.Error("Tarjan SCC should report the merged cycle as a candidate")
	}
}

func TestTreeGonumInterface(t *testing.T) {
	order := []string{"a>b", "a>c"}
	src := source(map[string]int64{"a>b": 2, "a>c": 3}, order)
	tree := NewTree(src, TreeOptions{})
	a := tree.Parent(tree.Leaf(0))
	if !tree.HasEdgeFromTo(int64(a), int64(tree.Leaf(1))) || tree.HasEdgeFromTo(int64(tree.Leaf(0)), int64(a)) {
		t.Error("edge direction wrong")
	}
	if w, ok := tree.Weight(int64(a), int64(tree.Leaf(1))); !ok || w != 3 {
		t.Errorf("weight = %v, %v", w, ok)
	}
	if n := tree.From(int64(a)).Len(); n != 2 {
		t.Errorf("a has %d children", n)
	}
	var visited []string
	tree.Walk(func(n NodeID) bool {
		visited = append(visited, src.Frames[tree.Frame(n)].Function)
		return true
	})
	if len(visited) != 3 || visited[0] != "a" || visited[1] != "b" {
		t.Errorf("walk order = %v, want [a b c]", visited)
	}
	if _, err := topo.Sort(tree); err != nil {
		t.Errorf("a calling-context tree is acyclic: %v", err)
	}
}

func TestTreeDeepRecursionNoStackOverflow(t *testing.T) {
	src := traces.NewSource(traces.Profile, []traces.ValueType{{Type: "samples", Unit: "count"}})
	f := src.InternFrame(traces.Frame{Function: "rec"})
	frames := make([]traces.FrameID, 100_000)
	for i := range frames {
		frames[i] = f
	}
	src.Paths.Append(traces.Path{Frames: frames, Values: []int64{1}})
	g := NewGraph(NewTree(src, TreeOptions{}), 0)
	id, _ := g.Lookup("rec")
	if g.Cum(id) != 1 {
		t.Errorf("cum = %d, want 1", g.Cum(id))
	}
}

// BenchmarkNewTree builds the tree of 50,000 random paths of depth 10–40
// over 2,000 functions (few shared prefixes below the first levels: the
// worst case for the index).
func BenchmarkNewTree(b *testing.B) {
	r := rand.New(rand.NewPCG(1, 2))
	src := traces.NewSource(traces.Profile, []traces.ValueType{{Type: "samples", Unit: "count"}})
	ids := make([]traces.FrameID, 2000)
	for i := range ids {
		ids[i] = src.InternFrame(traces.Frame{Function: fmt.Sprintf("example.com/app.f%d", i)})
	}
	var frames []traces.FrameID
	for range 50_000 {
		frames = append(frames[:0], ids[0], ids[1+r.IntN(8)])
		for d := 10 + r.IntN(31); len(frames) < d; {
			frames = append(frames, ids[r.IntN(len(ids))])
		}
		src.Paths.Append(traces.Path{Frames: frames, Values: []int64{1}})
	}
	b.ReportAllocs()
	for b.Loop() {
		if t := NewTree(src, TreeOptions{}); t.Len() < 50_000 {
			b.Fatal("tree too small")
		}
	}
}

// TestTreeWideNodes merges paths through a node with more children than
// its sibling list is searched for (the rest go through the index), in
// an order that revisits every child: the tree must have each child once.
func TestTreeWideNodes(t *testing.T) {
	var order []string
	paths := map[string]int64{}
	for round := range 3 {
		for i := range 20 {
			key := fmt.Sprintf("main>c%02d>leaf%d", (i*7)%20, round%2)
			if _, ok := paths[key]; !ok {
				order = append(order, key)
			}
			paths[key]++
		}
	}
	tree := NewTree(source(paths, order), TreeOptions{})
	// root, main, 20 children, 2 leaves under each.
	if got, want := tree.Len(), 1+1+20+40; got != want {
		t.Fatalf("tree has %d nodes, want %d", got, want)
	}
	main := tree.Children(Root)[0]
	if n := len(tree.Children(main)); n != 20 {
		t.Errorf("main has %d children, want 20", n)
	}
	for _, c := range tree.Children(main) {
		if tree.Total(c, 0) != 3 {
			t.Errorf("%s: total %d, want 3", tree.src.Frames[tree.Frame(c)].Function, tree.Total(c, 0))
		}
	}
}
