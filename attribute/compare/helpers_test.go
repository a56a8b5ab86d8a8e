package compare

import (
	"bytes"
	"fmt"
	"strings"
	"testing"

	"github.com/culprithq/culprit/attribute"
	"github.com/culprithq/culprit/callgraph"
	"github.com/culprithq/culprit/traces"
	"github.com/culprithq/culprit/traces/statement"
	"github.com/google/pprof/profile"
)

// Test inputs made as the attribute package's tests make them (a copy:
// test helpers cannot be shared across packages): profiles encoded by the
// pprof library, OTLP/JSON lines written by hand.

var samplesType = traces.ValueType{Type: "samples", Unit: "count"}

// fakeStack is one sample of a test profile: frames root first, written
// "function@file:line", and a count.
type fakeStack struct {
	frames []string
	count  int64
	labels map[string][]string
}

// buildProfile encodes stacks with the pprof library itself (the reference
// encoder of profile.proto), as a goroutine-style profile.
func buildProfile(t testing.TB, stacks []fakeStack) []byte {
	t.Helper()
	p := &profile.Profile{
		SampleType: []*profile.ValueType{{Type: "samples", Unit: "count"}, {Type: "cpu", Unit: "nanoseconds"}},
		PeriodType: &profile.ValueType{Type: "cpu", Unit: "nanoseconds"},
		Period:     10_000_000,
	}
	funcs := map[string]*profile.Function{}
	locs := map[string]*profile.Location{}
	for _, st := range stacks {
		var sl []*profile.Location
		for i := len(st.frames) - 1; i >= 0; i-- { // leaf first
			spec := st.frames[i]
			loc := locs[spec]
			if loc == nil {
				name, file, line := parseFrameSpec(spec)
				fn := funcs[name+"@"+file]
				if fn == nil {
					fn = &profile.Function{ID: uint64(len(funcs) + 1), Name: name, SystemName: name, Filename: file}
					funcs[name+"@"+file] = fn
					p.Function = append(p.Function, fn)
				}
				loc = &profile.Location{ID: uint64(len(locs) + 1), Line: []profile.Line{{Function: fn, Line: line}}}
				locs[spec] = loc
				p.Location = append(p.Location, loc)
			}
			sl = append(sl, loc)
		}
		p.Sample = append(p.Sample, &profile.Sample{Location: sl, Value: []int64{st.count, st.count * 10_000_000}, Label: st.labels})
	}
	var buf bytes.Buffer
	if err := p.Write(&buf); err != nil {
		t.Fatal(err)
	}
	return buf.Bytes()
}

func parseFrameSpec(spec string) (name, file string, line int64) {
	name, rest, _ := strings.Cut(spec, "@")
	file, ln, _ := strings.Cut(rest, ":")
	for _, c := range ln {
		line = line*10 + int64(c-'0')
	}
	return name, file, line
}

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
		{frames: []string{fMain, fHandler, fLoadUser, fQuery, fDriver}, count: 10},
		{frames: []string{fMain, fHandler, fLoadOrders, fQuery, fDriver}, count: 30},
		{frames: []string{fMain, fHandler, fRender}, count: 20},
		{frames: []string{fMain, fWalk, fWalk, fWalk, fQuery}, count: 5},
	}
}

const (
	fMain       = "main.main@/home/ci/shop/main.go:20"
	fHandler    = "example.com/shop/api.handler@/home/ci/shop/api/api.go:31"
	fLoadUser   = "example.com/shop/store.loadUser@/home/ci/shop/store/user.go:12"
	fLoadOrders = "example.com/shop/store.loadOrders@/home/ci/shop/store/orders.go:44"
	fRender     = "example.com/shop/api.render@/home/ci/shop/api/render.go:9"
	fWalk       = "example.com/shop/tree.walk@/home/ci/shop/tree/walk.go:17"
	fQuery      = "database/sql.(*DB).Query@/usr/local/go/src/database/sql/sql.go:1720"
	fDriver     = "github.com/lib/pq.(*conn).query@/home/ci/go/pkg/mod/github.com/lib/pq@v1.10.9/conn.go:870"
	fHTTP       = "net/http.(*Client).Do@/usr/local/go/src/net/http/client.go:590"
	fMux        = "net/http.HandlerFunc.ServeHTTP@/usr/local/go/src/net/http/server.go:2220"
	fServe      = "net/http.(*conn).serve@/usr/local/go/src/net/http/server.go:2090"
)

// tspan is a span of a hand-written OTLP/JSON test trace; times in ms.
type tspan struct {
	id, parent string // span IDs (16 hex digits are padded from these)
	name       string
	kind       int // OTLP SpanKind
	start, end int64
	attrs      map[string]string
}

// otlpLineNanos is otlpLine with span times in ns.
func otlpLineNanos(svc, traceID string, spans []tspan) string {
	var b strings.Builder
	fmt.Fprintf(&b, `{"resourceSpans":[{"resource":{"attributes":[{"key":"service.name","value":{"stringValue":%q}}]},"scopeSpans":[{"scope":{"name":"greenhouse"},"spans":[`, svc)
	for i, s := range spans {
		if i > 0 {
			b.WriteByte(',')
		}
		fmt.Fprintf(&b, `{"traceId":%q,"spanId":%q,"name":%q,"kind":%d,"startTimeUnixNano":"%d","endTimeUnixNano":"%d"`,
			fmt.Sprintf("%032s", traceID), fmt.Sprintf("%016s", s.id), s.name, s.kind,
			1_700_000_000_000_000_000+s.start, 1_700_000_000_000_000_000+s.end)
		if s.parent != "" {
			fmt.Fprintf(&b, `,"parentSpanId":%q`, fmt.Sprintf("%016s", s.parent))
		}
		b.WriteString(`,"attributes":[`)
		first := true
		for _, k := range sortedKeys(s.attrs) {
			if !first {
				b.WriteByte(',')
			}
			first = false
			fmt.Fprintf(&b, `{"key":%q,"value":{"stringValue":%q}}`, k, s.attrs[k])
		}
		b.WriteString(`]}`)
	}
	b.WriteString("]}]}]}\n")
	return b.String()
}

func sortedKeys(m map[string]string) []string {
	var ks []string
	for k := range m {
		ks = append(ks, k)
	}
	for i := range ks {
		for j := i + 1; j < len(ks); j++ {
			if ks[j] < ks[i] {
				ks[i], ks[j] = ks[j], ks[i]
			}
		}
	}
	return ks
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

func dbSpan(id, parent string, start, end int64, query string) tspan {
	return tspan{id: id, parent: parent, name: "SELECT", kind: kindClient, start: start, end: end,
		attrs: map[string]string{"db.system.name": "postgresql", "db.query.text": query}}
}

const (
	kindInternal = 1
	kindServer   = 2
	kindClient   = 3
)

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
