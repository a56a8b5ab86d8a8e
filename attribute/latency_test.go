package attribute

import (
	"errors"
	"fmt"
	"strings"
	"testing"

	"github.com/culprithq/culprit/attribute/internal/testinput"

	"github.com/culprithq/culprit/callgraph"
	"github.com/culprithq/culprit/traces"
	"github.com/culprithq/culprit/traces/statement"
)

// tspan is a span of a hand-written OTLP/JSON test trace (testinput.Span).
type tspan = testinput.Span

// otlpLine renders the spans of one trace (traceID) of service svc as one
// OTLP/JSON ExportTraceServiceRequest line, as the OTLP/JSON encoding
// specifies it (hex IDs, nanosecond times as decimal strings).
func otlpLine(svc, traceID string, spans []tspan) string {
	ns := make([]tspan, len(spans))
	for i, sp := range spans {
		sp.Start, sp.End = sp.Start*1_000_000, sp.End*1_000_000
		ns[i] = sp
	}
	return testinput.Line(svc, traceID, ns)
}

func loadSpans(t testing.TB, jsonl string, timing bool) (*callgraph.Tree, *Classifier) {
	t.Helper()
	opts := traces.Options{Timing: timing, Statement: statement.AppendText}
	return loadInput(t, "test.jsonl", strings.NewReader(jsonl), opts, DefaultRules())
}

// plantsRequest is a request of GET /plants/{id}: the server span
// [0,100] ms; the application span catalog.(*Service).Get [5,95], which
// runs three queries in parallel, [10,60], [10,80], [10,40], then calls
// the carrier's API [82,92].
func plantsRequest(trace string, scale int64) string {
	s := func(x int64) int64 { return x * scale }
	return otlpLine("greenhouse", trace, []tspan{
		{ID: "1", Name: "GET /plants/{id}", Kind: testinput.KindServer, Start: 0, End: s(100),
			Attrs: map[string]string{"http.route": "/plants/{id}", "http.request.method": "GET"}},
		{ID: "2", Parent: "1", Name: "Get", Kind: testinput.KindInternal, Start: s(5), End: s(95),
			Attrs: map[string]string{"code.namespace": "example.com/greenhouse/catalog.(*Service)", "code.function": "Get"}},
		testinput.DBSpan("3", "2", s(10), s(60), "SELECT * FROM varieties WHERE id = 1"),
		testinput.DBSpan("4", "2", s(10), s(80), "SELECT * FROM stock WHERE plant = 1"),
		testinput.DBSpan("5", "2", s(10), s(40), "SELECT * FROM photos WHERE plant = 1"),
		{ID: "6", Parent: "2", Name: "POST", Kind: testinput.KindClient, Start: s(82), End: s(92),
			Attrs: map[string]string{"http.request.method": "POST", "url.full": "https://rates.carrier.test/quote", "server.address": "rates.carrier.test"}},
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
