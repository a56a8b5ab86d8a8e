package attribute

import (
	"errors"
	"fmt"
	"strings"
	"testing"

	"github.com/culprithq/culprit/callgraph"
	"github.com/culprithq/culprit/traces"
	"github.com/culprithq/culprit/traces/statement"
)

// tspan is a span of a hand-written OTLP/JSON test trace; times in ms.
type tspan struct {
	id, parent string // span IDs (16 hex digits are padded from these)
	name       string
	kind       int // OTLP SpanKind
	start, end int64
	attrs      map[string]string
}

// otlpLine renders the spans of one trace (traceID) of service svc as one
// OTLP/JSON ExportTraceServiceRequest line, as the OTLP/JSON encoding
// specifies it (hex IDs, nanosecond times as decimal strings).
func otlpLine(svc, traceID string, spans []tspan) string {
	ns := make([]tspan, len(spans))
	for i, sp := range spans {
		sp.start, sp.end = sp.start*1_000_000, sp.end*1_000_000
		ns[i] = sp
	}
	return otlpLineNanos(svc, traceID, ns)
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

func loadSpans(t testing.TB, jsonl string, timing bool) (*callgraph.Tree, *Classifier) {
	t.Helper()
	l := traces.NewLoader(traces.Options{Timing: timing, Statement: statement.AppendText})
	if err := l.Add("test.jsonl", strings.NewReader(jsonl)); err != nil {
		t.Fatal(err)
	}
	src, err := l.Source()
	if err != nil {
		t.Fatal(err)
	}
	cls := NewClassifier(src, DefaultRules())
	return callgraph.NewTree(src, callgraph.TreeOptions{Keep: cls.Keep}), cls
}

const (
	kindInternal = 1
	kindServer   = 2
	kindClient   = 3
)

func dbSpan(id, parent string, start, end int64, query string) tspan {
	return tspan{id: id, parent: parent, name: "SELECT", kind: kindClient, start: start, end: end,
		attrs: map[string]string{"db.system.name": "postgresql", "db.query.text": query}}
}

// plantsRequest is a request of GET /plants/{id}: the server span
// [0,100] ms; the application span catalog.(*Service).Get [5,95], which
// runs three queries in parallel, [10,60], [10,80], [10,40], then calls
// the carrier's API [82,92].
func plantsRequest(trace string, scale int64) string {
	s := func(x int64) int64 { return x * scale }
	return otlpLine("greenhouse", trace, []tspan{
		{id: "1", name: "GET /plants/{id}", kind: kindServer, start: 0, end: s(100),
			attrs: map[string]string{"http.route": "/plants/{id}", "http.request.method": "GET"}},
		{id: "2", parent: "1", name: "Get", kind: kindInternal, start: s(5), end: s(95),
			attrs: map[string]string{"code.namespace": "example.com/greenhouse/catalog.(*Service)", "code.function": "Get"}},
		dbSpan("3", "2", s(10), s(60), "SELECT * FROM varieties WHERE id = 1"),
		dbSpan("4", "2", s(10), s(80), "SELECT * FROM stock WHERE plant = 1"),
		dbSpan("5", "2", s(10), s(40), "SELECT * FROM photos WHERE plant = 1"),
		{id: "6", parent: "2", name: "POST", kind: kindClient, start: s(82), end: s(92),
			attrs: map[string]string{"http.request.method": "POST", "url.full": "https://rates.carrier.test/quote", "server.address": "rates.carrier.test"}},
	})
}

// TestLatencyWorkedExample charges the critical path of plantsRequest by
// hand (ms): from 100 back, the server span's own 100-95 = 5; in Get,
// its own 95-92 = 3, the carrier call 10, its own 82-80 = 2, the stock
// query [10,80] 70 (the other two queries are hidden behind it), its own
// 10-5 = 5; the server's own 5. Unaccounted 10, Get (application) 10,
// database 70, network 10: 100. Summed: database 50+70+30 = 150, network
// 10, Get's own time 90 - (70 + 10) = 10, the server's 100 - 90 = 10.
func TestLatencyWorkedExample(t *testing.T) {
	tree, cls := loadSpans(t, plantsRequest("a1", 1), true)
	res, err := Latency(tree, cls, LatencyOptions{Slowest: 1})
	if err != nil {
		t.Fatal(err)
	}
	if len(res.Entries) != 1 || res.Requests != 1 {
		t.Fatalf("entries %d, requests %d; want 1, 1", len(res.Entries), res.Requests)
	}
	e := res.Entries[0]
	const ms = 1_000_000
	if e.P50 != 100*ms || e.Latency != 100*ms {
		t.Errorf("latency p50 %v sum %d, want 100 ms", e.P50, e.Latency)
	}
	type want struct {
		kind         Kind
		path, summed int64
	}
	wants := map[string]want{
		"example.com/greenhouse/catalog.(*Service).Get/database":    {KindDatabase, 70 * ms, 150 * ms},
		"example.com/greenhouse/catalog.(*Service).Get/network":     {KindNetwork, 10 * ms, 10 * ms},
		"example.com/greenhouse/catalog.(*Service).Get/application": {KindApplication, 10 * ms, 10 * ms},
		e.Entry + "/unaccounted":                                    {KindUnaccounted, 10 * ms, 10 * ms},
	}
	var sum int64
	for _, c := range e.Causes {
		key := c.Function + "/" + string(c.Kind)
		w, ok := wants[key]
		if !ok {
			t.Errorf("unexpected cause %s (path %d)", key, c.Path)
			continue
		}
		delete(wants, key)
		if c.Path != w.path || c.Summed != w.summed {
			t.Errorf("%s: path %d summed %d, want %d and %d", key, c.Path, c.Summed, w.path, w.summed)
		}
		sum += c.Path
	}
	for k := range wants {
		t.Errorf("missing cause %s", k)
	}
	if sum != e.Latency {
		t.Errorf("critical-path pieces add up to %d, latency %d", sum, e.Latency)
	}
	if len(e.Slowest) != 1 || e.Slowest[0].Root.OnPath != 10*ms {
		t.Fatalf("slowest request path: %+v", e.Slowest)
	}
	get := e.Slowest[0].Root.Children
	if len(get) != 1 || get[0].OnPath != 10*ms || len(get[0].Children) != 2 {
		t.Fatalf("Get on the path: %+v", get)
	}
	if q := get[0].Children[0]; q.OnPath != 70*ms || q.Kind != KindDatabase || q.Start != 10*ms {
		t.Errorf("first call on the path: %+v, want the stock query, 70 ms from 10 ms", q)
	}
}

// TestLatencyTail: nine fast requests and one ten times slower; with the
// default tail (0.95) only the slow one is in the tail, and its share
// mirrors its own critical path.
func TestLatencyTail(t *testing.T) {
	var in strings.Builder
	for i := range 9 {
		in.WriteString(plantsRequest(fmt.Sprintf("f%d", i), 1))
	}
	in.WriteString(plantsRequest("5107", 10))
	tree, cls := loadSpans(t, in.String(), true)
	res, err := Latency(tree, cls, LatencyOptions{})
	if err != nil {
		t.Fatal(err)
	}
	e := res.Entries[0]
	const ms = 1_000_000
	if e.Requests != 10 || e.TailRequests != 1 || e.TailLatency != 1000*ms {
		t.Fatalf("requests %d tail %d (%d ns), want 10, 1, 1 s", e.Requests, e.TailRequests, e.TailLatency)
	}
	if e.MedianRequests != 9 {
		t.Errorf("median requests %d, want 9 (all fast ones tie at the median)", e.MedianRequests)
	}
	for _, c := range e.Causes {
		all, tail, _ := c.Share(e)
		if c.Kind == KindDatabase && (tail != 0.7 || all != 0.7) {
			t.Errorf("database share %v, tail share %v; want 0.7 both", all, tail)
		}
	}
}

// TestLatencyProfileRefused: a profile cannot answer.
func TestLatencyProfileRefused(t *testing.T) {
	tree, cls := loadTree(t, buildProfile(t, methodsExample()), DefaultRules())
	if _, err := Latency(tree, cls, LatencyOptions{}); !errors.Is(err, ErrNoTiming) {
		t.Fatalf("err = %v, want ErrNoTiming", err)
	}
}

// latencyBenchInput is 2,000 requests of plantsRequest (12,000 spans).
func latencyBenchInput() string {
	var in strings.Builder
	for i := range 2000 {
		in.WriteString(plantsRequest(fmt.Sprintf("b%x", i), int64(1+i%7)))
	}
	return in.String()
}

// BenchmarkLatency measures the latency analysis alone (tree and
// classification built once); BenchmarkLatencyRank is the ranking on the
// same source, its yardstick (the target: latency within 1.3× of rank).
func BenchmarkLatency(b *testing.B) {
	tree, cls := loadSpans(b, latencyBenchInput(), true)
	b.ReportAllocs()
	for b.Loop() {
		if res, err := Latency(tree, cls, LatencyOptions{}); err != nil || res.Requests != 2000 {
			b.Fatal(err)
		}
	}
}

func BenchmarkLatencyRank(b *testing.B) {
	tree, cls := loadSpans(b, latencyBenchInput(), true)
	b.ReportAllocs()
	for b.Loop() {
		if res := Attribute(tree, cls, Options{DropRequestVectors: true}); len(res.Causes) == 0 {
			b.Fatal("no root causes")
		}
	}
}
