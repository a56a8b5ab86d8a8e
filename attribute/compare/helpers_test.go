package compare

import (
	"bytes"
	"strings"
	"testing"

	"github.com/culprithq/culprit/attribute/internal/testinput"

	"github.com/culprithq/culprit/attribute"
	"github.com/culprithq/culprit/callgraph"
	"github.com/culprithq/culprit/traces"
	"github.com/culprithq/culprit/traces/statement"
)

// Test inputs: profiles and span sources from attribute/internal/testinput,
// which attribute's tests share; OTLP/JSON lines written by hand.

var samplesType = traces.ValueType{Type: "samples", Unit: "count"}

// rankProfile loads data and attributes it with rules.
func rankProfile(t testing.TB, data []byte, rules *attribute.Rules, opts attribute.Options) *attribute.Result {
	t.Helper()
	tree, cls := loadTree(t, data, rules)
	return attribute.Attribute(tree, cls, opts)
}

// loadTree loads a profile, classifies it with rules and builds its
// tree, cut at boundaries as culprit does.
func loadTree(t testing.TB, data []byte, rules *attribute.Rules) (*callgraph.Tree, *attribute.Classifier) {
	t.Helper()
	l := traces.NewLoader(traces.Options{})
	if err := l.Add("test.pb.gz", bytes.NewReader(data)); err != nil {
		t.Fatal(err)
	}
	src, err := l.Source()
	if err != nil {
		t.Fatal(err)
	}
	cls := attribute.NewClassifier(src, rules)
	return callgraph.NewTree(src, callgraph.TreeOptions{Keep: cls.Keep}), cls
}

// The worked example of the methods reference §1 ("Calling context trees,
// not call graphs", constructed, computed by hand): paths
// main>handler>loadUser>sql.Query ×10, main>handler>loadOrders>sql.Query ×30,
// main>handler>render ×20, main>walk>walk>walk>sql.Query ×5.
// Charged: loadUser 10, loadOrders 30, walk 5; database 45 of 65.
func methodsExample() []fakeStack {
	return []fakeStack{
		{Frames: []string{testinput.Main, testinput.Handler, testinput.LoadUser, testinput.Query, testinput.Driver}, Count: 10},
		{Frames: []string{testinput.Main, testinput.Handler, testinput.LoadOrders, testinput.Query, testinput.Driver}, Count: 30},
		{Frames: []string{testinput.Main, testinput.Handler, testinput.Render}, Count: 20},
		{Frames: []string{testinput.Main, testinput.Walk, testinput.Walk, testinput.Walk, testinput.Query}, Count: 5},
	}
}

func loadSpans(t testing.TB, jsonl string, timing bool) (*callgraph.Tree, *attribute.Classifier) {
	t.Helper()
	l := traces.NewLoader(traces.Options{Timing: timing, Statement: statement.AppendText})
	if err := l.Add("test.jsonl", strings.NewReader(jsonl)); err != nil {
		t.Fatal(err)
	}
	src, err := l.Source()
	if err != nil {
		t.Fatal(err)
	}
	cls := attribute.NewClassifier(src, attribute.DefaultRules())
	return callgraph.NewTree(src, callgraph.TreeOptions{Keep: cls.Keep}), cls
}

// TestCompareMovedLines checks that a function whose call site moved
// (same name, another line) is one cause across builds, not a gone and a
// new one, and that renumbered closures match too.
func TestCompareMovedLines(t *testing.T) {
	tests := []struct {
		name       string
		base, cand SnapshotCause
	}{
		{"moved line",
			SnapshotCause{Function: "example.com/shop/store.loadOrders", File: "store/orders.go", Line: 44},
			SnapshotCause{Function: "example.com/shop/store.loadOrders", File: "store/orders.go", Line: 61}},
		{"renumbered closure",
			SnapshotCause{Function: "example.com/shop/api.handler.func2", File: "api/api.go", Line: 30},
			SnapshotCause{Function: "example.com/shop/api.handler.func3", File: "api/api.go", Line: 35}},
		{"lambda renumbered",
			SnapshotCause{Function: "com.example.shop.Orders.lambda$load$1", File: "Orders.java", Line: 88},
			SnapshotCause{Function: "com.example.shop.Orders.lambda$load$4", File: "Orders.java", Line: 90}},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			mk := func(c SnapshotCause) *Snapshot {
				c.Identity = attribute.Identity(c.Function)
				c.Kind, c.Cost, c.Database, c.Samples = attribute.KindDatabase, 100, 100, 100
				return &Snapshot{Schema: SnapshotSchema, SourceKind: "profile", ValueType: samplesType, Sampled: true,
					DurationNanos: 10e9, Totals: attribute.Totals{Cost: 200, Database: 100, Other: 100, Samples: 200, BoundarySamples: 100},
					Causes: []SnapshotCause{c}}
			}
			cmp := Compare(mk(tt.base), mk(tt.cand), CompareOptions{})
			if len(cmp.Changes) != 1 {
				t.Fatalf("got %d changes, want 1: %+v", len(cmp.Changes), cmp.Changes)
			}
			if ch := cmp.Changes[0]; ch.Verdict != OutcomeUnchanged || ch.Function != tt.cand.Function {
				t.Errorf("change = %s %s, want unchanged %s", ch.Function, ch.Verdict, tt.cand.Function)
			}
		})
	}
}

// fakeStack is one sample of a test profile (testinput.Stack).
type fakeStack = testinput.Stack

// buildProfile encodes stacks with the pprof library (testinput.Profile).
func buildProfile(t testing.TB, stacks []fakeStack) []byte {
	t.Helper()
	return testinput.MustProfile(t, stacks)
}

// tspan is a span of a hand-written OTLP/JSON test trace (testinput.Span).
type tspan = testinput.Span
