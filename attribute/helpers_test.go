package attribute

import (
	"testing"

	"github.com/culprithq/culprit/callgraph"
	"github.com/culprithq/culprit/traces"
)

// helperSpans builds a span source in which a service's own code makes
// spans (with code.* attributes, as the OpenTelemetry code conventions
// describe): three functions of two packages query through the helper
// span sqldb.(*DB).Query, and audit.record queries directly, called by
// two functions of its own package.
func helperSpans() *traces.Source {
	src := traces.NewSource(traces.Spans, []traces.ValueType{{Type: "duration", Unit: "nanoseconds"}, {Type: "calls", Unit: "count"}})
	code := func(fn, file string) traces.FrameID {
		return src.InternFrame(traces.Frame{Function: "example.com/shop/" + fn, File: "/home/ci/shop/" + file, Line: 10,
			SpanKind: traces.SpanKindInternal, Span: true, Service: "shop"})
	}
	server := src.InternFrame(traces.Frame{Function: "GET /orders", SpanKind: traces.SpanKindServer, Span: true, Service: "shop"})
	query := src.InternFrame(traces.Frame{Function: "SELECT shop", SpanKind: traces.SpanKindClient, Protocol: traces.ProtocolDatabase, System: "postgresql", Span: true, Service: "shop"})
	helper := code("sqldb.(*DB).Query", "sqldb/db.go")
	callers := []traces.FrameID{code("plants.ByID", "plants/plants.go"), code("plants.List", "plants/plants.go"), code("orders.Lines", "orders/orders.go")}
	record := code("audit.record", "audit/audit.go")
	auditors := []traces.FrameID{code("audit.Login", "audit/audit.go"), code("audit.Logout", "audit/audit.go")}
	stmt := src.InternCall(traces.Call{System: "postgresql", Statement: "SELECT 1", Peer: "db:5432"})
	for r := 1; r <= 4; r++ {
		req := src.InternRequest(string(rune('a' + r)))
		src.Paths.Append(traces.Path{Frames: []traces.FrameID{server}, Values: []int64{100, 1}, Request: req})
		for i, c := range callers {
			src.Paths.Append(traces.Path{Frames: []traces.FrameID{server, c, helper, query}, Values: []int64{int64(10 + i), 1}, Request: req, Call: stmt})
		}
		for _, a := range auditors {
			src.Paths.Append(traces.Path{Frames: []traces.FrameID{server, a, record, query}, Values: []int64{5, 1}, Request: req, Call: stmt})
		}
	}
	return src
}

// TestSharedHelperSpans checks seeing through a helper that makes its own
// spans, with detection, without, and in the inclusive view.
func TestSharedHelperSpans(t *testing.T) {
	src := helperSpans()
	cls := NewClassifier(src, DefaultRules())
	tree := callgraph.NewTree(src, callgraph.TreeOptions{Keep: cls.Keep})
	costs := func(res *Result) map[string]int64 {
		m := map[string]int64{}
		for _, c := range res.Causes {
			m[c.Function] = c.Cost
		}
		return m
	}
	const p = "example.com/shop/"
	auto := Attribute(tree, cls, Options{})
	want := map[string]int64{p + "plants.ByID": 40, p + "plants.List": 44, p + "orders.Lines": 48, p + "audit.record": 40}
	if got := costs(auto); !equalCosts(got, want) {
		t.Errorf("auto: causes %v, want %v", got, want)
	}
	if len(auto.Helpers) != 1 || auto.Helpers[0].Function != p+"sqldb.(*DB).Query" || auto.Helpers[0].Cost != 132 ||
		auto.Helpers[0].Callers != 3 || auto.Helpers[0].Packages != 2 {
		t.Errorf("auto: helpers %+v", auto.Helpers)
	}
	for _, c := range auto.Causes {
		via := p + "sqldb.(*DB).Query"
		if c.Function == p+"audit.record" {
			via = ""
		}
		if len(c.Statements) != 1 || c.Statements[0].Via != via {
			t.Errorf("%s: statements %+v, want one via %q", c.Function, c.Statements, via)
		}
	}
	off := Attribute(tree, cls, Options{Helpers: HelpersOff})
	if got, want := costs(off), map[string]int64{p + "sqldb.(*DB).Query": 132, p + "audit.record": 40}; !equalCosts(got, want) {
		t.Errorf("off: causes %v, want %v", got, want)
	}
	// Inclusive: every application function above the call except the
	// helper seen through.
	inc := Attribute(tree, cls, Options{Inclusive: true})
	if got := costs(inc); got[p+"sqldb.(*DB).Query"] != 0 || got[p+"plants.ByID"] != 40 || got[p+"audit.Login"] != 20 || got[p+"audit.record"] != 40 {
		t.Errorf("inclusive: causes %v", got)
	}
}

func equalCosts(a, b map[string]int64) bool {
	if len(a) != len(b) {
		return false
	}
	for k, v := range a {
		if b[k] != v {
			return false
		}
	}
	return true
}

func TestPackageOf(t *testing.T) {
	for _, tc := range []struct{ fn, file, want string }{
		// Go names as the runtime prints them (runtime.FuncForPC).
		{"example.com/shop/sqldb.(*DB).Query", "/src/shop/sqldb/db.go", "example.com/shop/sqldb"},
		{"example.com/shop/plants.ByID.func1", "/src/shop/plants/p.go", "example.com/shop/plants"},
		{"main.(*server).handle", "/src/shop/main.go", "main"},
		{"example.com/shop/cache.Get[go.shape.*example.com/x.T]", "/src/shop/cache/c.go", "example.com/shop/cache"},
		// JVM and Python names: the class or function is dropped.
		{"com.shop.repo.BaseRepo.find", "BaseRepo.java", "com.shop.repo"},
		{"shop.repo.query", "repo.py", "shop.repo"},
		{"query", "", ""},
	} {
		if got := packageOf(&traces.Frame{Function: tc.fn, File: tc.file}); got != tc.want {
			t.Errorf("packageOf(%q) = %q, want %q", tc.fn, got, tc.want)
		}
	}
}

func TestIsNamedHelper(t *testing.T) {
	names := []string{"example.com/shop/sqldb.", "example.com/shop/repo.(*Base).Get"}
	for fn, want := range map[string]bool{
		"example.com/shop/sqldb.(*DB).Query":      true,
		"example.com/shop/sqldbx.Query":           false,
		"example.com/shop/repo.(*Base).Get":       true,
		"example.com/shop/repo.(*Base).Get.func1": true,
		"example.com/shop/repo.(*Base).GetAll":    false,
	} {
		if got := isNamedHelper(fn, names); got != want {
			t.Errorf("isNamedHelper(%q) = %v, want %v", fn, got, want)
		}
	}
}

// TestNoHelpersInRandomCode checks that code in which every function
// sometimes ends a path and mostly calls further (random stacks over 300
// functions of 20 packages) has no shared helper: seeing through would
// charge everything to the outermost frames.
func TestNoHelpersInRandomCode(t *testing.T) {
	tree, cls := loadTree(t, buildProfile(t, randomStacks(3000, 5)), DefaultRules())
	auto := Attribute(tree, cls, Options{})
	if len(auto.Helpers) != 0 {
		t.Errorf("%d helpers detected, first %+v", len(auto.Helpers), auto.Helpers[0])
	}
	if off := Attribute(tree, cls, Options{Helpers: HelpersOff}); len(off.Causes) != len(auto.Causes) || off.Causes[0].Cost != auto.Causes[0].Cost {
		t.Error("detection changed the result")
	}
}
