package attribute

import (
	"bytes"
	"reflect"
	"testing"

	"github.com/culprithq/culprit/attribute/internal/testinput"

	"github.com/culprithq/culprit/callgraph"
	"github.com/culprithq/culprit/traces"
)

// Frames with the file shapes Go's runtime/pprof writes (reference
// pprof-profiles.md §5): GOROOT files for the standard library, the
// module's own directory for application code.
// Frames of the shop service (testinput).
const (
	fMain       = testinput.Main
	fHandler    = testinput.Handler
	fLoadUser   = testinput.LoadUser
	fLoadOrders = testinput.LoadOrders
	fRender     = testinput.Render
	fWalk       = testinput.Walk
	fQuery      = testinput.Query
	fDriver     = testinput.Driver
	fHTTP       = testinput.HTTP
	fMux        = testinput.Mux
	fServe      = testinput.Serve
)

// The worked example of the methods reference §1 ("Calling context trees,
// not call graphs", constructed, computed by hand): paths
// main>handler>loadUser>sql.Query ×10, main>handler>loadOrders>sql.Query ×30,
// main>handler>render ×20, main>walk>walk>walk>sql.Query ×5.
// Charged: loadUser 10, loadOrders 30, walk 5; database 45 of 65.
func methodsExample() []fakeStack {
	return []fakeStack{
		{Frames: []string{fMain, fHandler, fLoadUser, fQuery, fDriver}, Count: 10},
		{Frames: []string{fMain, fHandler, fLoadOrders, fQuery, fDriver}, Count: 30},
		{Frames: []string{fMain, fHandler, fRender}, Count: 20},
		{Frames: []string{fMain, fWalk, fWalk, fWalk, fQuery}, Count: 5},
	}
}

func TestAttributeMethodsExample(t *testing.T) {
	data := buildProfile(t, methodsExample())
	res := rankProfile(t, data, DefaultRules(), Options{Value: "samples"})

	if res.Totals.Cost != 65 || res.Totals.Database != 45 || res.Totals.Network != 0 || res.Totals.Other != 20 {
		t.Fatalf("totals = %+v, want cost 65, database 45, other 20", res.Totals)
	}
	want := []struct {
		fn   string
		cost int64
		line int64
	}{
		{"example.com/shop/store.loadOrders", 30, 44},
		{"example.com/shop/store.loadUser", 10, 12},
		{"example.com/shop/tree.walk", 5, 17},
	}
	if len(res.Causes) != len(want) {
		t.Fatalf("got %d causes, want %d: %+v", len(res.Causes), len(want), res.Causes)
	}
	for i, w := range want {
		c := res.Causes[i]
		if c.Function != w.fn || c.Cost != w.cost || c.Line != w.line || c.Kind != KindDatabase {
			t.Errorf("cause %d = %s cost %d line %d kind %s, want %s cost %d line %d database",
				i, c.Function, c.Cost, c.Line, c.Kind, w.fn, w.cost, w.line)
		}
		if c.Samples != w.cost {
			t.Errorf("%s: samples %d, want %d", c.Function, c.Samples, w.cost)
		}
	}
	// Share is charged ÷ (database + network), with a binomial margin.
	lo := causeByName(res, "example.com/shop/store.loadOrders")
	if got, want := lo.Share, 30.0/45; abs(got-want) > 1e-12 {
		t.Errorf("share = %v, want %v", got, want)
	}
	if lo.ShareMargin <= 0 || lo.ShareMargin > 0.2 {
		t.Errorf("share margin = %v, want a 95%% binomial margin in (0, 0.2]", lo.ShareMargin)
	}
	// The boundary system is refined from database/sql to the driver below it.
	if got := lo.Statements[0]; got.System != "postgresql" || got.Statement != "database/sql.(*DB).Query" {
		t.Errorf("detail = %+v, want postgresql via database/sql.(*DB).Query", got)
	}
	// Recursion reaching the database is found on the path itself.
	var rec *Finding
	for i := range res.Findings {
		if res.Findings[i].Kind == "recursive-access" {
			rec = &res.Findings[i]
		}
	}
	if rec == nil || rec.Function != "example.com/shop/tree.walk" || rec.Depth != 3 || rec.Cost != 5 {
		t.Errorf("recursive-access finding = %+v, want walk, depth 3, cost 5", rec)
	}
}

func TestAttributeInclusive(t *testing.T) {
	data := buildProfile(t, methodsExample())
	res := rankProfile(t, data, DefaultRules(), Options{Value: "samples", Inclusive: true})
	// Inclusive: every distinct application frame above the boundary gets
	// the path once. handler: 10+30 (render reaches no boundary); main: 45;
	// walk: 5, not 15 (recursion counted once per path; methods reference §1).
	want := map[string]int64{
		"main.main":                         45,
		"example.com/shop/api.handler":      40,
		"example.com/shop/store.loadOrders": 30,
		"example.com/shop/store.loadUser":   10,
		"example.com/shop/tree.walk":        5,
	}
	if len(res.Causes) != len(want) {
		t.Fatalf("got %d causes, want %d", len(res.Causes), len(want))
	}
	for fn, cost := range want {
		c := causeByName(res, fn)
		if c == nil || c.Cost != cost {
			t.Errorf("%s: %+v, want cost %d", fn, c, cost)
		}
	}
}

func TestAttributeNoAppFrameAndEntries(t *testing.T) {
	stacks := []fakeStack{
		// A library calls the network with no application frame above it.
		{Frames: []string{fServe, fMux, fHTTP}, Count: 7},
		// Through a handler: the entry point is the handler under the mux.
		{Frames: []string{fServe, fMux, fHandler, fHTTP}, Count: 3},
		// The route label names the entry point when present.
		{Frames: []string{fServe, fMux, fHandler, fLoadUser, fQuery}, Count: 4, Labels: map[string][]string{"http.route": {"/users/{id}"}}},
	}
	res := rankProfile(t, buildProfile(t, stacks), DefaultRules(), Options{Value: "samples"})
	noApp := causeByName(res, NoAppFramePrefix+"net/http.HandlerFunc.ServeHTTP")
	if noApp == nil || !noApp.NoAppFrame || noApp.Cost != 7 || noApp.Kind != KindNetwork {
		t.Fatalf("no-app bucket = %+v, want 7 network", noApp)
	}
	if res.Totals.Unattributed != 7 {
		t.Errorf("unattributed = %d, want 7", res.Totals.Unattributed)
	}
	h := causeByName(res, "example.com/shop/api.handler")
	if h == nil || h.Cost != 3 || h.EntryPoints[0].Entry != "example.com/shop/api.handler" {
		t.Errorf("handler = %+v, want cost 3 under entry handler", h)
	}
	u := causeByName(res, "example.com/shop/store.loadUser")
	if u == nil || u.EntryPoints[0].Entry != "/users/{id}" {
		t.Errorf("loadUser entries = %+v, want the route label", u)
	}
}

func TestAttributeAppPrefix(t *testing.T) {
	// With --app naming only the store package, the handler is library
	// code and loadUser is still the root cause; walk's path has no
	// application frame.
	rules := DefaultRules()
	rules.App = []string{"example.com/shop/store."}
	res := rankProfile(t, buildProfile(t, methodsExample()), rules, Options{Value: "samples"})
	if c := causeByName(res, "example.com/shop/store.loadUser"); c == nil || c.Cost != 10 {
		t.Errorf("loadUser = %+v", c)
	}
	if res.Totals.Unattributed != 5 {
		t.Errorf("unattributed = %d, want walk's 5", res.Totals.Unattributed)
	}
}

func TestAttributeDeterministic(t *testing.T) {
	data := buildProfile(t, methodsExample())
	a := rankProfile(t, data, DefaultRules(), Options{Value: "samples"})
	for i := 0; i < 5; i++ {
		b := rankProfile(t, data, DefaultRules(), Options{Value: "samples"})
		for j := range a.Causes {
			if a.Causes[j].Function != b.Causes[j].Function || a.Causes[j].Cost != b.Causes[j].Cost {
				t.Fatalf("run %d differs at %d", i, j)
			}
		}
	}
}

func abs(x float64) float64 {
	if x < 0 {
		return -x
	}
	return x
}

// TestShardedChargingMatches checks that charging a span source in
// several goroutines gives exactly the result of one.
func TestShardedChargingMatches(t *testing.T) {
	src := testinput.SpanSource("shop.jsonl", 60e9, testinput.ShopTraces(1, 400, func(r int) int { return 2 + r%9 }))
	cls := NewClassifier(src, DefaultRules())
	tree := callgraph.NewTree(src, callgraph.TreeOptions{Keep: cls.Keep})
	for _, inclusive := range []bool{false, true} {
		one := Attribute(tree, cls, Options{Inclusive: inclusive, shards: 1})
		if len(one.Causes) < 2 || len(one.Findings) == 0 {
			t.Fatalf("too little to compare: %d causes, %d findings", len(one.Causes), len(one.Findings))
		}
		for _, k := range []int{2, 3, 7} {
			if got := Attribute(tree, cls, Options{Inclusive: inclusive, shards: k}); !reflect.DeepEqual(got, one) {
				t.Errorf("inclusive=%v, %d shards: result differs from one shard", inclusive, k)
			}
		}
	}
}

// TestDropRequestVectors checks that leaving out the per-request vectors
// changes nothing else in the result (distributions included).
func TestDropRequestVectors(t *testing.T) {
	src := testinput.SpanSource("shop.jsonl", 60e9, testinput.ShopTraces(1, 120, func(r int) int { return 2 + r%9 }))
	cls := NewClassifier(src, DefaultRules())
	tree := callgraph.NewTree(src, callgraph.TreeOptions{Keep: cls.Keep})
	kept := Attribute(tree, cls, Options{})
	dropped := Attribute(tree, cls, Options{DropRequestVectors: true})
	for i, c := range kept.Causes {
		if len(c.requestCosts) == 0 || c.CallsPerRequest == nil {
			t.Fatalf("cause %d (%s) has no vectors to drop", i, c.Function)
		}
		if dropped.Causes[i].requestCosts != nil || dropped.Causes[i].requestCalls != nil {
			t.Errorf("cause %d kept its vectors", i)
		}
		c.requestCosts, c.requestCalls = nil, nil
	}
	if !reflect.DeepEqual(kept, dropped) {
		t.Error("results differ beyond the vectors")
	}
}

// TestKeepMatchesCut checks that trimming the paths that reach no
// boundary (Classifier.Keep) changes no result: the same profile through
// a tree that keeps every such path whole gives the same Result.
func TestKeepMatchesCut(t *testing.T) {
	cutOnly := func(cls *Classifier) func([]traces.FrameID) int {
		return func(fs []traces.FrameID) int {
			for i, f := range fs {
				if cls.Verdict(f).Class.IsBoundary() {
					return i + 1
				}
			}
			return len(fs)
		}
	}
	for name, stacks := range map[string][]fakeStack{
		"random":   randomStacks(3000, 7),
		"requests": testinput.RequestStacks(1, 60),
		"methods":  methodsExample(),
	} {
		t.Run(name, func(t *testing.T) {
			l := traces.NewLoader(traces.Options{})
			if err := l.Add("p.pb.gz", bytes.NewReader(buildProfile(t, stacks))); err != nil {
				t.Fatal(err)
			}
			src, err := l.Source()
			if err != nil {
				t.Fatal(err)
			}
			cls := NewClassifier(src, DefaultRules())
			kept := callgraph.NewTree(src, callgraph.TreeOptions{Keep: cls.Keep})
			whole := callgraph.NewTree(src, callgraph.TreeOptions{Keep: cutOnly(cls)})
			if kept.Len() >= whole.Len() && name == "random" {
				t.Errorf("trimming kept %d nodes of %d", kept.Len(), whole.Len())
			}
			sameAttribution(t, kept, whole, cls)
		})
	}
	t.Run("spans", func(t *testing.T) {
		src := testinput.SpanSource("shop.jsonl", 60e9, testinput.ShopTraces(1, 80, func(r int) int { return 2 + r%9 }))
		cls := NewClassifier(src, DefaultRules())
		sameAttribution(t, callgraph.NewTree(src, callgraph.TreeOptions{Keep: cls.Keep}),
			callgraph.NewTree(src, callgraph.TreeOptions{Keep: cutOnly(cls)}), cls)
	})
}

// sameAttribution fails unless attributing over a and b gives the same
// result, with and without --inclusive, and that result has root causes
// and findings to compare.
func sameAttribution(t *testing.T, a, b *callgraph.Tree, cls *Classifier) {
	t.Helper()
	for _, inclusive := range []bool{false, true} {
		opts := Options{Inclusive: inclusive}
		got, want := Attribute(a, cls, opts), Attribute(b, cls, opts)
		if len(want.Causes) == 0 || len(want.Entries) == 0 {
			t.Fatalf("nothing to compare: %d causes, %d entries", len(want.Causes), len(want.Entries))
		}
		if !reflect.DeepEqual(got, want) {
			t.Errorf("inclusive=%v: results differ", inclusive)
		}
	}
}

// TestShardedProfileChargingMatches checks that charging a profile in
// several goroutines gives exactly the result of one: requests named by
// labels are numbered before the paths are shared out.
func TestShardedProfileChargingMatches(t *testing.T) {
	stacks := append(testinput.RequestStacks(1, 200), randomStacks(2000, 3)...)
	tree, cls := loadTree(t, buildProfile(t, stacks), DefaultRules())
	for _, inclusive := range []bool{false, true} {
		one := Attribute(tree, cls, Options{Inclusive: inclusive, shards: 1})
		if one.Totals.Requests == 0 || len(one.Causes) < 2 {
			t.Fatalf("too little to compare: %d requests, %d causes", one.Totals.Requests, len(one.Causes))
		}
		for _, k := range []int{2, 3, 7} {
			if got := Attribute(tree, cls, Options{Inclusive: inclusive, shards: k}); !reflect.DeepEqual(got, one) {
				t.Errorf("inclusive=%v, %d shards: result differs from one shard", inclusive, k)
			}
		}
	}
}
