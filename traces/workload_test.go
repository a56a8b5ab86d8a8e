package traces_test

import (
	"context"
	"database/sql"
	"fmt"
	"io"
	"net/http"
	"net/http/httptest"
	"net/url"
	"strings"
	"testing"

	"github.com/culprithq/culprit/attribute"
	"github.com/culprithq/culprit/callgraph"
	"github.com/culprithq/culprit/traces"
	otelattr "go.opentelemetry.io/otel/attribute"
	sdkresource "go.opentelemetry.io/otel/sdk/resource"
	sdktrace "go.opentelemetry.io/otel/sdk/trace"
	"go.opentelemetry.io/otel/sdk/trace/tracetest"
	"go.opentelemetry.io/otel/trace"
	_ "modernc.org/sqlite" // pure-Go SQLite: real queries without cgo
)

// shop is a small instrumented service: every database query and HTTP
// request it makes is real, and every span comes from the official
// OpenTelemetry Go SDK.
type shop struct {
	t      *testing.T
	tracer trace.Tracer
	db     *sql.DB
	rates  *httptest.Server
	client *http.Client
}

func (s *shop) code(ctx context.Context, fn string) (context.Context, trace.Span) {
	return s.tracer.Start(ctx, fn[strings.LastIndexByte(fn, '.')+1:], trace.WithAttributes(
		otelattr.String("code.function.name", "example.com/nursery/"+fn)))
}

// query runs a real SQLite query inside a CLIENT span carrying the
// database semantic conventions (v1.44.0 names).
func (s *shop) query(ctx context.Context, stmt string, args ...any) {
	_, span := s.tracer.Start(ctx, "SELECT", trace.WithSpanKind(trace.SpanKindClient), trace.WithAttributes(
		otelattr.String("db.system.name", "sqlite"), otelattr.String("db.query.text", stmt),
		otelattr.String("db.operation.name", "SELECT")))
	defer span.End()
	rows, err := s.db.QueryContext(ctx, stmt, args...)
	if err != nil {
		s.t.Fatal(err)
	}
	for rows.Next() {
	}
	rows.Close()
}

// get makes a real HTTP request to the loopback server inside a CLIENT span.
func (s *shop) get(ctx context.Context, path string) {
	u, _ := url.Parse(s.rates.URL + path)
	_, span := s.tracer.Start(ctx, "GET", trace.WithSpanKind(trace.SpanKindClient), trace.WithAttributes(
		otelattr.String("http.request.method", "GET"), otelattr.String("url.full", u.String()),
		otelattr.String("server.address", u.Hostname()), otelattr.String("server.port", u.Port())))
	defer span.End()
	resp, err := s.client.Get(u.String())
	if err != nil {
		s.t.Fatal(err)
	}
	io.Copy(io.Discard, resp.Body)
	resp.Body.Close()
}

// The planted patterns, per request.
const (
	loopItems   = 8 // listVarieties: one query per item (repeated statement)
	treeDepth   = 3 // expandCategory: recursion, one query per level
	quotedLines = 6 // quoteLines: one HTTP call per cart line
	requests    = 12
)

func (s *shop) listVarieties(ctx context.Context) {
	ctx, span := s.code(ctx, "catalog.listVarieties")
	defer span.End()
	for id := 1; id <= loopItems; id++ {
		s.query(ctx, fmt.Sprintf("SELECT name FROM varieties WHERE id = %d", id))
	}
}

func (s *shop) expandCategory(ctx context.Context, depth int) {
	ctx, span := s.code(ctx, "catalog.expandCategory")
	defer span.End()
	s.query(ctx, "SELECT id FROM categories WHERE parent = ?", depth)
	if depth > 1 {
		s.expandCategory(ctx, depth-1)
	}
}

func (s *shop) quoteLines(ctx context.Context) {
	ctx, span := s.code(ctx, "checkout.quoteLines")
	defer span.End()
	for line := 1; line <= quotedLines; line++ {
		s.get(ctx, fmt.Sprintf("/rate?line=%d", line))
	}
}

// TestWorkloadFindings runs a real workload (SQLite through database/sql,
// a loopback HTTP server, spans from the official OpenTelemetry Go SDK,
// converted into the official OTLP protobuf types and encoded as OTLP/JSON)
// and checks that culprit's three findings name the planted functions
// with the exact per-request counts the workload made.
func TestWorkloadFindings(t *testing.T) {
	db, err := sql.Open("sqlite", ":memory:")
	if err != nil {
		t.Fatal(err)
	}
	defer db.Close()
	db.SetMaxOpenConns(1)
	for _, stmt := range []string{
		"CREATE TABLE varieties (id INTEGER PRIMARY KEY, name TEXT)",
		"CREATE TABLE categories (id INTEGER PRIMARY KEY, parent INTEGER)",
		"INSERT INTO varieties VALUES (1,'fern'),(2,'moss'),(3,'ivy'),(4,'sage'),(5,'mint'),(6,'aloe'),(7,'fig'),(8,'yew')",
		"INSERT INTO categories VALUES (1,0),(2,1),(3,2)",
	} {
		if _, err := db.Exec(stmt); err != nil {
			t.Fatal(err)
		}
	}
	rates := httptest.NewServer(http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) { io.WriteString(w, "4.20") }))
	defer rates.Close()

	rec := tracetest.NewSpanRecorder()
	tp := sdktrace.NewTracerProvider(sdktrace.WithSpanProcessor(rec),
		sdktrace.WithResource(sdkresource.NewSchemaless(otelattr.String("service.name", "nursery"))))
	s := &shop{t: t, tracer: tp.Tracer("nursery"), db: db, rates: rates, client: rates.Client()}
	for range requests {
		ctx, root := s.tracer.Start(context.Background(), "GET /catalog", trace.WithSpanKind(trace.SpanKindServer),
			trace.WithAttributes(otelattr.String("http.request.method", "GET"), otelattr.String("http.route", "/catalog")))
		s.listVarieties(ctx)
		s.expandCategory(ctx, treeDepth)
		s.quoteLines(ctx)
		root.End()
	}

	data := traces.SDKSpansToOTLPJSON(t, rec.Ended())
	l := traces.NewLoader(traces.Options{})
	if err := l.Add("workload.jsonl", strings.NewReader(data)); err != nil {
		t.Fatal(err)
	}
	src, err := l.Source()
	if err != nil {
		t.Fatal(err)
	}
	cls := attribute.NewClassifier(src, attribute.DefaultRules())
	res := attribute.Attribute(callgraph.NewTree(src, callgraph.TreeOptions{Keep: cls.Keep}), cls, attribute.Options{})

	if res.Totals.Requests != requests {
		t.Errorf("requests = %d, want %d", res.Totals.Requests, requests)
	}
	// Exact call counts charged to each root cause.
	wantCalls := map[string]int64{
		"example.com/nursery/catalog.listVarieties":  loopItems * requests,
		"example.com/nursery/catalog.expandCategory": treeDepth * requests,
		"example.com/nursery/checkout.quoteLines":    quotedLines * requests,
	}
	for _, c := range res.Causes {
		want, ok := wantCalls[c.Function]
		if !ok {
			t.Errorf("unexpected root cause %s", c.Function)
			continue
		}
		if c.Calls != want || c.Requests != requests {
			t.Errorf("%s: %d calls in %d requests, want %d in %d", c.Function, c.Calls, c.Requests, want, requests)
		}
		delete(wantCalls, c.Function)
	}
	if len(wantCalls) > 0 {
		t.Errorf("missing root causes: %v", wantCalls)
	}

	found := map[string]attribute.Finding{}
	for _, f := range res.Findings {
		found[f.Kind+" "+f.Function] = f
	}
	rep, ok := found["repeated-statement example.com/nursery/catalog.listVarieties"]
	if !ok || rep.PerRequest.Median != loopItems || rep.Requests != requests ||
		rep.Statement != "select name from varieties where id = ?" {
		t.Errorf("repeated-statement = %+v (ok %v)", rep, ok)
	}
	recur, ok := found["recursive-access example.com/nursery/catalog.expandCategory"]
	if !ok || recur.Depth != treeDepth {
		t.Errorf("recursive-access = %+v (ok %v), want depth %d", recur, ok, treeDepth)
	}
	item, ok := found["per-item-calls example.com/nursery/checkout.quoteLines"]
	if !ok || item.PerRequest.Median != quotedLines || item.PerRequest.Max != quotedLines ||
		!strings.HasPrefix(item.Peer, "127.0.0.1:") {
		t.Errorf("per-item-calls = %+v (ok %v)", item, ok)
	}
	if len(res.Findings) != 3 {
		t.Errorf("findings = %+v, want exactly the three planted ones", res.Findings)
	}
	// Literals never reach the result: the fingerprint replaced every id.
	for _, c := range res.Causes {
		for _, d := range c.Statements {
			if strings.ContainsAny(d.Statement, "12345678") && d.Kind == attribute.KindDatabase {
				t.Errorf("literal leaked: %q", d.Statement)
			}
		}
	}
}
