package callgraph

import (
	"fmt"
	"math/rand/v2"
	"testing"

	"github.com/culprithq/culprit/traces"
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
	if got := total(tree, mainNode); got != 65 {
		t.Errorf("total(main) = %d, want 65", got)
	}
	if got := self(tree, tree.Leaf(2)); got != 20 {
		t.Errorf("self(render) = %d, want 20", got)
	}

}

// A merged graph can show a cycle that no path has (methods reference
// §1: main>A>B>db plus main>B>A>render make A↔B a cycle).
func TestFuncGraphMergedCycle(t *testing.T) {
	// Functions: 0 main, 1 A, 2 B, 3 walk, 4 db. Calls from the paths
	// main>A>B>db, main>B>A, main>walk>walk>db (a repeated call too).
	g := NewFuncGraph(5, callsOf(0, 1, 1, 2, 2, 4, 0, 2, 2, 1, 0, 3, 3, 3, 3, 4, 0, 1))
	got := g.Recursive()
	want := []bool{false, true, true, true, false}
	for i := range want {
		if got[i] != want[i] {
			t.Errorf("Recursive()[%d] = %v, want %v (A↔B merged cycle, walk self-call)", i, got[i], want[i])
		}
	}
}

// TestFuncGraphTarjanExample runs the 8-node example of Cormen,
// Leiserson, Rivest and Stein, "Introduction to Algorithms", 3rd ed.,
// Fig. 22.9 (edges recalled from memory): components {a,b,e}, {c,d},
// {f,g} and {h}, where h calls itself.
func TestFuncGraphTarjanExample(t *testing.T) {
	const a, b, c, d, e, f, g, h = 0, 1, 2, 3, 4, 5, 6, 7
	gr := NewFuncGraph(8, callsOf(a, b, b, c, b, e, b, f, c, d, c, g, d, c, d, h, e, a, e, f, f, g, g, f, g, h, h, h))
	got := gr.Recursive()
	for i, w := range []bool{true, true, true, true, true, true, true, true} {
		if got[i] != w {
			t.Errorf("node %d on a cycle = %v, want %v", i, got[i], w)
		}
	}
	// Without h's self-call h is a component of one: not recursive.
	gr = NewFuncGraph(8, callsOf(a, b, b, c, b, e, b, f, c, d, c, g, d, c, d, h, e, a, e, f, f, g, g, f, g, h))
	if got := gr.Recursive(); got[h] || !got[a] || !got[c] || !got[f] {
		t.Errorf("without the self-call: %v, want all but h", got)
	}
}

func TestTreeSharedPrefix(t *testing.T) {
	order := []string{"a>b", "a>c"}
	src := source(map[string]int64{"a>b": 2, "a>c": 3}, order)
	tree := NewTree(src, TreeOptions{})
	a := tree.Parent(tree.Leaf(0))
	if tree.Parent(tree.Leaf(1)) != a || total(tree, a) != 5 {
		t.Error("b and c must share their parent a, of total 5")
	}
	if got := tree.Path(tree.Leaf(1)); len(got) != 2 || src.Frames[got[0]].Function != "a" || src.Frames[got[1]].Function != "c" {
		t.Errorf("path of a>c = %v", got)
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
	tree := NewTree(src, TreeOptions{})
	if tree.Len() != 100_001 || tree.Depth(tree.Leaf(0)) != 100_000 || len(tree.Path(tree.Leaf(0))) != 100_000 {
		t.Errorf("tree of %d nodes, leaf depth %d", tree.Len(), tree.Depth(tree.Leaf(0)))
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
	main := tree.Parent(tree.Parent(tree.Leaf(0)))
	var children []NodeID
	for n := range tree.Len() {
		if n > 0 && tree.Parent(NodeID(n)) == main {
			children = append(children, NodeID(n))
		}
	}
	if n := len(children); n != 20 {
		t.Errorf("main has %d children, want 20", n)
	}
	for _, c := range children {
		if total(tree, c) != 3 {
			t.Errorf("%s: total %d, want 3", tree.src.Frames[tree.Frame(c)].Function, total(tree, c))
		}
	}
}

// self adds up the first value of the paths that end at n.
func self(t *Tree, n NodeID) int64 {
	var v int64
	for pi := range t.src.Paths.Len() {
		if t.Leaf(pi) == n {
			v += t.src.Paths.Value(pi, 0)
		}
	}
	return v
}

// total adds up the first value of the paths through n.
func total(t *Tree, n NodeID) int64 {
	var v int64
	for pi := range t.src.Paths.Len() {
		for m := t.Leaf(pi); ; m = t.Parent(m) {
			if m == n {
				v += t.src.Paths.Value(pi, 0)
				break
			}
			if m == Root {
				break
			}
		}
	}
	return v
}

// callsOf collects the calls caller0, callee0, caller1, callee1, ….
func callsOf(ends ...FuncID) *Calls {
	var c Calls
	for i := 0; i+1 < len(ends); i += 2 {
		c.Add(ends[i], ends[i+1])
	}
	return &c
}
