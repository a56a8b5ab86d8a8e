package attribute

import (
	"fmt"
	"regexp"
	"strings"
	"testing"

	"github.com/culprithq/culprit/attribute/internal/testinput"

	"github.com/culprithq/culprit/callgraph"
)

// explainPath flattens the first path of every level of an explanation
// into "function [class] cost/skipped" steps.
func explainPath(n *ExplainNode) []string {
	var out []string
	for n != nil {
		out = append(out, fmt.Sprintf("%s [%s] %d/%d", n.Function, n.Class, n.Cost, n.Skipped))
		if len(n.Children) == 0 {
			break
		}
		n = n.Children[0]
	}
	return out
}

// TestExplainMethodsExample explains the hand-computed example of
// methodsExample (costs by the calling-context-tree definition of
// Ammons, Ball and Larus, PLDI 1997): each root cause is reached by the
// path that charged it, library frames elided, its statement at the end.
func TestExplainMethodsExample(t *testing.T) {
	tree, cls := loadTree(t, buildProfile(t, methodsExample()), DefaultRules())
	ex := Explain(tree, cls, Options{Value: "samples"}, regexp.MustCompile(`store\.|tree\.walk`))
	if len(ex) != 3 {
		t.Fatalf("got %d explanations, want 3", len(ex))
	}
	want := []struct {
		cause string
		cost  int64
		path  []string
	}{
		{"example.com/shop/store.loadOrders", 30, []string{
			"main.main [application, entry] 30/0",
			"example.com/shop/api.handler [application] 30/0",
			"example.com/shop/store.loadOrders [application] 30/0",
			"database/sql.(*DB).Query [database] 30/0",
		}},
		{"example.com/shop/store.loadUser", 10, nil},
		{"example.com/shop/tree.walk", 5, []string{
			"main.main [application, entry] 5/0",
			"example.com/shop/tree.walk [application] 5/0",
			"example.com/shop/tree.walk [application] 5/0",
			"example.com/shop/tree.walk [application] 5/0",
			"database/sql.(*DB).Query [database] 5/0",
		}},
	}
	for i, w := range want {
		e := ex[i]
		if e.RootCause != w.cause || e.Cost != w.cost || abs(e.Share-float64(w.cost)/45) > 1e-12 {
			t.Errorf("explanation %d = %s cost %d share %v, want %s cost %d share %d/45", i, e.RootCause, e.Cost, e.Share, w.cause, w.cost, w.cost)
		}
		if len(e.Paths) != 1 {
			t.Errorf("%s: %d paths, want 1", e.RootCause, len(e.Paths))
			continue
		}
		if w.path != nil {
			if got := explainPath(e.Paths[0]); strings.Join(got, "\n") != strings.Join(w.path, "\n") {
				t.Errorf("%s: path\n%s\nwant\n%s", e.RootCause, strings.Join(got, "\n"), strings.Join(w.path, "\n"))
			}
		}
	}
	// The statement hangs at the boundary, its system refined to the
	// driver below database/sql (github.com/lib/pq).
	leaf := ex[0].Paths[0]
	for len(leaf.Children) > 0 {
		leaf = leaf.Children[0]
	}
	if len(leaf.Statements) != 1 || leaf.Statements[0].Cost != 30 || leaf.Statements[0].System != "postgresql" {
		t.Errorf("boundary statements = %+v, want one of cost 30, system postgresql", leaf.Statements)
	}
	// api.handler is not a root cause of the exclusive view ...
	if got := Explain(tree, cls, Options{Value: "samples"}, regexp.MustCompile(`api\.handler`)); len(got) != 0 {
		t.Errorf("exclusive view explains %d causes for api.handler, want none", len(got))
	}
	// ... but in the inclusive view it is charged by both store paths (10+30).
	inc := Explain(tree, cls, Options{Value: "samples", Inclusive: true}, regexp.MustCompile(`^example\.com/shop/api\.handler$`))
	if len(inc) != 1 || inc[0].Cost != 40 || len(inc[0].Paths) != 1 || len(inc[0].Paths[0].Children) != 1 ||
		len(inc[0].Paths[0].Children[0].Children) != 2 {
		t.Errorf("inclusive explanation of api.handler = %+v, want cost 40 over two branches", inc)
	}
}

// TestExplainAgreesWithRank checks that Explain and the ranking read the
// same charges: for every root cause of a span source, with and without
// --inclusive, the explanation's cost, calls and statements are the
// ranked cause's.
func TestExplainAgreesWithRank(t *testing.T) {
	src := testinput.SpanSource("shop.jsonl", 60e9, testinput.ShopTraces(1, 90, func(r int) int { return 2 + r%9 }))
	cls := NewClassifier(src, DefaultRules())
	tree := callgraph.NewTree(src, callgraph.TreeOptions{Keep: cls.Keep})
	for _, inclusive := range []bool{false, true} {
		opts := Options{Inclusive: inclusive}
		res := Attribute(tree, cls, opts)
		ex := Explain(tree, cls, opts, regexp.MustCompile(``))
		byCause := map[string]Explanation{}
		for _, e := range ex {
			byCause[e.RootCause] = e
		}
		n := 0
		for _, c := range res.Causes {
			if c.NoAppFrame {
				continue
			}
			n++
			e, ok := byCause[c.Function]
			if !ok {
				t.Errorf("inclusive=%v: %s ranked but not explained", inclusive, c.Function)
				continue
			}
			if e.Cost != c.Cost || e.Share != c.Share {
				t.Errorf("inclusive=%v: %s explained cost %d share %v, ranked %d %v", inclusive, c.Function, e.Cost, e.Share, c.Cost, c.Share)
			}
			calls := map[string]int64{}
			var sum func(ns []*ExplainNode)
			sum = func(ns []*ExplainNode) {
				for _, n := range ns {
					for _, d := range n.Statements {
						calls[d.Statement] += d.Calls
					}
					sum(n.Children)
				}
			}
			sum(e.Paths)
			for _, d := range c.Statements {
				if calls[d.Statement] != d.Calls {
					t.Errorf("inclusive=%v: %s statement %q: explained %d calls, ranked %d", inclusive, c.Function, d.Statement, calls[d.Statement], d.Calls)
				}
			}
		}
		if n < 3 || len(ex) != n {
			t.Errorf("inclusive=%v: %d explanations for %d ranked causes (want equal, at least 3)", inclusive, len(ex), n)
		}
	}
}

// TestExplainSkipsLibraryFrames checks that library frames between kept
// steps are elided and counted on the step below them.
func TestExplainSkipsLibraryFrames(t *testing.T) {
	lib := "github.com/acme/mw.Wrap@/home/ci/go/pkg/mod/github.com/acme/mw@v1.2.0/mw.go:40"
	stacks := []fakeStack{{Frames: []string{fMain, fHandler, lib, lib + "1", fLoadUser, fQuery}, Count: 7}}
	tree, cls := loadTree(t, buildProfile(t, stacks), DefaultRules())
	ex := Explain(tree, cls, Options{Value: "samples"}, regexp.MustCompile(`loadUser`))
	if len(ex) != 1 {
		t.Fatalf("got %d explanations, want 1", len(ex))
	}
	got := strings.Join(explainPath(ex[0].Paths[0]), "\n")
	want := strings.Join([]string{
		"main.main [application, entry] 7/0",
		"example.com/shop/api.handler [application] 7/0",
		"example.com/shop/store.loadUser [application] 7/2",
		"database/sql.(*DB).Query [database] 7/0",
	}, "\n")
	if got != want {
		t.Errorf("path\n%s\nwant\n%s", got, want)
	}
}
