package traces

import (
	"bytes"
	"context"
	"encoding/base64"
	"encoding/hex"
	stdjson "encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"math/rand/v2"
	"net"
	"reflect"
	"runtime"
	"slices"
	"strconv"
	"strings"
	"testing"
	"time"

	json "github.com/goccy/go-json"
	"go.opentelemetry.io/otel/attribute"
	sdkresource "go.opentelemetry.io/otel/sdk/resource"
	sdktrace "go.opentelemetry.io/otel/sdk/trace"
	"go.opentelemetry.io/otel/sdk/trace/tracetest"
	"go.opentelemetry.io/otel/trace"
	commonpb "go.opentelemetry.io/proto/otlp/common/v1"
	resourcepb "go.opentelemetry.io/proto/otlp/resource/v1"
	tracepb "go.opentelemetry.io/proto/otlp/trace/v1"
	"google.golang.org/protobuf/encoding/protojson"
)

// ---------------------------------------------------------------------
// Helpers: hand-written OTLP/JSON.

// attr is one attribute of a hand-written span; val is the JSON AnyValue.
type attr struct{ key, val string }

func str(key, v string) attr {
	b, _ := stdjson.Marshal(v)
	return attr{key, `{"stringValue":` + string(b) + `}`}
}

func num(key string, v int64) attr {
	return attr{key, `{"intValue":"` + strconv.FormatInt(v, 10) + `"}`}
}

// tspan is a hand-written span; IDs are hex.
type tspan struct {
	trace, id, parent string
	name              string
	kind              int
	start, end        int64
	attrs             []attr
}

// tres is the spans of one service.
type tres struct {
	service string
	spans   []tspan
}

func (s tspan) json() string {
	var b strings.Builder
	name, _ := stdjson.Marshal(s.name)
	fmt.Fprintf(&b, `{"traceId":%q,"spanId":%q`, s.trace, s.id)
	if s.parent != "" {
		fmt.Fprintf(&b, `,"parentSpanId":%q`, s.parent)
	}
	fmt.Fprintf(&b, `,"name":%s,"kind":%d,"startTimeUnixNano":"%d","endTimeUnixNano":"%d","attributes":[`, name, s.kind, s.start, s.end)
	for i, a := range s.attrs {
		if i > 0 {
			b.WriteByte(',')
		}
		fmt.Fprintf(&b, `{"key":%q,"value":%s}`, a.key, a.val)
	}
	b.WriteString(`],"status":{}}`)
	return b.String()
}

// line renders one export request holding the given resources' spans.
func line(res ...tres) string {
	var b strings.Builder
	b.WriteString(`{"resourceSpans":[`)
	for i, r := range res {
		if i > 0 {
			b.WriteByte(',')
		}
		fmt.Fprintf(&b, `{"resource":{"attributes":[{"key":"service.name","value":{"stringValue":%q}}]},"scopeSpans":[{"scope":{"name":"test"},"spans":[`, r.service)
		for j, s := range r.spans {
			if j > 0 {
				b.WriteByte(',')
			}
			b.WriteString(s.json())
		}
		b.WriteString(`]}]}`)
	}
	b.WriteString(`]}`)
	return b.String()
}

// lines joins JSON lines into one input.
func lines(ls ...string) string { return strings.Join(ls, "\n") + "\n" }

// input is one named input.
type input struct{ name, data string }

// collect reads inputs with opts and assembles them.
func collect(opts Options, inputs ...input) (*Source, error) {
	c := NewSpanCollector(opts)
	for _, in := range inputs {
		if err := c.Add(in.name, strings.NewReader(in.data)); err != nil {
			return nil, err
		}
	}
	return c.Source()
}

func mustCollect(t testing.TB, opts Options, inputs ...input) *Source {
	t.Helper()
	src, err := collect(opts, inputs...)
	if err != nil {
		t.Fatalf("collect: %v", err)
	}
	return src
}

// digest renders a source's paths one per line, for comparisons and
// readable failures.
func digest(src *Source) []string {
	var out []string
	for i := range src.Paths.Len() {
		p := src.Paths.At(i)
		var fs []string
		for _, f := range p.Frames {
			fr := src.Frames[f]
			fs = append(fs, fmt.Sprintf("%s[%s %s %s %s:%d]", fr.Function, fr.Service, fr.SpanKind, fr.System, fr.File, fr.Line))
		}
		out = append(out, fmt.Sprintf("%s %v %v call=%+v labels=%s", src.Requests[p.Request], strings.Join(fs, " > "), p.Values, src.Calls[p.Call], p.Labels))
	}
	return out
}

// samePathIDs reports whether a and b hold the same paths, ID for ID.
func samePathIDs(a, b *Source) bool {
	if a.Paths.Len() != b.Paths.Len() {
		return false
	}
	for i := range a.Paths.Len() {
		x, y := a.Paths.At(i), b.Paths.At(i)
		if !slices.Equal(x.Frames, y.Frames) || !slices.Equal(x.Values, y.Values) || x.Labels.String() != y.Labels.String() ||
			x.Request != y.Request || x.Call != y.Call {
			return false
		}
	}
	return true
}

// sameSource fails unless a and b hold the same frames, calls, requests,
// paths, duration and warnings (inputs are not compared).
func sameSource(t *testing.T, a, b *Source) {
	t.Helper()
	if !reflect.DeepEqual(digest(a), digest(b)) {
		da, db := digest(a), digest(b)
		for i := range max(len(da), len(db)) {
			var x, y string
			if i < len(da) {
				x = da[i]
			}
			if i < len(db) {
				y = db[i]
			}
			if x != y {
				t.Fatalf("path %d differs:\n a: %s\n b: %s", i, x, y)
			}
		}
	}
	if !reflect.DeepEqual(a.Frames, b.Frames) || !reflect.DeepEqual(a.Calls, b.Calls) ||
		!reflect.DeepEqual(a.Requests, b.Requests) || !samePathIDs(a, b) {
		t.Fatal("sources differ in frames, calls, requests or path IDs")
	}
	if a.DurationNanos != b.DurationNanos {
		t.Fatalf("DurationNanos %d != %d", a.DurationNanos, b.DurationNanos)
	}
	if !reflect.DeepEqual(a.Warnings.Summary(), b.Warnings.Summary()) {
		t.Fatalf("warnings differ:\n%v\n%v", a.Warnings.Strings(), b.Warnings.Strings())
	}
}

func warningCount(src *Source, kind string) int {
	for _, s := range src.Warnings.Summary() {
		if s.Kind == kind {
			return s.Count
		}
	}
	return 0
}

// pathFunctions returns the frame functions of every path.
func pathFunctions(src *Source) [][]string {
	var out [][]string
	for i := range src.Paths.Len() {
		p := src.Paths.At(i)
		var fs []string
		for _, f := range p.Frames {
			fs = append(fs, src.Frames[f].Function)
		}
		out = append(out, fs)
	}
	return out
}

// ---------------------------------------------------------------------
// Helpers: a generated workload, for the parallel test and the benchmark.

// genInput returns JSON lines holding nTraces generated traces whose
// spans are shuffled across lines (so every trace is spread over several
// lines), and the number of spans.
func genInput(seed uint64, nTraces int) ([]byte, int) {
	rng := rand.New(rand.NewPCG(seed, seed^0x9e3779b97f4a7c15))
	type gspan struct {
		service string
		json    string
	}
	var spans []gspan
	id := func(n int) string {
		b := make([]byte, n)
		for i := range b {
			b[i] = byte(rng.UintN(256))
		}
		b[0] |= 1 // never all zero
		return hex.EncodeToString(b)
	}
	handlers := []string{
		"github.com/culprithq/greenhouse/api.(*PlantHandler).Get",
		"github.com/culprithq/greenhouse/api.(*PlantHandler).List",
		"github.com/culprithq/greenhouse/api.(*ReadingHandler).Post",
		"github.com/culprithq/greenhouse/api.(*ZoneHandler).Get",
	}
	routes := []string{"/plants/{id}", "/plants", "/readings", "/zones/{id}"}
	queries := []string{
		"SELECT id, name FROM plants WHERE id = $1",
		"SELECT value, taken_at FROM readings WHERE plant_id = $1 ORDER BY taken_at DESC LIMIT 50",
		"INSERT INTO readings (plant_id, value) VALUES ($1, $2)",
		"SELECT zone FROM zones WHERE id = $1",
	}
	for t := range nTraces {
		tr := id(16)
		t0 := int64(1_760_000_000_000_000_000) + int64(t)*7_000_000
		h := rng.IntN(len(handlers))
		root := tspan{trace: tr, id: id(8), name: "GET " + routes[h], kind: 2, start: t0, end: t0 + 40_000_000,
			attrs: []attr{str("http.request.method", "GET"), str("http.route", routes[h]), str("url.path", "/x"), num("http.response.status_code", 200)}}
		handler := tspan{trace: tr, id: id(8), parent: root.id, name: "handler", kind: 1, start: t0 + 1_000_000, end: t0 + 39_000_000,
			attrs: []attr{str("code.function.name", handlers[h]), str("code.file.path", "/src/greenhouse/api/handlers.go"), num("code.line.number", int64(40+h))}}
		spans = append(spans, gspan{"greenhouse-api", root.json()}, gspan{"greenhouse-api", handler.json()})
		nq := 1 + rng.IntN(8)
		for q := range nq {
			s := t0 + 2_000_000 + int64(q)*3_000_000
			qi := rng.IntN(len(queries))
			db := tspan{trace: tr, id: id(8), parent: handler.id, name: "postgresql query", kind: 3, start: s, end: s + 1_000_000 + rng.Int64N(1_500_000),
				attrs: []attr{str("db.system.name", "postgresql"), str("db.query.text", queries[qi]), str("server.address", "db.greenhouse.internal"), num("server.port", 5432),
					str("db.namespace", "greenhouse")}}
			spans = append(spans, gspan{"greenhouse-api", db.json()})
		}
		if rng.IntN(3) == 0 {
			s := t0 + 30_000_000
			cl := tspan{trace: tr, id: id(8), parent: handler.id, name: "GET", kind: 3, start: s, end: s + 6_000_000,
				attrs: []attr{str("http.request.method", "GET"), str("url.full", "http://inventory.greenhouse.internal:8080/stock/42")}}
			srv := tspan{trace: tr, id: id(8), parent: cl.id, name: "GET /stock/{id}", kind: 2, start: s + 500_000, end: s + 5_500_000,
				attrs: []attr{str("http.request.method", "GET"), str("http.route", "/stock/{id}")}}
			db := tspan{trace: tr, id: id(8), parent: srv.id, name: "SELECT stock", kind: 3, start: s + 1_000_000, end: s + 4_000_000,
				attrs: []attr{str("db.system.name", "mysql"), str("db.query.text", "SELECT qty FROM stock WHERE sku = ?"), str("server.address", "inventory-db")}}
			spans = append(spans, gspan{"greenhouse-api", cl.json()}, gspan{"inventory", srv.json()}, gspan{"inventory", db.json()})
		}
	}
	rng.Shuffle(len(spans), func(i, j int) { spans[i], spans[j] = spans[j], spans[i] })

	var out bytes.Buffer
	for i := 0; i < len(spans); {
		n := min(len(spans)-i, 1+rng.IntN(40))
		chunk := spans[i : i+n]
		i += n
		out.WriteString(`{"resourceSpans":[`)
		for k, svc := range []string{"greenhouse-api", "inventory"} {
			if k > 0 {
				out.WriteByte(',')
			}
			fmt.Fprintf(&out, `{"resource":{"attributes":[{"key":"service.name","value":{"stringValue":%q}},{"key":"host.name","value":{"stringValue":"node-%d"}}]},"scopeSpans":[{"scope":{"name":"greenhouse","version":"1.4.0"},"spans":[`, svc, k)
			first := true
			for _, s := range chunk {
				if s.service != svc {
					continue
				}
				if !first {
					out.WriteByte(',')
				}
				first = false
				out.WriteString(s.json)
			}
			out.WriteString(`]}],"schemaUrl":"https://opentelemetry.io/schemas/1.30.0"}`)
		}
		out.WriteString("]}\n")
	}
	return out.Bytes(), len(spans)
}

// ---------------------------------------------------------------------
// Helpers: spans recorded by the official OpenTelemetry Go SDK, converted
// to the official OTLP protobuf types.

// sdkToProto converts spans recorded by the OpenTelemetry Go SDK into an
// OTLP TracesData, grouped by resource and scope in order of appearance.
func sdkToProto(spans []sdktrace.ReadOnlySpan) *tracepb.TracesData {
	td := &tracepb.TracesData{}
	type key struct {
		res   attribute.Distinct
		scope string
	}
	resIndex := map[attribute.Distinct]*tracepb.ResourceSpans{}
	scopeIndex := map[key]*tracepb.ScopeSpans{}
	for _, s := range spans {
		rk := s.Resource().Equivalent()
		rs, ok := resIndex[rk]
		if !ok {
			rs = &tracepb.ResourceSpans{Resource: &resourcepb.Resource{Attributes: kvsToProto(s.Resource().Attributes())}, SchemaUrl: s.Resource().SchemaURL()}
			resIndex[rk] = rs
			td.ResourceSpans = append(td.ResourceSpans, rs)
		}
		sk := key{rk, s.InstrumentationScope().Name}
		ss, ok := scopeIndex[sk]
		if !ok {
			ss = &tracepb.ScopeSpans{Scope: &commonpb.InstrumentationScope{Name: s.InstrumentationScope().Name, Version: s.InstrumentationScope().Version}}
			scopeIndex[sk] = ss
			rs.ScopeSpans = append(rs.ScopeSpans, ss)
		}
		sc := s.SpanContext()
		tid, sid := sc.TraceID(), sc.SpanID()
		ps := &tracepb.Span{
			TraceId: tid[:], SpanId: sid[:], TraceState: sc.TraceState().String(),
			Flags: uint32(sc.TraceFlags()) | 0x100, Name: s.Name(), Kind: tracepb.Span_SpanKind(s.SpanKind()),
			StartTimeUnixNano: uint64(s.StartTime().UnixNano()), EndTimeUnixNano: uint64(s.EndTime().UnixNano()),
			Attributes: kvsToProto(s.Attributes()), DroppedAttributesCount: uint32(s.DroppedAttributes()),
			Status: &tracepb.Status{Message: s.Status().Description, Code: tracepb.Status_StatusCode(s.Status().Code)},
		}
		if p := s.Parent(); p.IsValid() {
			pid := p.SpanID()
			ps.ParentSpanId = pid[:]
			if p.IsRemote() {
				ps.Flags |= 0x200
			}
		}
		for _, e := range s.Events() {
			ps.Events = append(ps.Events, &tracepb.Span_Event{TimeUnixNano: uint64(e.Time.UnixNano()), Name: e.Name, Attributes: kvsToProto(e.Attributes)})
		}
		for _, l := range s.Links() {
			lt, ls := l.SpanContext.TraceID(), l.SpanContext.SpanID()
			ps.Links = append(ps.Links, &tracepb.Span_Link{TraceId: lt[:], SpanId: ls[:], Attributes: kvsToProto(l.Attributes)})
		}
		ss.Spans = append(ss.Spans, ps)
	}
	return td
}

func kvsToProto(kvs []attribute.KeyValue) []*commonpb.KeyValue {
	out := make([]*commonpb.KeyValue, 0, len(kvs))
	for _, kv := range kvs {
		out = append(out, &commonpb.KeyValue{Key: string(kv.Key), Value: valueToProto(kv.Value)})
	}
	return out
}

func valueToProto(v attribute.Value) *commonpb.AnyValue {
	switch v.Type() {
	case attribute.BOOL:
		return &commonpb.AnyValue{Value: &commonpb.AnyValue_BoolValue{BoolValue: v.AsBool()}}
	case attribute.INT64:
		return &commonpb.AnyValue{Value: &commonpb.AnyValue_IntValue{IntValue: v.AsInt64()}}
	case attribute.FLOAT64:
		return &commonpb.AnyValue{Value: &commonpb.AnyValue_DoubleValue{DoubleValue: v.AsFloat64()}}
	case attribute.STRING:
		return &commonpb.AnyValue{Value: &commonpb.AnyValue_StringValue{StringValue: v.AsString()}}
	case attribute.BYTESLICE:
		return &commonpb.AnyValue{Value: &commonpb.AnyValue_BytesValue{BytesValue: v.AsByteSlice()}}
	case attribute.BOOLSLICE, attribute.INT64SLICE, attribute.FLOAT64SLICE, attribute.STRINGSLICE, attribute.SLICE:
		var vals []*commonpb.AnyValue
		switch v.Type() {
		case attribute.BOOLSLICE:
			for _, x := range v.AsBoolSlice() {
				vals = append(vals, valueToProto(attribute.BoolValue(x)))
			}
		case attribute.INT64SLICE:
			for _, x := range v.AsInt64Slice() {
				vals = append(vals, valueToProto(attribute.Int64Value(x)))
			}
		case attribute.FLOAT64SLICE:
			for _, x := range v.AsFloat64Slice() {
				vals = append(vals, valueToProto(attribute.Float64Value(x)))
			}
		case attribute.STRINGSLICE:
			for _, x := range v.AsStringSlice() {
				vals = append(vals, valueToProto(attribute.StringValue(x)))
			}
		default:
			for _, x := range v.AsSlice() {
				vals = append(vals, valueToProto(x))
			}
		}
		return &commonpb.AnyValue{Value: &commonpb.AnyValue_ArrayValue{ArrayValue: &commonpb.ArrayValue{Values: vals}}}
	case attribute.MAP:
		return &commonpb.AnyValue{Value: &commonpb.AnyValue_KvlistValue{KvlistValue: &commonpb.KeyValueList{Values: kvsToProto(v.AsMap())}}}
	}
	return &commonpb.AnyValue{} // EMPTY
}

// otlpJSON encodes td as canonical OTLP/JSON on one line: protojson with
// enum numbers, then trace and span IDs rewritten from base64 to hex, as
// the OTLP specification requires (opentelemetry-proto docs/specification.md,
// "JSON Protobuf Encoding").
func otlpJSON(t testing.TB, td *tracepb.TracesData) string {
	t.Helper()
	b, err := protojson.MarshalOptions{UseEnumNumbers: true}.Marshal(td)
	if err != nil {
		t.Fatal(err)
	}
	dec := stdjson.NewDecoder(bytes.NewReader(b))
	dec.UseNumber()
	var tree any
	if err := dec.Decode(&tree); err != nil {
		t.Fatal(err)
	}
	rewriteIDs(t, tree, func(s string) ([]byte, error) { return base64.StdEncoding.DecodeString(s) }, hex.EncodeToString)
	out, err := stdjson.Marshal(tree)
	if err != nil {
		t.Fatal(err)
	}
	return string(out)
}

// rewriteIDs rewrites every traceId, spanId and parentSpanId string in
// a decoded JSON tree: decode, then encode.
func rewriteIDs(t testing.TB, tree any, decode func(string) ([]byte, error), encode func([]byte) string) {
	t.Helper()
	switch v := tree.(type) {
	case map[string]any:
		for k, x := range v {
			if s, ok := x.(string); ok && (k == "traceId" || k == "spanId" || k == "parentSpanId") {
				raw, err := decode(s)
				if err != nil {
					t.Fatalf("%s %q: %v", k, s, err)
				}
				v[k] = encode(raw)
				continue
			}
			rewriteIDs(t, x, decode, encode)
		}
	case []any:
		for _, x := range v {
			rewriteIDs(t, x, decode, encode)
		}
	}
}

// sdkWant is what the reader must make of one span of the SDK workload,
// given by its span name: values taken from the attributes the workload
// sets, per the OpenTelemetry semantic conventions v1.44.0.
type sdkWant struct {
	function string
	file     string
	line     int64
	protocol Protocol
	system   string
	call     Call
	route    string // the span's own http.route
}

// recordWorkload runs a small request workload against the official
// OpenTelemetry Go SDK with fixed timestamps and returns the ended spans.
func recordWorkload(t *testing.T, requests int) ([]sdktrace.ReadOnlySpan, map[string]sdkWant) {
	t.Helper()
	sr := tracetest.NewSpanRecorder()
	provider := func(service string) *sdktrace.TracerProvider {
		return sdktrace.NewTracerProvider(sdktrace.WithSpanProcessor(sr),
			sdktrace.WithResource(sdkresource.NewSchemaless(attribute.String("service.name", service))))
	}
	api, inv, wrk := provider("greenhouse-api"), provider("inventory"), provider("greenhouse-worker")
	apiT, invT, wrkT := api.Tracer("greenhouse/api"), inv.Tracer("inventory/http"), wrk.Tracer("greenhouse/worker")

	now := time.Date(2026, 3, 14, 9, 26, 53, 0, time.UTC)
	tick := func(d time.Duration) trace.SpanStartEventOption { now = now.Add(d); return trace.WithTimestamp(now) }
	end := func(s trace.Span, d time.Duration) { now = now.Add(d); s.End(trace.WithTimestamp(now)) }
	ctx := context.Background()

	for r := range requests {
		rctx, root := apiT.Start(ctx, "GET /plants/{id}", tick(time.Millisecond), trace.WithSpanKind(trace.SpanKindServer),
			trace.WithAttributes(attribute.String("http.request.method", "GET"), attribute.String("http.route", "/plants/{id}"),
				attribute.String("url.path", fmt.Sprintf("/plants/%d", r))))
		hctx, handler := apiT.Start(rctx, "PlantHandler.Get", tick(100*time.Microsecond), trace.WithAttributes(
			attribute.String("code.function.name", "github.com/culprithq/greenhouse/api.(*PlantHandler).Get"),
			attribute.String("code.file.path", "/src/greenhouse/api/plants.go"), attribute.Int("code.line.number", 88)))
		sctx, store := apiT.Start(hctx, "Store.LoadPlant", tick(50*time.Microsecond), trace.WithAttributes(
			attribute.String("code.function.name", "github.com/culprithq/greenhouse/store.(*Store).LoadPlant"),
			attribute.String("code.file.path", "/src/greenhouse/store/plants.go"), attribute.Int("code.line.number", 41)))
		for q := range 3 {
			_, db := apiT.Start(sctx, "SELECT greenhouse.readings", tick(20*time.Microsecond), trace.WithSpanKind(trace.SpanKindClient),
				trace.WithAttributes(attribute.String("db.system.name", "postgresql"),
					attribute.String("db.query.text", "SELECT value FROM readings WHERE plant_id = $1"),
					attribute.String("db.query.summary", "SELECT readings"), attribute.String("db.operation.name", "SELECT"),
					attribute.String("server.address", "db.greenhouse.internal"), attribute.Int("server.port", 5432)))
			end(db, time.Duration(300+100*q)*time.Microsecond)
		}
		_, ins := apiT.Start(sctx, "INSERT greenhouse.readings", tick(20*time.Microsecond), trace.WithSpanKind(trace.SpanKindClient),
			trace.WithAttributes(attribute.String("db.system.name", "postgresql"),
				attribute.String("db.query.text", "INSERT INTO readings (plant_id, value) VALUES ($1, $2)"),
				attribute.String("db.operation.name", "INSERT"), attribute.Int("db.operation.batch.size", 3),
				attribute.String("server.address", "db.greenhouse.internal"), attribute.Int("server.port", 5432)))
		end(ins, 700*time.Microsecond)
		end(store, 30*time.Microsecond)

		lctx, legacy := apiT.Start(hctx, "legacy lookup", tick(40*time.Microsecond), trace.WithAttributes(
			attribute.String("code.namespace", "greenhouse.legacy.Catalog"), attribute.String("code.function", "Lookup"),
			attribute.String("code.filepath", "legacy/catalog.go"), attribute.Int("code.lineno", 17)))
		_, cat := apiT.Start(lctx, "catalog query", tick(10*time.Microsecond), trace.WithSpanKind(trace.SpanKindClient),
			trace.WithAttributes(attribute.String("db.system", "mssql"), attribute.String("db.statement", "SELECT name FROM catalog WHERE id = 42"),
				attribute.String("db.operation", "SELECT"), attribute.String("net.peer.name", "catalog-db"), attribute.Int("net.peer.port", 1433)))
		end(cat, 900*time.Microsecond)
		end(legacy, 15*time.Microsecond)

		cctx, client := apiT.Start(hctx, "GET", tick(25*time.Microsecond), trace.WithSpanKind(trace.SpanKindClient),
			trace.WithAttributes(attribute.String("http.request.method", "GET"),
				attribute.String("url.full", fmt.Sprintf("http://inventory.greenhouse.internal:8080/stock/%d", r))))
		ictx, srv := invT.Start(trace.ContextWithRemoteSpanContext(ctx, trace.SpanContextFromContext(cctx)), "GET /stock/{id}",
			tick(200*time.Microsecond), trace.WithSpanKind(trace.SpanKindServer),
			trace.WithAttributes(attribute.String("http.request.method", "GET"), attribute.String("http.route", "/stock/{id}")))
		_, stock := invT.Start(ictx, "SELECT stock", tick(30*time.Microsecond), trace.WithSpanKind(trace.SpanKindClient),
			trace.WithAttributes(attribute.String("db.system.name", "mysql"), attribute.String("db.query.text", "SELECT qty FROM stock WHERE sku = ?"),
				attribute.String("server.address", "inventory-db")))
		end(stock, 1200*time.Microsecond)
		end(srv, 60*time.Microsecond)
		end(client, 210*time.Microsecond)

		_, rpc := apiT.Start(hctx, "greenhouse.Sensors/Read", tick(10*time.Microsecond), trace.WithSpanKind(trace.SpanKindClient),
			trace.WithAttributes(attribute.String("rpc.system", "grpc"), attribute.String("rpc.service", "greenhouse.Sensors"),
				attribute.String("rpc.method", "Read"), attribute.String("peer.service", "sensors")))
		end(rpc, 450*time.Microsecond)

		pctx, prod := apiT.Start(hctx, "plant-events send", tick(10*time.Microsecond), trace.WithSpanKind(trace.SpanKindProducer),
			trace.WithAttributes(attribute.String("messaging.system", "kafka"), attribute.String("messaging.operation.name", "send"),
				attribute.String("messaging.destination.name", "plant-events"), attribute.String("server.address", "kafka-1"), attribute.Int("server.port", 9092)))
		prodSC := trace.SpanContextFromContext(pctx)
		end(prod, 80*time.Microsecond)

		_, ann := apiT.Start(hctx, "annotated", tick(10*time.Microsecond), trace.WithAttributes(
			attribute.Bool("greenhouse.cached", true), attribute.Int64("greenhouse.count", -7),
			attribute.Float64("greenhouse.ratio", 0.25), attribute.Float64("greenhouse.nan", math.NaN()),
			attribute.Float64("greenhouse.inf", math.Inf(-1)), attribute.StringSlice("greenhouse.tags", []string{"a", "b"}),
			attribute.Int64Slice("greenhouse.ids", []int64{1, 2}), attribute.BoolSlice("greenhouse.flags", []bool{true, false}),
			attribute.Float64Slice("greenhouse.temps", []float64{21.5, math.Inf(1)}),
			attribute.ByteSlice("greenhouse.blob", []byte{0, 1, 2, 250}),
			attribute.Map("greenhouse.zone", attribute.String("name", "north"), attribute.Int("rows", 4)),
			attribute.Slice("greenhouse.mixed", attribute.StringValue("x"), attribute.Int64Value(3)),
			attribute.KeyValue{Key: "greenhouse.empty", Value: attribute.Value{}}))
		ann.AddEvent("cache hit", trace.WithTimestamp(now), trace.WithAttributes(attribute.String("key", "plant")))
		end(ann, 5*time.Microsecond)

		end(handler, 40*time.Microsecond)
		end(root, 20*time.Microsecond)

		// The worker consumes the event after the request is over.
		_, cons := wrkT.Start(trace.ContextWithRemoteSpanContext(ctx, prodSC), "plant-events process", tick(2*time.Millisecond),
			trace.WithSpanKind(trace.SpanKindConsumer), trace.WithLinks(trace.Link{SpanContext: prodSC}),
			trace.WithAttributes(attribute.String("messaging.system", "kafka"), attribute.String("messaging.operation.name", "process"),
				attribute.String("messaging.destination.name", "plant-events")))
		end(cons, 3*time.Millisecond)
	}
	for _, p := range []*sdktrace.TracerProvider{api, inv, wrk} {
		if err := p.Shutdown(ctx); err != nil {
			t.Fatal(err)
		}
	}

	pg := Call{System: "postgresql", Statement: "SELECT value FROM readings WHERE plant_id = $1", Summary: "SELECT readings",
		Operation: "SELECT", Peer: "db.greenhouse.internal:5432"}
	want := map[string]sdkWant{
		"GET /plants/{id}":           {function: "GET /plants/{id}", route: "/plants/{id}"},
		"PlantHandler.Get":           {function: "github.com/culprithq/greenhouse/api.(*PlantHandler).Get", file: "/src/greenhouse/api/plants.go", line: 88},
		"Store.LoadPlant":            {function: "github.com/culprithq/greenhouse/store.(*Store).LoadPlant", file: "/src/greenhouse/store/plants.go", line: 41},
		"SELECT greenhouse.readings": {function: "SELECT greenhouse.readings", protocol: ProtocolDatabase, system: "postgresql", call: pg},
		"INSERT greenhouse.readings": {function: "INSERT greenhouse.readings", protocol: ProtocolDatabase, system: "postgresql",
			call: Call{System: "postgresql", Statement: "INSERT INTO readings (plant_id, value) VALUES ($1, $2)", Operation: "INSERT",
				Peer: "db.greenhouse.internal:5432", Batch: true}},
		"legacy lookup": {function: "greenhouse.legacy.Catalog.Lookup", file: "legacy/catalog.go", line: 17},
		// db.system "mssql" is "microsoft.sql_server" in db.system.name (semantic conventions v1.30.0+).
		"catalog query": {function: "catalog query", protocol: ProtocolDatabase, system: "microsoft.sql_server",
			call: Call{System: "microsoft.sql_server", Statement: "SELECT name FROM catalog WHERE id = 42", Operation: "SELECT", Peer: "catalog-db:1433"}},
		"GET": {function: "GET", protocol: ProtocolHTTP, system: "http",
			call: Call{System: "http", Operation: "GET", Peer: "inventory.greenhouse.internal:8080"}},
		"GET /stock/{id}": {function: "GET /stock/{id}", route: "/stock/{id}"},
		"SELECT stock": {function: "SELECT stock", protocol: ProtocolDatabase, system: "mysql",
			call: Call{System: "mysql", Statement: "SELECT qty FROM stock WHERE sku = ?", Peer: "inventory-db"}},
		"greenhouse.Sensors/Read": {function: "greenhouse.Sensors/Read", protocol: ProtocolRPC, system: "grpc",
			call: Call{System: "grpc", Operation: "greenhouse.Sensors/Read", Peer: "sensors"}},
		"plant-events send": {function: "plant-events send", protocol: ProtocolMessaging, system: "kafka",
			call: Call{System: "kafka", Operation: "send", Peer: "kafka-1:9092"}},
		"annotated":            {function: "annotated"},
		"plant-events process": {function: "plant-events"},
	}
	return sr.Ended(), want
}

// ---------------------------------------------------------------------
// 1. Spans recorded by the official OpenTelemetry Go SDK.

// TestSDKSpans checks the reader against the official OpenTelemetry Go SDK
// (go.opentelemetry.io/otel/sdk/trace, recorded with tracetest.SpanRecorder)
// and the official OTLP protobuf types and JSON encoding
// (go.opentelemetry.io/proto/otlp, google.golang.org/protobuf/encoding/protojson):
// every recorded span must come back as one path with its parent chain,
// kind, attributes and duration.
func TestSDKSpans(t *testing.T) {
	recorded, want := recordWorkload(t, 2)
	data := otlpJSON(t, sdkToProto(recorded)) + "\n"
	src := mustCollect(t, Options{AllServices: true}, input{"sdk.jsonl", data})

	if got := src.Warnings.Strings(); len(got) > 0 {
		t.Fatalf("unexpected warnings: %v", got)
	}
	if src.Paths.Len() != len(recorded) {
		t.Fatalf("got %d paths, want one per recorded span (%d)", src.Paths.Len(), len(recorded))
	}
	byID := map[trace.SpanID]sdktrace.ReadOnlySpan{}
	for _, s := range recorded {
		byID[s.SpanContext().SpanID()] = s
	}
	service := func(s sdktrace.ReadOnlySpan) string {
		v, _ := s.Resource().Set().Value("service.name")
		return v.AsString()
	}
	// The paths come ordered by trace ID, start time and span ID.
	sorted := slices.Clone(recorded)
	slices.SortFunc(sorted, func(a, b sdktrace.ReadOnlySpan) int {
		at, bt := a.SpanContext().TraceID(), b.SpanContext().TraceID()
		if c := bytes.Compare(at[:], bt[:]); c != 0 {
			return c
		}
		if c := a.StartTime().Compare(b.StartTime()); c != 0 {
			return c
		}
		as, bs := a.SpanContext().SpanID(), b.SpanContext().SpanID()
		return bytes.Compare(as[:], bs[:])
	})
	var minStart, maxEnd time.Time
	for i, s := range sorted {
		t.Run(fmt.Sprintf("%02d_%s", i, s.Name()), func(t *testing.T) {
			p := src.Paths.At(i)
			w, ok := want[s.Name()]
			if !ok {
				t.Fatalf("no expectation for span %q", s.Name())
			}
			// The chain of ancestors within the span's service, from the SDK's parent links.
			var chain []sdktrace.ReadOnlySpan
			for cur := s; ; {
				chain = append([]sdktrace.ReadOnlySpan{cur}, chain...)
				par, ok := byID[cur.Parent().SpanID()]
				if !cur.Parent().IsValid() || !ok || service(par) != service(cur) {
					break
				}
				cur = par
			}
			if len(p.Frames) != len(chain) {
				one := &Source{Frames: src.Frames, Calls: src.Calls, Requests: src.Requests}
				one.Paths.Append(p)
				t.Fatalf("path has %d frames %v, want %d", len(p.Frames), digest(one), len(chain))
			}
			for k, anc := range chain {
				f := src.Frames[p.Frames[k]]
				aw := want[anc.Name()]
				if f.Function != aw.function || f.File != aw.file || f.Line != aw.line || f.Protocol != aw.protocol || f.System != aw.system {
					t.Errorf("frame %d = %+v, want function %q file %q line %d protocol %v system %q", k, f, aw.function, aw.file, aw.line, aw.protocol, aw.system)
				}
				if f.SpanKind != SpanKind(anc.SpanKind()) || f.Service != service(anc) || !f.Span {
					t.Errorf("frame %d = kind %v service %q span %v, want kind %v service %q", k, f.SpanKind, f.Service, f.Span, anc.SpanKind(), service(anc))
				}
			}
			if d := s.EndTime().Sub(s.StartTime()).Nanoseconds(); p.Values[0] != d || p.Values[1] != 1 {
				t.Errorf("values %v, want [%d 1]", p.Values, d)
			}
			tid := s.SpanContext().TraceID()
			if got := src.Requests[p.Request]; got != hex.EncodeToString(tid[:]) {
				t.Errorf("request %q, want trace ID %s", got, tid)
			}
			if got := src.Calls[p.Call]; got != w.call {
				t.Errorf("call %+v, want %+v", got, w.call)
			}
			route, _ := p.Labels.Get("http.route")
			if wr := want[chain[0].Name()].route; route != wr {
				t.Errorf("route label %q, want %q (of the path's entry span %q)", route, wr, chain[0].Name())
			}
		})
		if minStart.IsZero() || s.StartTime().Before(minStart) {
			minStart = s.StartTime()
		}
		if s.EndTime().After(maxEnd) {
			maxEnd = s.EndTime()
		}
	}
	if src.DurationNanos != maxEnd.Sub(minStart).Nanoseconds() {
		t.Errorf("DurationNanos %d, want %d", src.DurationNanos, maxEnd.Sub(minStart).Nanoseconds())
	}
	if src.Kind != Spans || src.DefaultValue != 0 || !reflect.DeepEqual(src.ValueTypes, []ValueType{{"duration", "nanoseconds"}, {"calls", "count"}}) {
		t.Errorf("kind %v default %d value types %v", src.Kind, src.DefaultValue, src.ValueTypes)
	}
	if src.RequestCount() != 2 {
		t.Errorf("RequestCount %d, want 2", src.RequestCount())
	}
	if len(src.Inputs) != 1 || src.Inputs[0] != (Input{Name: "sdk.jsonl", Format: "otlp-json", Bytes: int64(len(data))}) {
		t.Errorf("inputs %+v", src.Inputs)
	}
}

// ---------------------------------------------------------------------
// 2. Generic protobuf JSON of the same spans.

// TestProtojsonDefaults reads the same SDK spans encoded by protojson's
// defaults (base64 IDs, enum names, 64-bit integers as strings;
// google.golang.org/protobuf/encoding/protojson) and expects the same
// Source as from canonical OTLP/JSON.
func TestProtojsonDefaults(t *testing.T) {
	recorded, _ := recordWorkload(t, 2)
	td := sdkToProto(recorded)
	canonical := otlpJSON(t, td) + "\n"
	plain, err := protojson.Marshal(td)
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.Contains(plain, []byte(`"SPAN_KIND_SERVER"`)) || !bytes.Contains(plain, []byte(`==`)) {
		t.Fatalf("protojson output lacks enum names or base64 IDs: %.200s", plain)
	}
	multi, err := protojson.MarshalOptions{Multiline: true, Indent: "  "}.Marshal(td)
	if err != nil {
		t.Fatal(err)
	}
	want := mustCollect(t, Options{}, input{"canonical.jsonl", canonical})
	for _, tc := range []struct{ name, data string }{
		{"single line", string(plain) + "\n"},
		{"multi-line document", string(multi)},
		{"two documents", string(multi) + "\n" + string(multi)},
	} {
		t.Run(tc.name, func(t *testing.T) {
			got := mustCollect(t, Options{}, input{"plain.json", tc.data})
			if tc.name == "two documents" {
				// Every span is read twice: the second copies are duplicates.
				if n := warningCount(got, WarnDuplicateSpanID); n != len(recorded) {
					t.Fatalf("%d duplicate-span-id warnings, want %d", n, len(recorded))
				}
				got.Warnings = Warnings{}
			}
			sameSource(t, want, got)
		})
	}
}

// ---------------------------------------------------------------------
// 3. Spans of one trace across lines and files.

func TestSplitAcrossLinesAndFiles(t *testing.T) {
	recorded, _ := recordWorkload(t, 3)
	whole := mustCollect(t, Options{}, input{"whole.jsonl", otlpJSON(t, sdkToProto(recorded)) + "\n"})

	// One span per line, lines dealt alternately to two files, each file
	// in reverse order.
	var a, b []string
	for i, s := range recorded {
		l := otlpJSON(t, sdkToProto([]sdktrace.ReadOnlySpan{s}))
		if i%2 == 0 {
			a = append([]string{l}, a...)
		} else {
			b = append([]string{l}, b...)
		}
	}
	for _, tc := range []struct {
		name   string
		inputs []input
	}{
		{"one span per line", []input{{"all.jsonl", lines(append(slices.Clone(a), b...)...)}}},
		{"two files", []input{{"a.jsonl", lines(a...)}, {"b.jsonl", lines(b...)}}},
		{"two files swapped", []input{{"b.jsonl", lines(b...)}, {"a.jsonl", lines(a...)}}},
		{"blank lines and CRLF", []input{{"a.jsonl", "\r\n\n" + strings.Join(a, "\r\n") + "\r\n  \n"}, {"b.jsonl", strings.Join(b, "\n")}}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			got := mustCollect(t, Options{}, tc.inputs...)
			sameSource(t, whole, got)
			if len(got.Inputs) != len(tc.inputs) {
				t.Fatalf("%d inputs recorded, want %d", len(got.Inputs), len(tc.inputs))
			}
			for i, in := range got.Inputs {
				if in.Name != tc.inputs[i].name || in.Bytes != int64(len(tc.inputs[i].data)) || in.Format != FormatOTLPJSON {
					t.Errorf("input %d = %+v", i, in)
				}
			}
		})
	}
}

// ---------------------------------------------------------------------
// 4. Repairs.

const (
	tr1 = "5b8efff798038103d269b633813fc60c"
	tr2 = "0af7651916cd43dd8448eb211c80319c"
	sA  = "00000000000000a1"
	sB  = "00000000000000b2"
	sC  = "00000000000000c3"
	sD  = "00000000000000d4"
	sX  = "00000000000000ee"
	sec = int64(1_000_000_000)
	t0  = 1_760_000_000 * sec
)

func TestRepairs(t *testing.T) {
	api := func(spans ...tspan) string { return line(tres{"greenhouse-api", spans}) }
	root := tspan{trace: tr1, id: sA, name: "root", kind: 2, start: t0, end: t0 + 2*sec}
	child := func(id, parent, name string, start, end int64) tspan {
		return tspan{trace: tr1, id: id, parent: parent, name: name, kind: 1, start: start, end: end}
	}
	tests := []struct {
		name      string
		data      string
		kind      string
		count     int
		line      int // of the span the (first) repair concerns
		wantPaths [][]string
		check     func(t *testing.T, src *Source)
	}{
		{
			name: "orphan",
			// A SERVER span whose parent is outside the input (d: the
			// caller sent its trace context) is an entry point, no orphan.
			data: lines(api(root, child(sB, sA, "b", t0+sec, t0+sec+10)), api(child(sC, sX, "c", t0+sec, t0+sec+20)),
				api(tspan{trace: tr1, id: sD, parent: "00000000000000e5", name: "d", kind: 2, start: t0 + sec, end: t0 + sec + 30})),
			kind: WarnOrphanSpan, count: 1, line: 2,
			wantPaths: [][]string{{"root"}, {"root", "b"}, {"c"}, {"d"}},
		},
		{
			name: "duplicate span ID",
			data: lines(api(root, child(sB, sA, "first", t0+sec, t0+sec+10)), api(child(sC, sA, "c", t0+sec, t0+sec+5)),
				api(child(sB, sA, "second", t0+sec, t0+sec+30))),
			kind: WarnDuplicateSpanID, count: 1, line: 3,
			wantPaths: [][]string{{"root"}, {"root", "first"}, {"root", "c"}},
		},
		{
			name: "parent cycle",
			data: lines(api(root, child(sB, sC, "b", t0+sec, t0+sec+10)), api(child(sC, sB, "c", t0+sec+1, t0+sec+5)),
				api(tspan{trace: tr2, id: sD, parent: sD, name: "self", kind: 1, start: t0, end: t0 + 10})),
			// The first report is of trace tr2 (traces are taken in ID
			// order); in tr1, b starts first, so it becomes the root.
			kind: WarnParentCycle, count: 2, line: 3,
			wantPaths: [][]string{{"self"}, {"root"}, {"b"}, {"b", "c"}},
		},
		{
			name: "negative duration",
			data: lines(api(root), api(child(sB, sA, "b", t0+sec+500, t0+sec))),
			kind: WarnNegativeDuration, count: 1, line: 2,
			wantPaths: [][]string{{"root"}, {"root", "b"}},
			check: func(t *testing.T, src *Source) {
				if v := src.Paths.At(1).Values[0]; v != 0 {
					t.Errorf("duration %d, want 0", v)
				}
			},
		},
		{
			name: "clock skew",
			// c starts 100 ms before its parent (tolerance max(1 ms, 1% of
			// 2 s) = 20 ms); its child g must move with it; d starts 5 ms
			// early, within the tolerance.
			data: lines(api(root, child(sD, sA, "d", t0-5_000_000, t0+sec)),
				api(child(sC, sA, "c", t0-100_000_000, t0+50_000_000)),
				api(child(sB, sC, "g", t0-50_000_000, t0))),
			kind: WarnClockSkew, count: 1, line: 2,
			wantPaths: [][]string{{"root", "d"}, {"root"}, {"root", "c"}, {"root", "c", "g"}},
			check: func(t *testing.T, src *Source) {
				if got := src.Paths.At(2).Values[0]; got != 150_000_000 {
					t.Errorf("moved span's duration %d, want it kept (150 ms)", got)
				}
				if got := src.Paths.At(3).Values[0]; got != 50_000_000 {
					t.Errorf("child duration %d, want 50 ms", got)
				}
				if src.DurationNanos != 2*sec+5_000_000 {
					t.Errorf("DurationNanos %d", src.DurationNanos)
				}
			},
		},
		{
			name: "missing timestamp",
			data: lines(api(root), api(child(sB, sA, "b", 0, 0)), api(child(sC, sA, "c", t0+sec, 0))),
			kind: WarnMissingTimestamp, count: 2, line: 2,
			wantPaths: [][]string{{"root"}, {"root", "b"}, {"root", "c"}},
			check: func(t *testing.T, src *Source) {
				if src.Paths.At(1).Values[0] != 0 || src.Paths.At(2).Values[0] != 0 || src.DurationNanos != 2*sec {
					t.Errorf("durations %v %v, DurationNanos %d", src.Paths.At(1).Values, src.Paths.At(2).Values, src.DurationNanos)
				}
			},
		},
		{
			name: "no timestamps at all first",
			data: lines(api(tspan{trace: "00000000000000000000000000000001", id: sA, name: "timeless", kind: 2}), api(root)),
			kind: WarnMissingTimestamp, count: 1, line: 1,
			wantPaths: [][]string{{"timeless"}, {"root"}},
			check: func(t *testing.T, src *Source) {
				if src.DurationNanos != 2*sec {
					t.Errorf("DurationNanos %d, want the timed span's 2 s", src.DurationNanos)
				}
			},
		},
		{
			name: "invalid IDs",
			data: lines(api(root), api(tspan{trace: "00000000000000000000000000000000", id: sB, name: "zero trace", start: t0, end: t0 + 1}),
				api(tspan{trace: tr1, id: "xyz", name: "bad span", start: t0, end: t0 + 1}),
				api(tspan{trace: tr1, id: sC, parent: "0102", name: "bad parent", start: t0, end: t0 + 1})),
			kind: WarnInvalidID, count: 3, line: 2,
			wantPaths: [][]string{{"root"}},
		},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			src := mustCollect(t, Options{}, input{"spans.jsonl", tc.data})
			if n := warningCount(src, tc.kind); n != tc.count {
				t.Fatalf("%d %s warnings, want %d; all: %v", n, tc.kind, tc.count, src.Warnings.Strings())
			}
			if n := src.Warnings.Len(); n != tc.count {
				t.Errorf("%d warnings in all, want %d: %v", n, tc.count, src.Warnings.Strings())
			}
			ex := src.Warnings.Summary()[0].Examples[0]
			if ex.File != "spans.jsonl" || ex.Line != tc.line || ex.Message == "" {
				t.Errorf("warning example %+v, want spans.jsonl line %d", ex, tc.line)
			}
			if got := pathFunctions(src); !reflect.DeepEqual(got, tc.wantPaths) {
				t.Errorf("paths %v, want %v", got, tc.wantPaths)
			}
			if tc.check != nil {
				tc.check(t, src)
			}

			_, err := collect(Options{Strict: true}, input{"spans.jsonl", tc.data})
			var pe *ParseError
			if !errors.As(err, &pe) || !errors.Is(err, ErrSpanRepair) {
				t.Fatalf("strict: error %v, want a *ParseError wrapping ErrSpanRepair", err)
			}
			if pe.File != "spans.jsonl" || pe.Line != tc.line || !strings.Contains(err.Error(), tc.kind) {
				t.Errorf("strict error %q, want spans.jsonl:%d and %s", err, tc.line, tc.kind)
			}
		})
	}
}

// TestAsyncChildren checks that a consumer ending long after its producer
// is not clock skew: a PRODUCER span may end before its consumer starts
// (OpenTelemetry Specification, trace/api.md, SpanKind).
func TestAsyncChildren(t *testing.T) {
	data := lines(line(tres{"api", []tspan{{trace: tr1, id: sA, name: "send", kind: 4, start: t0, end: t0 + 1_000_000}}},
		tres{"worker", []tspan{{trace: tr1, id: sB, parent: sA, name: "process", kind: 5, start: t0 + 5*sec, end: t0 + 6*sec}}}))
	src := mustCollect(t, Options{Strict: true, AllServices: true}, input{"async.jsonl", data})
	if got := pathFunctions(src); !reflect.DeepEqual(got, [][]string{{"send"}, {"process"}}) {
		t.Fatalf("paths %v", got)
	}
	if src.DurationNanos != 6*sec {
		t.Errorf("DurationNanos %d", src.DurationNanos)
	}
}

// TestLateChildren checks that a child ending after its parent is async
// work, not clock skew (a promise not awaited, a streamed response): it
// is kept as recorded with no warning, passes Strict, and is counted.
// Only a start before the parent by more than the tolerance is skew, in
// one service or across two.
func TestLateChildren(t *testing.T) {
	api := func(s tspan) string { return line(tres{"api", []tspan{s}}) }
	child := func(id, parent, name string, start, end int64) tspan {
		return tspan{trace: tr1, id: id, parent: parent, name: name, kind: 1, start: start, end: end}
	}
	root := tspan{trace: tr1, id: sA, name: "root", kind: 2, start: t0, end: t0 + 100_000_000}
	// b ends 300 ms after root; c starts 0.9 ms before root (within the
	// 1 ms tolerance for start times truncated to the millisecond).
	data := lines(api(root), api(child(sB, sA, "b", t0+50_000_000, t0+400_000_000)),
		api(child(sC, sA, "c", t0-900_000, t0+1_000_000)))
	src := mustCollect(t, Options{Strict: true}, input{"late.jsonl", data})
	if got := src.Warnings.Strings(); len(got) > 0 {
		t.Errorf("warnings %v, want none", got)
	}
	if got := pathFunctions(src); !reflect.DeepEqual(got, [][]string{{"root", "c"}, {"root"}, {"root", "b"}}) {
		t.Fatalf("paths %v", got)
	}
	if got := src.Paths.At(2).Values[0]; got != 350_000_000 {
		t.Errorf("late child's duration %d, want it kept (350 ms)", got)
	}
	if src.LateChildren != 1 {
		t.Errorf("LateChildren %d, want 1", src.LateChildren)
	}

	// A downstream service's span starting 30 ms before the CLIENT span
	// that called it (tolerance max(1 ms, 1% of 1 s)) is skew.
	data = lines(line(tres{"api", []tspan{{trace: tr1, id: sA, name: "root", kind: 2, start: t0, end: t0 + sec},
		{trace: tr1, id: sB, parent: sA, name: "call", kind: 3, start: t0 + 100_000_000, end: t0 + 900_000_000, attrs: []attr{str("url.full", "http://inv/")}}}}),
		line(tres{"inventory", []tspan{{trace: tr1, id: sC, parent: sB, name: "GET /stock", kind: 2, start: t0 + 70_000_000, end: t0 + 800_000_000}}}))
	src = mustCollect(t, Options{Service: "inventory"}, input{"skew.jsonl", data})
	if n := warningCount(src, WarnClockSkew); n != 1 {
		t.Errorf("%d clock-skew warnings, want 1: %v", n, src.Warnings.Strings())
	}
}

// ---------------------------------------------------------------------
// 5. Bad input.

func TestMalformed(t *testing.T) {
	good := line(tres{"api", []tspan{{trace: tr1, id: sA, name: "root", kind: 2, start: t0, end: t0 + sec}}})
	good2 := line(tres{"api", []tspan{{trace: tr1, id: sB, parent: sA, name: "child", kind: 1, start: t0 + 1, end: t0 + 2}}})
	tests := []struct {
		name   string
		bad    string
		at     string // the offending text; the error's column is where it starts
		offset int64  // else the expected column
		msg    string
	}{
		{"syntax", `{"resourceSpans":[{"scopeSpans":[{"spans":[{"traceId":x}]}]}]}`, `x}`, 0, "invalid character"},
		{"truncated", `{"resourceSpans":[{"scopeSpans":[`, "", 33, "unexpected end"},
		{"wrong type", `{"resourceSpans":[{"scopeSpans":[{"spans":[{"name":5}]}]}]}`, `5}`, 0, "spans.0.name: unexpected JSON number"},
		{"wrong type, object", `{"resourceSpans":[{"scopeSpans":[{"spans":[{"name":{"a":[1]}}]}]}]}`, `{"a"`, 0, "unexpected JSON object"},
		{"wrong type, string", `{"resourceSpans":[{"scopeSpans":[{"spans":[{"attributes":"a \"b\""}]}]}]}`, `"a \"`, 0, "unexpected JSON string"},
		{"bad timestamp", `{"resourceSpans":[{"scopeSpans":[{"spans":[{"startTimeUnixNano":"soon"}]}]}]}`, `"soon"`, 0, "invalid integer"},
		{"bad base64", `{"resourceSpans":[{"resource":{"attributes":[{"key":"k","value":{"bytesValue":"@@"}}]}}]}`, `"@@"`, 0, "invalid base64"},
		{"bad double", `{"resourceSpans":[{"resource":{"attributes":[{"key":"k","value":{"doubleValue":"lots"}}]}}]}`, `"lots"`, 0, "invalid double"},
		{"not an object", `"resourceSpans"`, `"resourceSpans"`, 0, "unexpected JSON string"},
		{"control characters", "{\"resourceSpans\":\x01\x02}", "\x01", 0, "invalid character"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			data := lines(good, tc.bad, good2)
			_, err := collect(Options{}, input{"bad.jsonl", data})
			var pe *ParseError
			if !errors.As(err, &pe) {
				t.Fatalf("error %v, want a *ParseError", err)
			}
			want := tc.offset
			if tc.at != "" {
				want = int64(strings.Index(tc.bad, tc.at) + 1)
			}
			if pe.File != "bad.jsonl" || pe.Line != 2 || pe.Offset != want {
				t.Errorf("error at %s:%d:%d, want bad.jsonl:2:%d (%v)", pe.File, pe.Line, pe.Offset, want, err)
			}
			excerpt := strings.ReplaceAll(tc.at, "\x01", `\x01`)
			if !strings.Contains(pe.Snippet, excerpt) || len([]rune(pe.Snippet)) > 60 {
				t.Errorf("snippet %q, want it to hold %q and at most 60 characters", pe.Snippet, excerpt)
			}
			if !strings.Contains(err.Error(), tc.msg) {
				t.Errorf("error %q lacks %q", err, tc.msg)
			}

			src := mustCollect(t, Options{KeepGoing: true}, input{"bad.jsonl", data})
			if got := pathFunctions(src); !reflect.DeepEqual(got, [][]string{{"root"}, {"root", "child"}}) {
				t.Errorf("keep going: paths %v", got)
			}
			sum := src.Warnings.Summary()
			if len(sum) != 1 || sum[0].Kind != WarnMalformedLine || sum[0].Count != 1 || sum[0].Examples[0].Line != 2 || sum[0].Examples[0].File != "bad.jsonl" {
				t.Errorf("keep going: warnings %+v", sum)
			}
		})
	}
}

func TestSnippet(t *testing.T) {
	long := strings.Repeat("abcdefghij", 10)
	tests := []struct {
		name string
		rec  string
		at   int
		want string
	}{
		{"short", `{"a":x}`, 5, `{"a":x}`},
		{"starts 20 bytes before", long, 50, long[30:90]},
		{"control characters", "{\"a\":\x01\t\n}", 5, `{"a":\x01\t\n}`},
		{"invalid UTF-8 counts as escaped", "{" + strings.Repeat("\xff", 20) + "}", 0, "{" + strings.Repeat(`\xff`, 14) + ""},
		{"multi-byte runes count once", strings.Repeat("é", 70), 0, strings.Repeat("é", 60)},
		{"never starts inside a rune", "ab" + strings.Repeat("é", 30), 25, strings.Repeat("é", 29)},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			got := snippet([]byte(tc.rec), tc.at)
			if got != tc.want || len([]rune(got)) > 60 {
				t.Errorf("snippet = %q, want %q", got, tc.want)
			}
		})
	}
}

// TestMalformedDocument checks positions inside a multi-line document.
func TestMalformedDocument(t *testing.T) {
	doc := "{\n  \"resourceSpans\": [\n    {\"scopeSpans\": [\n      {\"spans\": [{\"name\": true}]}\n    ]}\n  ]\n}\n"
	_, err := collect(Options{}, input{"doc.json", doc})
	var pe *ParseError
	if !errors.As(err, &pe) || pe.Line != 4 || pe.Offset != 27 {
		t.Fatalf("error %v, want doc.json:4:27", err)
	}
	src := mustCollect(t, Options{KeepGoing: true}, input{"doc.json", doc + doc})
	if n := warningCount(src, WarnMalformedDocument); n != 2 {
		t.Fatalf("warnings %v", src.Warnings.Strings())
	}
	if ex := src.Warnings.Summary()[0].Examples; ex[0].Line != 4 || ex[1].Line != 11 {
		t.Errorf("warning lines %d, %d, want 4 and 11", ex[0].Line, ex[1].Line)
	}
}

func TestLimits(t *testing.T) {
	good := line(tres{"api", []tspan{{trace: tr1, id: sA, name: "root", kind: 2, start: t0, end: t0 + sec}}})
	deep := func(n int) string {
		return `{"resourceSpans":[{"resource":{"attributes":[{"key":"k","value":` + strings.Repeat(`{"arrayValue":{"values":[`, n) +
			strings.Repeat(`]}}`, n) + `}]}}]}`
	}
	chain := func(n int) []tspan {
		var out []tspan
		for i := range n {
			s := tspan{trace: tr1, id: fmt.Sprintf("%016x", i+1), name: fmt.Sprintf("s%d", i), start: t0, end: t0 + int64(n-i)}
			if i > 0 {
				s.parent = fmt.Sprintf("%016x", i)
			}
			out = append(out, s)
		}
		return out
	}
	long := `{"resourceSpans":[],"padding":"` + strings.Repeat("x", 5000) + `"}`
	tests := []struct {
		name      string
		opts      Options
		blockSize int
		data      string
		line      int
		msg       string
	}{
		{"long line in a block", Options{Limits: Limits{MaxLineBytes: 4096}}, 0, lines(good, good, long, good), 3, "--max-line-bytes"},
		{"long line past the block", Options{Limits: Limits{MaxLineBytes: 4096}}, 1024, lines(good, good, long, good), 3, "--max-line-bytes"},
		{"long last line", Options{Limits: Limits{MaxLineBytes: 4096}}, 1024, good + "\n" + long, 2, "--max-line-bytes"},
		{"deep nesting", Options{Limits: Limits{MaxDepth: 40}}, 0, lines(good, deep(30)), 2, "nested deeper than 40"},
		{"deep document", Options{Limits: Limits{MaxDepth: 40}}, 0, "\n\n" + strings.Replace(deep(30), `"resource":`, "\n\"resource\":", 1), 4, "nested deeper than 40"},
		{"too many frames", Options{Limits: Limits{MaxFrames: 1}}, 0, lines(good, line(tres{"api", []tspan{{trace: tr1, id: sB, parent: sA, name: "other", start: t0, end: t0 + 1}}})), 2, "more than 1 distinct frames"},
		{"input too large", Options{Limits: Limits{MaxBytes: 100}}, 0, lines(good, good), 1, "larger than 100 bytes"},
	}
	// A path deeper than MaxDepth is no error: its middle is elided.
	t.Run("path too deep", func(t *testing.T) {
		data := lines(line(tres{"api", chain(15)}))
		src := mustCollect(t, Options{Limits: Limits{MaxDepth: 12}}, input{"deep.jsonl", data})
		fns := pathFunctions(src)
		last := fns[len(fns)-1]
		if len(fns) != 15 || len(last) != 12 || last[0] != "s0" || last[5] != ElidedFrames || last[11] != "s14" || last[6] != "s9" {
			t.Errorf("deepest path %v", last)
		}
		sum := src.Warnings.Summary()
		if len(sum) != 1 || sum[0].Kind != WarnDeepStack || sum[0].Count != 1 || sum[0].Examples[0].Line != 1 {
			t.Errorf("warnings %+v, want one deep-stack at line 1", sum)
		}
		// A repair: --strict refuses it.
		c := NewSpanCollector(Options{Strict: true, Limits: Limits{MaxDepth: 12}})
		if err := c.Add("deep.jsonl", strings.NewReader(data)); err != nil {
			t.Fatal(err)
		}
		if _, err := c.Source(); !errors.Is(err, ErrSpanRepair) {
			t.Errorf("strict: %v, want a repair error", err)
		}
	})
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			for _, keepGoing := range []bool{false, true} {
				tc.opts.KeepGoing = keepGoing
				c := NewSpanCollector(tc.opts)
				if tc.blockSize > 0 {
					c.blockSize = tc.blockSize
				}
				err := c.Add("big.jsonl", strings.NewReader(tc.data))
				if err == nil {
					_, err = c.Source()
				}
				var pe *ParseError
				if !errors.Is(err, ErrLimit) || !errors.As(err, &pe) {
					t.Fatalf("keepGoing=%v: error %v, want a *ParseError wrapping ErrLimit", keepGoing, err)
				}
				if pe.File != "big.jsonl" || pe.Line != tc.line || !strings.Contains(err.Error(), tc.msg) {
					t.Errorf("keepGoing=%v: error %q, want big.jsonl line %d and %q", keepGoing, err, tc.line, tc.msg)
				}
			}
		})
	}
}

// TestAddFailureKeepsNothing checks that a failed Add leaves the collector
// as it was.
func TestAddFailureKeepsNothing(t *testing.T) {
	good := line(tres{"api", []tspan{{trace: tr1, id: sA, name: "root", kind: 2, start: t0, end: t0 + sec}}})
	other := line(tres{"api", []tspan{{trace: tr2, id: sB, name: "other", kind: 2, start: t0, end: t0 + sec}}})
	c := NewSpanCollector(Options{Workers: 2})
	c.blockSize = 64
	if err := c.Add("bad.jsonl", strings.NewReader(lines(strings.Repeat(other+"\n", 50), "{"))); err == nil {
		t.Fatal("malformed input accepted")
	}
	if err := c.Add("good.jsonl", strings.NewReader(good)); err != nil {
		t.Fatal(err)
	}
	src, err := c.Source()
	if err != nil {
		t.Fatal(err)
	}
	if got := pathFunctions(src); !reflect.DeepEqual(got, [][]string{{"root"}}) || len(src.Inputs) != 1 || src.Inputs[0].Name != "good.jsonl" {
		t.Fatalf("paths %v inputs %+v", got, src.Inputs)
	}
	// root, and the elision marker that Source interns.
	if len(c.frames) != 3 || len(c.frameIndex) != 2 {
		t.Errorf("the failed input's frames are still interned: %v", c.frames)
	}
}

// stuckReader returns no bytes and no error, forever.
type stuckReader struct{}

func (stuckReader) Read([]byte) (int, error) { return 0, nil }

// failingReader fails after its data.
type failingReader struct{ data string }

func (r *failingReader) Read(p []byte) (int, error) {
	if r.data == "" {
		return 0, errors.New("disk on fire")
	}
	n := copy(p, r.data)
	r.data = r.data[n:]
	return n, nil
}

func TestReaderErrors(t *testing.T) {
	good := line(tres{"api", []tspan{{trace: tr1, id: sA, name: "root", kind: 2, start: t0, end: t0 + sec}}})
	for _, tc := range []struct {
		name string
		r    io.Reader
		want error
		msg  string
	}{
		{"no progress", stuckReader{}, io.ErrNoProgress, "in.jsonl:1: multiple Read calls return no data or error"},
		{"read error", &failingReader{data: lines(good, good)}, nil, "disk on fire"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			c := NewSpanCollector(Options{KeepGoing: true})
			err := c.Add("in.jsonl", tc.r)
			var pe *ParseError
			if !errors.As(err, &pe) || pe.File != "in.jsonl" || (tc.want != nil && !errors.Is(err, tc.want)) || !strings.Contains(err.Error(), tc.msg) {
				t.Fatalf("error %v", err)
			}
		})
	}
}

// ---------------------------------------------------------------------
// Decoding details.

// TestIDForms checks trace and span IDs in hex, either case (OTLP/JSON:
// opentelemetry-proto docs/specification.md, "JSON Protobuf Encoding") and
// in base64 (the proto3 JSON mapping of bytes: standard or URL-safe,
// padded or not).
func TestIDForms(t *testing.T) {
	traceB, _ := hex.DecodeString(tr1)
	spanB, _ := hex.DecodeString("fbfe3f4affbfa3ff")
	forms := []struct{ name, trace, span string }{
		{"hex", tr1, "fbfe3f4affbfa3ff"},
		{"upper-case hex", strings.ToUpper(tr1), "FBFE3F4AFFBFA3FF"},
		{"base64", base64.StdEncoding.EncodeToString(traceB), base64.StdEncoding.EncodeToString(spanB)},
		{"unpadded base64", base64.RawStdEncoding.EncodeToString(traceB), base64.RawStdEncoding.EncodeToString(spanB)},
		{"URL-safe base64", base64.URLEncoding.EncodeToString(traceB), base64.URLEncoding.EncodeToString(spanB)},
	}
	if !strings.ContainsAny(forms[4].span, "-_") {
		t.Fatalf("test span ID %q does not exercise URL-safe base64", forms[4].span)
	}
	for _, f := range forms {
		t.Run(f.name, func(t *testing.T) {
			data := lines(line(tres{"api", []tspan{{trace: f.trace, id: f.span, name: "root", kind: 2, start: t0, end: t0 + 2},
				{trace: f.trace, id: sB, parent: f.span, name: "child", kind: 1, start: t0 + 1, end: t0 + 2}}}))
			src := mustCollect(t, Options{Strict: true}, input{"ids.jsonl", data})
			if got := pathFunctions(src); !reflect.DeepEqual(got, [][]string{{"root"}, {"root", "child"}}) {
				t.Fatalf("paths %v", got)
			}
			if src.Requests[1] != tr1 {
				t.Errorf("request %q, want %q", src.Requests[1], tr1)
			}
		})
	}
}

// TestAnyValueKinds checks every AnyValue form of OTLP's common.proto in
// its proto3 JSON mapping, including the forms of doubles that are
// strings, and attributes culprit reads given with unexpected types.
func TestAnyValueKinds(t *testing.T) {
	attrs := []attr{
		{"s", `{"stringValue":"plain \"quoted\" \u00e9"}`},
		{"b", `{"boolValue":false}`},
		{"i1", `{"intValue":"-9223372036854775808"}`},
		{"i2", `{"intValue":42}`},
		{"d1", `{"doubleValue":1.5e300}`},
		{"d2", `{"doubleValue":"NaN"}`},
		{"d3", `{"doubleValue":"Infinity"}`},
		{"d4", `{"doubleValue":"-Infinity"}`},
		{"d5", `{"doubleValue":"2.5"}`},
		{"arr", `{"arrayValue":{"values":[{"stringValue":"x"},{"intValue":"1"},{"arrayValue":{"values":[{}]}},{"kvlistValue":{"values":[]}}]}}`},
		{"kv", `{"kvlistValue":{"values":[{"key":"a","value":{"boolValue":true}},{"key":"b","value":{"bytesValue":"AAEC"}}]}}`},
		{"bytes", `{"bytesValue":"3q2-7w"}`},
		{"empty", `{}`},
		{"null", `null`},
		{"strindex", `{"stringValueStrindex":3}`},
		// Attributes culprit reads, with other types than usual.
		{"code.line.number", `{"doubleValue":12}`},
		{"code.file.path", `{"stringValue":"plants.go"}`},
		{"code.function.name", `{"stringValue":"greenhouse.Water"}`},
		{"db.system.name", `{"stringValue":"redis"}`},
		{"server.address", `{"stringValue":"::1"}`},
		{"server.port", `{"stringValue":"6379"}`},
		{"db.operation.batch.size", `{"intValue":"1"}`},
		{"db.operation.name", `{"boolValue":true}`},
	}
	data := lines(line(tres{"api", []tspan{{trace: tr1, id: sA, name: "root", kind: 3, start: t0, end: t0 + 7, attrs: attrs}}}))
	src := mustCollect(t, Options{Strict: true}, input{"values.jsonl", data})
	if src.Paths.Len() != 1 {
		t.Fatalf("%d paths", src.Paths.Len())
	}
	f := src.Frames[src.Paths.At(0).Frames[0]]
	want := Frame{Function: "greenhouse.Water", File: "plants.go", Line: 12, SpanKind: SpanKindClient, Protocol: ProtocolDatabase,
		System: "redis", Service: "api", Scope: "test", Code: true, Span: true}
	if f != want {
		t.Errorf("frame %+v, want %+v", f, want)
	}
	if c := src.Calls[src.Paths.At(0).Call]; c != (Call{System: "redis", Operation: "true", Peer: "[::1]:6379"}) {
		t.Errorf("call %+v", c)
	}

	// The decoded values themselves.
	var kvs []jsonKeyValue
	raw := "["
	for i, a := range attrs[:15] {
		if i > 0 {
			raw += ","
		}
		raw += fmt.Sprintf(`{"key":%q,"value":%s}`, a.key, a.val)
	}
	if err := jsonUnmarshalForTest(raw+"]", &kvs); err != nil {
		t.Fatal(err)
	}
	texts := map[string]string{}
	for _, kv := range kvs {
		texts[kv.Key] = kv.Value.text()
	}
	for k, v := range map[string]string{"s": `plain "quoted" é`, "b": "false", "i1": "-9223372036854775808", "i2": "42",
		"d1": "1.5e+300", "d2": "NaN", "d3": "+Inf", "d4": "-Inf", "d5": "2.5", "arr": "", "kv": "", "bytes": "", "empty": "", "null": ""} {
		if texts[k] != v {
			t.Errorf("%s = %q, want %q", k, texts[k], v)
		}
	}
	if a := kvs[9].Value.ArrayValue; a == nil || len(a.Values) != 4 || a.Values[2].ArrayValue == nil || a.Values[3].KvlistValue == nil {
		t.Errorf("array value %+v", a)
	}
	if kv := kvs[10].Value.KvlistValue; kv == nil || len(kv.Values) != 2 || !kv.Values[1].Value.BytesValue.set || kv.Values[1].Value.BytesValue.n != 3 {
		t.Errorf("kvlist value %+v", kv)
	}
	if b := kvs[11].Value.BytesValue; !b.set || b.n != 4 {
		t.Errorf("bytes value %+v", b)
	}
}

// TestOldAndLenientShapes checks the instrumentationLibrarySpans level of
// OTLP before v0.15 (opentelemetry-proto CHANGELOG), enum names and 64-bit
// numbers as JSON numbers (accepted by the proto3 JSON mapping), a
// top-level array of requests, unknown fields (which OTLP/JSON receivers
// must ignore) and a BOM.
func TestOldAndLenientShapes(t *testing.T) {
	span := `{"traceId":"` + tr1 + `","spanId":"` + sA + `","name":"root","kind":"SPAN_KIND_SERVER","startTimeUnixNano":1760000000000000000,"endTimeUnixNano":"1760000000000000500","futureField":{"x":[1,2,{"y":null}]}}`
	tests := []struct{ name, data string }{
		{"instrumentationLibrarySpans", `{"resourceSpans":[{"resource":{"attributes":[{"key":"service.name","value":{"stringValue":"api"}}]},"instrumentationLibrarySpans":[{"instrumentationLibrary":{"name":"old"},"spans":[` + span + `]}]}]}` + "\n"},
		{"array of requests", `[{"resourceSpans":[{"resource":{"attributes":[{"key":"service.name","value":{"stringValue":"api"}}]},"scopeSpans":[{"spans":[` + span + `]}]}]}]`},
		{"BOM and unknown top-level fields", "\uFEFF" + `{"resourceSpans":[{"resource":{"attributes":[{"key":"service.name","value":{"stringValue":"api"}}],"entityRefs":[]},"scopeSpans":[{"spans":[` + span + `]}]}],"extra":1}`},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			src := mustCollect(t, Options{Strict: true}, input{"old.json", tc.data})
			if src.Paths.Len() != 1 || src.Paths.At(0).Values[0] != 500 {
				t.Fatalf("paths %v", digest(src))
			}
			if f := src.Frames[src.Paths.At(0).Frames[0]]; f.SpanKind != SpanKindServer || f.Service != "api" || f.Function != "root" {
				t.Errorf("frame %+v", f)
			}
		})
	}
}

// TestFrameNaming checks how span attributes become frames and calls, per
// the OpenTelemetry semantic conventions v1.44.0 (current and older
// attribute names; the table in the reader's reference notes).
func TestFrameNaming(t *testing.T) {
	tests := []struct {
		name  string
		kind  int
		span  string
		attrs []attr
		frame Frame // Service "api" and Span are implied
		call  Call
	}{
		{"new code attributes", 1, "x", []attr{str("code.function.name", "github.com/culprithq/greenhouse/store.(*Store).Save"), str("code.file.path", "/s/store.go"), num("code.line.number", 9), str("code.namespace", "ignored")},
			Frame{Function: "github.com/culprithq/greenhouse/store.(*Store).Save", File: "/s/store.go", Line: 9, SpanKind: SpanKindInternal, Code: true}, Call{}},
		{"old code attributes", 1, "x", []attr{str("code.namespace", "com.greenhouse.Store"), str("code.function", "save"), str("code.filepath", "Store.java"), num("code.lineno", 77)},
			Frame{Function: "com.greenhouse.Store.save", File: "Store.java", Line: 77, SpanKind: SpanKindInternal, Code: true}, Call{}},
		{"function without namespace", 1, "x", []attr{str("code.function", "save")}, Frame{Function: "save", SpanKind: SpanKindInternal, Code: true}, Call{}},
		{"server route with old method", 2, "HTTP GET", []attr{str("http.method", "GET"), str("http.route", "/zones/{id}")},
			Frame{Function: "GET /zones/{id}", SpanKind: SpanKindServer}, Call{}},
		{"server route, other method", 2, "HTTP", []attr{str("http.request.method", "_OTHER"), str("http.request.method_original", "PURGE"), str("http.route", "/cache")},
			Frame{Function: "PURGE /cache", SpanKind: SpanKindServer}, Call{}},
		{"server route without method", 2, "x", []attr{str("http.route", "/zones")}, Frame{Function: "/zones", SpanKind: SpanKindServer}, Call{}},
		{"consumer destination", 5, "x", []attr{str("messaging.system", "rabbitmq"), str("messaging.destination", "watering")},
			Frame{Function: "watering", SpanKind: SpanKindConsumer}, Call{}},
		{"internal span with route keeps its name", 1, "render", []attr{str("http.route", "/zones")}, Frame{Function: "render", SpanKind: SpanKindInternal}, Call{}},
		{"unnamed span", 0, "", nil, Frame{Function: "(unnamed span)"}, Call{}},
		{"database wins over http", 3, "search", []attr{str("db.system", "elasticsearch"), str("http.request.method", "POST"), str("url.full", "https://es:9200/_search"), str("db.query.summary", "search plants")},
			Frame{Function: "search", SpanKind: SpanKindClient, Protocol: ProtocolDatabase, System: "elasticsearch"}, Call{System: "elasticsearch", Summary: "search plants", Peer: "es:9200"}},
		{"old db system names", 3, "q", []attr{str("db.system", "oracle"), str("db.statement", "SELECT 1 FROM dual"), str("db.operation", "SELECT"), num("db.operation.batch.size", 4)},
			Frame{Function: "q", SpanKind: SpanKindClient, Protocol: ProtocolDatabase, System: "oracle.db"}, Call{System: "oracle.db", Statement: "SELECT 1 FROM dual", Operation: "SELECT", Batch: true}},
		{"new names win", 3, "q", []attr{str("db.system", "mssql"), str("db.system.name", "microsoft.sql_server"), str("db.statement", "old"), str("db.query.text", "new"), str("server.address", "sql1"), str("net.peer.name", "old-sql")},
			Frame{Function: "q", SpanKind: SpanKindClient, Protocol: ProtocolDatabase, System: "microsoft.sql_server"}, Call{System: "microsoft.sql_server", Statement: "new", Peer: "sql1"}},
		{"rpc fully qualified method", 3, "r", []attr{str("rpc.system.name", "grpc"), str("rpc.method", "greenhouse.Sensors/Read"), str("rpc.service", "ignored"), str("service.peer.name", "sensors")},
			Frame{Function: "r", SpanKind: SpanKindClient, Protocol: ProtocolRPC, System: "grpc"}, Call{System: "grpc", Operation: "greenhouse.Sensors/Read", Peer: "sensors"}},
		{"rpc old system name", 3, "r", []attr{str("rpc.system", "apache_dubbo"), str("rpc.service", "greenhouse.Sensors"), str("rpc.method", "Read")},
			Frame{Function: "r", SpanKind: SpanKindClient, Protocol: ProtocolRPC, System: "dubbo"}, Call{System: "dubbo", Operation: "greenhouse.Sensors/Read"}},
		{"messaging producer", 4, "publish", []attr{str("messaging.system", "kafka"), str("messaging.operation", "publish"), str("peer.service", "kafka")},
			Frame{Function: "publish", SpanKind: SpanKindProducer, Protocol: ProtocolMessaging, System: "kafka"}, Call{System: "kafka", Operation: "publish", Peer: "kafka"}},
		{"http client old attributes", 3, "GET", []attr{str("http.method", "GET"), str("http.url", "http://weather.example:81/today")},
			Frame{Function: "GET", SpanKind: SpanKindClient, Protocol: ProtocolHTTP, System: "http"}, Call{System: "http", Operation: "GET", Peer: "weather.example:81"}},
		{"http client by URL only", 3, "fetch", []attr{str("url.full", "https://weather.example/today")},
			Frame{Function: "fetch", SpanKind: SpanKindClient, Protocol: ProtocolHTTP, System: "http"}, Call{System: "http", Peer: "weather.example"}},
		{"server span is no call", 2, "db server", []attr{str("db.system.name", "postgresql")}, Frame{Function: "db server", SpanKind: SpanKindServer}, Call{}},
		{"client without protocol", 3, "dial", []attr{str("server.address", "x")}, Frame{Function: "dial", SpanKind: SpanKindClient}, Call{}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			data := lines(line(tres{"api", []tspan{{trace: tr1, id: sA, name: tc.span, kind: tc.kind, start: t0, end: t0 + 1, attrs: tc.attrs}}}))
			src := mustCollect(t, Options{}, input{"f.jsonl", data})
			tc.frame.Service, tc.frame.Span, tc.frame.Scope = "api", true, "test"
			if f := src.Frames[src.Paths.At(0).Frames[0]]; f != tc.frame {
				t.Errorf("frame %+v, want %+v", f, tc.frame)
			}
			if c := src.Calls[src.Paths.At(0).Call]; c != tc.call {
				t.Errorf("call %+v, want %+v", c, tc.call)
			}
		})
	}
}

func TestServiceFilter(t *testing.T) {
	data := lines(line(
		tres{"greenhouse-api", []tspan{{trace: tr1, id: sA, name: "root", kind: 2, start: t0, end: t0 + sec}, {trace: tr1, id: sB, parent: sA, name: "call inventory", kind: 3, start: t0 + 1, end: t0 + sec - 1, attrs: []attr{str("url.full", "http://inventory/")}}}},
		tres{"inventory", []tspan{{trace: tr1, id: sC, parent: sB, name: "GET /stock", kind: 2, start: t0 + 2, end: t0 + sec - 2}, {trace: tr1, id: sD, parent: sC, name: "load", kind: 1, start: t0 + 3, end: t0 + 4}}}))
	tests := []struct {
		service string
		want    [][]string
	}{
		// By default, only the service receiving requests from outside:
		// inventory's time is inside the CLIENT span that called it.
		{"", [][]string{{"root"}, {"root", "call inventory"}}},
		{"inventory", [][]string{{"GET /stock"}, {"GET /stock", "load"}}},
		{"greenhouse-api", [][]string{{"root"}, {"root", "call inventory"}}},
		{"nursery", nil},
	}
	for _, tc := range tests {
		t.Run("service="+tc.service, func(t *testing.T) {
			src := mustCollect(t, Options{Service: tc.service, Strict: true}, input{"s.jsonl", data})
			if got := pathFunctions(src); !reflect.DeepEqual(got, tc.want) {
				t.Errorf("paths %v, want %v", got, tc.want)
			}
		})
	}
}

func TestSniff(t *testing.T) {
	for _, tc := range []struct {
		in   string
		want string
	}{
		{`{"resourceSpans":[]}`, FormatOTLPJSON},
		{" \r\n\t{", FormatOTLPJSON},
		{"\uFEFF{", FormatOTLPJSON},
		{"\uFEFF \n{", FormatOTLPJSON},
		{"", ""},
		{"   ", FormatPprof},
		{"[{}]", FormatOTLPJSON},
		// JSON lines whose first line is broken are still JSON.
		{"oops\n{\"resourceSpans\":[]}\n", FormatOTLPJSON},
		// Binary with a '{' after a newline is not.
		{"\x0a\x05hel\x00lo\n{", FormatPprof},
		{"\x1f\x8b\x08", FormatGzip},
		{"\x0a\x05hello", FormatPprof},
		{"\xff\xfe{\x00", FormatUTF16},
		{"go 1.26 trace\x00\x00\x00", FormatExecTrace},
		{"go 1.26 tracer", FormatPprof},
		// A legacy text profile (read by the pprof library).
		{"--- contention:\ncycles/second=3000000000\n", FormatPprof},
	} {
		t.Run(strconv.Quote(tc.in), func(t *testing.T) {
			if got := Sniff([]byte(tc.in)); got != tc.want {
				t.Errorf("Sniff(%q) = %q, want %q", tc.in, got, tc.want)
			}
		})
	}
}

// ---------------------------------------------------------------------
// 6. Parallel decoding gives the sequential result.

func TestParallelMatchesSequential(t *testing.T) {
	data, nSpans := genInput(1, 600)
	if nSpans < 3000 {
		t.Fatalf("generated only %d spans", nSpans)
	}
	// Corrupt a few lines, to also compare warnings, and append a second
	// copy of some lines for duplicates.
	ls := strings.Split(strings.TrimSuffix(string(data), "\n"), "\n")
	ls[17] = ls[17][:len(ls[17])/2]
	ls = append(ls, ls[3], ls[40])
	text := lines(ls...)

	runLocal := func(workers, block, local int, text string) *Source {
		c := NewSpanCollector(Options{Workers: workers, KeepGoing: true})
		c.blockSize, c.localEntries = block, local
		half := strings.Index(text[len(text)/2:], "\n") + len(text)/2 + 1
		if err := c.Add("one.jsonl", strings.NewReader(text[:half])); err != nil {
			t.Fatal(err)
		}
		if err := c.Add("two.jsonl", strings.NewReader(text[half:])); err != nil {
			t.Fatal(err)
		}
		src, err := c.Source()
		if err != nil {
			t.Fatal(err)
		}
		return src
	}
	run := func(workers, block int, text string) *Source {
		return runLocal(workers, block, defaultLocalEntries, text)
	}
	seq := run(1, 1<<20, text)
	if seq.Paths.Len() < 3000 || warningCount(seq, WarnMalformedLine) != 1 || warningCount(seq, WarnDuplicateSpanID) == 0 {
		t.Fatalf("%d paths, warnings %v", seq.Paths.Len(), seq.Warnings.Strings())
	}
	for _, tc := range []struct {
		name    string
		workers int
		block   int
	}{
		{"4 workers, small blocks", 4, 4 << 10},
		{"4 workers, default blocks", 4, defaultBlockSize},
		{"3 workers, tiny blocks", 3, 256},
	} {
		t.Run(tc.name, func(t *testing.T) {
			sameSource(t, seq, run(tc.workers, tc.block, text))
		})
	}
	t.Run("decoder tables restarting", func(t *testing.T) {
		// Decoders keep their tables across jobs and start them anew past
		// a bound; the merge must follow every restart.
		for _, local := range []int{0, 1, 7} {
			sameSource(t, seq, runLocal(3, 2<<10, local, text))
		}
	})
	t.Run("lines shuffled", func(t *testing.T) {
		// Without the duplicates (which of two copies is kept depends on
		// order), shuffled lines give the same paths.
		base := slices.Clone(ls[:len(ls)-2])
		want := run(1, 1<<20, lines(base...))
		rand.New(rand.NewPCG(7, 7)).Shuffle(len(base), func(i, j int) { base[i], base[j] = base[j], base[i] })
		got := run(4, 4<<10, lines(base...))
		if !reflect.DeepEqual(digest(want), digest(got)) || !reflect.DeepEqual(want.Frames, got.Frames) {
			t.Fatal("shuffled lines give other paths")
		}
	})
}

// ---------------------------------------------------------------------
// 7. Benchmarks.

// BenchmarkOTLPJSON reads and assembles about 20,000 generated spans.
// It reports spans/s and the bytes held per span once all inputs are
// added (before assembly).
func BenchmarkOTLPJSON(b *testing.B) {
	data, nSpans := genInput(2, 3000)
	held := heldPerSpan(b, data, nSpans)
	b.SetBytes(int64(len(data)))
	b.ReportAllocs()
	start := time.Now()
	for b.Loop() {
		c := NewSpanCollector(Options{})
		if err := c.Add("bench.jsonl", bytes.NewReader(data)); err != nil {
			b.Fatal(err)
		}
		if _, err := c.Source(); err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(float64(nSpans)*float64(b.N)/time.Since(start).Seconds(), "spans/s")
	b.ReportMetric(held, "bytes/span")
}

// heldPerSpan measures the live heap a collector holds per span.
func heldPerSpan(b *testing.B, data []byte, nSpans int) float64 {
	var before, after runtime.MemStats
	runtime.GC()
	runtime.GC()
	runtime.ReadMemStats(&before)
	c := NewSpanCollector(Options{})
	if err := c.Add("bench.jsonl", bytes.NewReader(data)); err != nil {
		b.Fatal(err)
	}
	runtime.GC()
	runtime.GC()
	runtime.ReadMemStats(&after)
	runtime.KeepAlive(c)
	return float64(int64(after.HeapAlloc)-int64(before.HeapAlloc)) / float64(nSpans)
}

// BenchmarkOTLPJSONProtojson is the baseline of the design's performance
// target: the same input decoded line by line into the official OTLP
// protobuf Go types with protojson (which reads the hex IDs as base64, so
// this only measures speed).
func BenchmarkOTLPJSONProtojson(b *testing.B) {
	data, nSpans := genInput(2, 3000)
	b.SetBytes(int64(len(data)))
	b.ReportAllocs()
	opts := protojson.UnmarshalOptions{DiscardUnknown: true}
	start := time.Now()
	for b.Loop() {
		n := 0
		for l := range bytes.SplitSeq(bytes.TrimSuffix(data, []byte("\n")), []byte("\n")) {
			var td tracepb.TracesData
			if err := opts.Unmarshal(l, &td); err != nil {
				b.Fatal(err)
			}
			for _, rs := range td.ResourceSpans {
				for _, ss := range rs.ScopeSpans {
					n += len(ss.Spans)
				}
			}
		}
		if n != nSpans {
			b.Fatalf("%d spans, want %d", n, nSpans)
		}
	}
	b.ReportMetric(float64(nSpans)*float64(b.N)/time.Since(start).Seconds(), "spans/s")
}

// ---------------------------------------------------------------------
// Fuzzing.

// FuzzOTLPJSON feeds arbitrary input to the reader: it must not panic or
// hang, and whatever it accepts must make a consistent Source.
func FuzzOTLPJSON(f *testing.F) {
	gen, _ := genInput(3, 2)
	f.Add(gen)
	f.Add([]byte(lines(line(tres{"api", []tspan{{trace: tr1, id: sA, name: "root", kind: 2, start: t0, end: t0 + sec, attrs: []attr{str("http.route", "/x")}},
		{trace: tr1, id: sB, parent: sA, name: "q", kind: 3, start: t0 + 1, end: t0 + 2, attrs: []attr{str("db.system", "mssql"), str("db.statement", "SELECT 1"), num("server.port", 1)}},
		{trace: tr1, id: sC, parent: sC, name: "loop", start: t0 + 3, end: t0 + 1}}}))))
	f.Add([]byte("{\n  \"resourceSpans\": [{\"scopeSpans\": [{\"spans\": [{\"traceId\": \"W47/95gDgQPSabYzgT/GDA==\", \"spanId\": \"7uGbfsPBsXQ=\", \"kind\": \"SPAN_KIND_CLIENT\"}]}]}]\n}\n"))
	f.Add([]byte(`{"resourceSpans":[{"resource":{"attributes":[{"key":"k","value":{"doubleValue":"NaN","arrayValue":{"values":[{"kvlistValue":{"values":[]}}]}}}]}}]}`))
	f.Fuzz(func(t *testing.T, data []byte) {
		run := func(opts Options) (*Source, error) {
			c := NewSpanCollector(opts)
			c.blockSize = 512
			if err := c.Add("fuzz", bytes.NewReader(data)); err != nil {
				return nil, err
			}
			return c.Source()
		}
		for _, opts := range []Options{
			{Limits: Limits{MaxLineBytes: 1 << 16, MaxDepth: 24, MaxFrames: 64}},
			{KeepGoing: true, Strict: true, Limits: Limits{MaxDepth: 24}},
			{KeepGoing: true, Service: "greenhouse-api"},
		} {
			opts.Workers = 1
			src1, err1 := run(opts)
			opts.Workers = 3
			src3, err3 := run(opts)
			if fmt.Sprint(err1) != fmt.Sprint(err3) {
				t.Fatalf("1 worker: %v; 3 workers: %v", err1, err3)
			}
			if err1 != nil {
				var pe *ParseError
				if !errors.As(err1, &pe) || pe.File != "fuzz" || len([]rune(pe.Snippet)) > 60 {
					t.Fatalf("error %v (%T) is not a *ParseError for the input", err1, err1)
				}
				continue
			}
			checkSource(t, src1)
			if !reflect.DeepEqual(digest(src1), digest(src3)) || !reflect.DeepEqual(src1.Warnings.Strings(), src3.Warnings.Strings()) {
				t.Fatal("1 and 3 workers give different sources")
			}
		}
	})
}

func jsonUnmarshalForTest(s string, v any) error { return json.Unmarshal([]byte(s), v) }

// checkSource fails unless src keeps the model's invariants.
func checkSource(t *testing.T, src *Source) {
	t.Helper()
	if src.Frames[0] != (Frame{}) || src.Calls[0] != (Call{}) || src.Requests[0] != "" || src.DurationNanos < 0 {
		t.Fatal("zero entries or duration broken")
	}
	for i := range src.Paths.Len() {
		p := src.Paths.At(i)
		if len(p.Frames) == 0 || len(p.Values) != 2 || p.Values[0] < 0 || p.Values[1] != 1 {
			t.Fatalf("path %d: %+v", i, p)
		}
		for _, f := range p.Frames {
			if f <= 0 || int(f) >= len(src.Frames) || !src.Frames[f].Span {
				t.Fatalf("path %d: frame %d out of range", i, f)
			}
		}
		if int(p.Call) >= len(src.Calls) || p.Request <= 0 || int(p.Request) >= len(src.Requests) {
			t.Fatalf("path %d: call or request out of range", i)
		}
	}
}

// TestSourceUsesUpCollector checks that Source hands the spans over once:
// a second Source, or an Add after it, is an error rather than an empty
// or partial source.
func TestSourceUsesUpCollector(t *testing.T) {
	c := NewSpanCollector(Options{})
	data := line(tres{"api", []tspan{{trace: tr1, id: sA, name: "root", kind: 2, start: t0, end: t0 + sec}}})
	if err := c.Add("a.jsonl", strings.NewReader(data)); err != nil {
		t.Fatal(err)
	}
	if src, err := c.Source(); err != nil || src.Paths.Len() != 1 {
		t.Fatalf("first Source: %v", err)
	}
	if _, err := c.Source(); err == nil {
		t.Error("second Source succeeded")
	}
	if err := c.Add("b.jsonl", strings.NewReader(data)); err == nil {
		t.Error("Add after Source succeeded")
	}
}

func TestStatementHook(t *testing.T) {
	// Options.Statement appends into a buffer that the decoder reuses for
	// every span, and a cache serves repeated statements until it stops
	// paying. Every call must still carry the normalised text of its own
	// span: first repeated statements (served by the cache), then
	// thousands of distinct ones (the cache switches itself off).
	normalise := func(dst []byte, system, raw string) []byte {
		for i := range len(raw) {
			if c := raw[i]; '0' <= c && c <= '9' {
				dst = append(dst, '#')
			} else {
				dst = append(dst, c)
			}
		}
		return append(dst, " /* "+system+" */"...)
	}
	const n = 12_000
	want := map[string]int{}
	var ls []string
	var spans []tspan
	for i := range n {
		raw := fmt.Sprintf("SELECT a FROM t%d WHERE x = 1", i%10)
		if i >= 3000 {
			raw = fmt.Sprintf("SELECT b FROM u WHERE id = %d AND tag = '%x'", i*7919%100_003, i)
		}
		want[string(normalise(nil, "sqlite", raw))]++
		trace := fmt.Sprintf("%032x", i/20+1)
		spans = append(spans, tspan{trace: trace, id: fmt.Sprintf("%016x", i+1), name: "query", kind: 3,
			start: int64(i), end: int64(i) + 10, attrs: []attr{str("db.system.name", "sqlite"), str("db.query.text", raw)}})
		if len(spans) == 20 {
			ls = append(ls, line(tres{"greenhouse-api", spans}))
			spans = nil
		}
	}
	for _, workers := range []int{1, 3} {
		t.Run(fmt.Sprintf("%d workers", workers), func(t *testing.T) {
			src := mustCollect(t, Options{Statement: normalise, Workers: workers}, input{"q.jsonl", lines(ls...)})
			got := map[string]int{}
			for i := range src.Paths.Len() {
				if p := src.Paths.At(i); p.Call != 0 {
					got[src.Calls[p.Call].Statement]++
				}
			}
			if !reflect.DeepEqual(got, want) {
				t.Errorf("calls by statement differ: %d distinct, want %d", len(got), len(want))
				for s, k := range got {
					if want[s] != k {
						t.Errorf("%q: %d calls, want %d", s, k, want[s])
						break
					}
				}
			}
		})
	}
}

func TestParseInt(t *testing.T) {
	// Plain digits take a fast path; the rest go to strconv. The proto3
	// JSON mapping also accepts an integral number in exponent form.
	for _, tc := range []struct {
		in   string
		want int64
		ok   bool
	}{
		{"0", 0, true},
		{"8080", 8080, true},
		{"000123", 123, true},
		{"1780488000048243810", 1780488000048243810, true}, // a timestamp: 19 digits
		{"9223372036854775807", math.MaxInt64, true},
		{"9223372036854775808", 0, false},
		{"9999999999999999999", 0, false},
		{"18446744073709551616", 0, false},
		{"-42", -42, true},
		{"+7", 7, true},
		{"1e3", 1000, true},
		{"1.5", 0, false},
		{"", 0, false},
		{"12a", 0, false},
	} {
		got, ok := parseInt(tc.in)
		if got != tc.want || ok != tc.ok {
			t.Errorf("parseInt(%q) = %d, %v; want %d, %v", tc.in, got, ok, tc.want, tc.ok)
		}
		if want, err := strconv.ParseInt(tc.in, 10, 64); err == nil && (got != want || !ok) {
			t.Errorf("parseInt(%q) = %d, %v; strconv.ParseInt gives %d", tc.in, got, ok, want)
		}
	}
}

func TestPeersInTurn(t *testing.T) {
	// Spans of one job call several peers in turn, more than the decoder
	// remembers: every call must still name its own host:port.
	hosts := []string{"db-a", "db-b", "rates.carrier.test", "db-a", "cache", "db-c", "db-d", "db-b"}
	ports := []int64{5432, 5432, 443, 5433, 6379, 5432, 5432, 5432}
	var spans []tspan
	want := map[string]bool{}
	for i := range 40 {
		h, p := hosts[i%len(hosts)], ports[i%len(ports)]
		want[fmt.Sprintf("%d %s", i+1, net.JoinHostPort(h, strconv.FormatInt(p, 10)))] = true
		spans = append(spans, tspan{trace: "0af7651916cd43dd8448eb211c80319c", id: fmt.Sprintf("%016x", i+1), name: "query", kind: 3,
			start: int64(i + 1), end: int64(i + 2), attrs: []attr{str("db.system.name", "postgresql"), str("server.address", h), num("server.port", p)}})
	}
	src := mustCollect(t, Options{Strict: true}, input{"p.jsonl", lines(line(tres{"greenhouse-api", spans}))})
	got := map[string]bool{}
	for i := range src.Paths.Len() {
		p := src.Paths.At(i)
		got[fmt.Sprintf("%d %s", i+1, src.Calls[p.Call].Peer)] = true // paths are in start order
	}
	if !reflect.DeepEqual(got, want) {
		t.Errorf("calls by span:\n%v\nwant\n%v", got, want)
	}
}
