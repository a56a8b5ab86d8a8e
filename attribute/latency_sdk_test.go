package attribute

import (
	"context"
	"os"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/culprithq/culprit/callgraph"
	"github.com/culprithq/culprit/traces"
	"github.com/culprithq/culprit/traces/statement"
	otelattr "go.opentelemetry.io/otel/attribute"
	sdkresource "go.opentelemetry.io/otel/sdk/resource"
	sdktrace "go.opentelemetry.io/otel/sdk/trace"
	"go.opentelemetry.io/otel/sdk/trace/tracetest"
	"go.opentelemetry.io/otel/trace"
	commonpb "go.opentelemetry.io/proto/otlp/common/v1"
	resourcepb "go.opentelemetry.io/proto/otlp/resource/v1"
	tracepb "go.opentelemetry.io/proto/otlp/trace/v1"
	"google.golang.org/protobuf/encoding/protojson"
)

// sdkExport encodes spans recorded by the official OpenTelemetry Go SDK
// (one resource, one scope) as one OTLP/JSON line, through the official
// OTLP protobuf types and protojson (TracesData has the JSON shape of an
// export request).
func sdkExport(t *testing.T, spans []sdktrace.ReadOnlySpan) string {
	t.Helper()
	kvs := func(as []otelattr.KeyValue) []*commonpb.KeyValue {
		var out []*commonpb.KeyValue
		for _, a := range as {
			out = append(out, &commonpb.KeyValue{Key: string(a.Key), Value: &commonpb.AnyValue{Value: &commonpb.AnyValue_StringValue{StringValue: a.Value.String()}}})
		}
		return out
	}
	ss := &tracepb.ScopeSpans{Scope: &commonpb.InstrumentationScope{Name: spans[0].InstrumentationScope().Name}}
	for _, s := range spans {
		sc := s.SpanContext()
		tid, sid := sc.TraceID(), sc.SpanID()
		ps := &tracepb.Span{TraceId: tid[:], SpanId: sid[:], Name: s.Name(), Kind: tracepb.Span_SpanKind(s.SpanKind()),
			StartTimeUnixNano: uint64(s.StartTime().UnixNano()), EndTimeUnixNano: uint64(s.EndTime().UnixNano()),
			Attributes: kvs(s.Attributes())}
		if p := s.Parent(); p.IsValid() {
			pid := p.SpanID()
			ps.ParentSpanId = pid[:]
		}
		ss.Spans = append(ss.Spans, ps)
	}
	req := &tracepb.TracesData{ResourceSpans: []*tracepb.ResourceSpans{{
		Resource:   &resourcepb.Resource{Attributes: kvs(spans[0].Resource().Attributes())},
		ScopeSpans: []*tracepb.ScopeSpans{ss},
	}}}
	b, err := protojson.Marshal(req)
	if err != nil {
		t.Fatal(err)
	}
	return string(b) + "\n"
}

// TestLatencyParallelSDK records, with the official OpenTelemetry Go SDK,
// a request whose application span runs three queries in goroutines (5,
// 15 and 30 ms), then one more query. The critical path's database time
// for the parallel section is the longest branch (the union of the three
// overlapping queries, which differs from the longest query only by the
// goroutines' start skew), not their sum; the pieces add up exactly to
// the request's latency.
func TestLatencyParallelSDK(t *testing.T) {
	if testing.Short() {
		t.Skip("sleeps 60 ms")
	}
	sr := tracetest.NewSpanRecorder()
	tp := sdktrace.NewTracerProvider(sdktrace.WithSpanProcessor(sr),
		sdktrace.WithResource(sdkresource.NewSchemaless(otelattr.String("service.name", "greenhouse"))))
	tr := tp.Tracer("example.com/greenhouse")
	ctx, server := tr.Start(context.Background(), "GET /plants/{id}", trace.WithSpanKind(trace.SpanKindServer),
		trace.WithAttributes(otelattr.String("http.route", "/plants/{id}"), otelattr.String("http.request.method", "GET")))
	ctx, app := tr.Start(ctx, "Get", trace.WithAttributes(
		otelattr.String("code.namespace", "example.com/greenhouse/catalog.(*Service)"), otelattr.String("code.function", "Get")))
	query := func(ctx context.Context, table string, d time.Duration) {
		_, q := tr.Start(ctx, "SELECT "+table, trace.WithSpanKind(trace.SpanKindClient), trace.WithAttributes(
			otelattr.String("db.system.name", "postgresql"), otelattr.String("db.query.text", "SELECT * FROM "+table+" WHERE id = 7")))
		time.Sleep(d)
		q.End()
	}
	var wg sync.WaitGroup
	for i, d := range []time.Duration{5, 15, 30} {
		wg.Add(1)
		go func() {
			defer wg.Done()
			query(ctx, []string{"photos", "stock", "varieties"}[i], d*time.Millisecond)
		}()
	}
	wg.Wait()
	query(ctx, "prices", 2*time.Millisecond)
	app.End()
	server.End()

	spans := sr.Ended()
	tree, cls := loadSpans(t, sdkExport(t, spans), true)
	res, err := Latency(tree, cls, LatencyOptions{})
	if err != nil {
		t.Fatal(err)
	}
	var lo, hi, longest, sum, prices int64
	for _, s := range spans {
		if !strings.HasPrefix(s.Name(), "SELECT ") {
			continue
		}
		st, en := s.StartTime().UnixNano(), s.EndTime().UnixNano()
		if s.Name() == "SELECT prices" {
			prices = en - st
			continue
		}
		if lo == 0 || st < lo {
			lo = st
		}
		hi = max(hi, en)
		longest = max(longest, en-st)
		sum += en - st
	}
	e := res.Entries[0]
	var db, total int64
	for _, c := range e.Causes {
		total += c.Path
		if c.Kind == KindDatabase {
			db = c.Path
			if c.Summed != sum+prices {
				t.Errorf("summed database time %d, want the queries' sum %d", c.Summed, sum+prices)
			}
		}
	}
	if want := (hi - lo) + prices; db != want {
		t.Errorf("database time on the critical path %d, want the parallel section's span %d plus the last query %d", db, hi-lo, prices)
	}
	if skew := (hi - lo) - longest; skew < 0 || skew > int64(time.Millisecond) {
		t.Errorf("parallel section %d vs longest branch %d: skew %d", hi-lo, longest, skew)
	}
	if db >= sum {
		t.Errorf("critical path %d should be less than the summed query time %d", db, sum+prices)
	}
	if total != e.Latency {
		t.Errorf("pieces add up to %d, latency %d", total, e.Latency)
	}
}

// TestLatencyNodeJSParallel reads the traces the official OpenTelemetry
// JS SDK recorded of the seed-bank service (testdata/nodejs; express and
// pg instrumentations on PostgreSQL). Its overview route runs three
// queries, each after a pool checkout, in Promise.all: for every request
// the time on the critical path of database calls and connection waits
// equals the time covered by the union of those spans (the longest
// branch at each moment), not their sum.
func TestLatencyNodeJSParallel(t *testing.T) {
	fh, err := os.Open("../testdata/nodejs/recorded/seedbank.traces.jsonl.gz")
	if err != nil {
		t.Fatal(err)
	}
	defer fh.Close()
	l := traces.NewLoader(traces.Options{Timing: true, Statement: statement.AppendText})
	if err := l.Add("seedbank.traces.jsonl.gz", fh); err != nil {
		t.Fatal(err)
	}
	src, err := l.Source()
	if err != nil {
		t.Fatal(err)
	}
	cls := NewClassifier(src, DefaultRules())
	tree := callgraph.NewTree(src, callgraph.TreeOptions{Keep: cls.Keep})
	res, err := Latency(tree, cls, LatencyOptions{Slowest: 1000})
	if err != nil {
		t.Fatal(err)
	}
	// Union of the calls' intervals per request, from the source itself.
	unions := map[string]int64{}
	sums := map[string]int64{}
	var iv [][2]int64
	n := src.Paths.Len()
	for lo := 0; lo < n; {
		hi := lo + 1
		for hi < n && src.Paths.At(hi).Request == src.Paths.At(lo).Request {
			hi++
		}
		iv = iv[:0]
		var sum int64
		for pi := lo; pi < hi; pi++ {
			if p := src.Paths.At(pi); p.Call != 0 && src.Calls[p.Call].System == "postgresql" {
				s := src.Timing.Start[pi]
				iv = append(iv, [2]int64{s, s + p.Values[0]})
				sum += p.Values[0]
			}
		}
		id := src.Requests[src.Paths.At(lo).Request]
		unions[id], sums[id] = union(iv), sum
		lo = hi
	}
	checked := 0
	for _, e := range res.Entries {
		if e.Entry != "/collections/:id/overview" {
			continue
		}
		for _, rp := range e.Slowest {
			var db int64
			var walk func(s *PathSpan)
			walk = func(s *PathSpan) {
				if s.Kind == KindDatabase || s.Kind == KindConnection {
					db += s.OnPath
				}
				for _, c := range s.Children {
					walk(c)
				}
			}
			walk(rp.Root)
			if db != unions[rp.Request] {
				t.Errorf("request %s: database time on the critical path %d, union of its calls %d (sum %d)", rp.Request, db, unions[rp.Request], sums[rp.Request])
			}
			if sums[rp.Request] <= unions[rp.Request] {
				t.Errorf("request %s: calls do not overlap (sum %d, union %d)", rp.Request, sums[rp.Request], unions[rp.Request])
			}
			checked++
		}
	}
	if checked != 20 {
		t.Errorf("checked %d overview requests, the app made 20", checked)
	}
}
