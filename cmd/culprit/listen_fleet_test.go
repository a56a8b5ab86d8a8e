package main

import (
	"context"
	"encoding/binary"
	"encoding/json"
	"errors"
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"testing"

	"go.opentelemetry.io/otel/attribute"
	"go.opentelemetry.io/otel/exporters/otlp/otlptrace/otlptracehttp"
	"go.opentelemetry.io/otel/sdk/resource"
	sdktrace "go.opentelemetry.io/otel/sdk/trace"
)

// traceIDRouter sends each span to one of several exporters by its trace
// ID, so that every exporter gets whole traces: what a trace-ID-aware
// load balancer in front of several listeners does.
type traceIDRouter struct{ to []sdktrace.SpanExporter }

func (r traceIDRouter) ExportSpans(ctx context.Context, spans []sdktrace.ReadOnlySpan) error {
	parts := make([][]sdktrace.ReadOnlySpan, len(r.to))
	for _, s := range spans {
		tid := s.SpanContext().TraceID()
		k := binary.BigEndian.Uint64(tid[8:]) % uint64(len(r.to))
		parts[k] = append(parts[k], s)
	}
	var errs []error
	for k, p := range parts {
		if len(p) > 0 {
			errs = append(errs, r.to[k].ExportSpans(ctx, p))
		}
	}
	return errors.Join(errs...)
}

func (r traceIDRouter) Shutdown(ctx context.Context) error {
	var errs []error
	for _, e := range r.to {
		errs = append(errs, e.Shutdown(ctx))
	}
	return errors.Join(errs...)
}

// TestListenFleetMerge: spans split by trace ID across 3 listeners give
// snapshots that merge to exactly the snapshot of one listener that got
// them all; and merge refuses to add a snapshot to itself.
func TestListenFleetMerge(t *testing.T) {
	n := 30_000
	if testing.Short() {
		n = 3_000
	}
	dir := t.TempDir()
	ctx := context.Background()
	newExporter := func(l *listener) sdktrace.SpanExporter {
		exp, err := otlptracehttp.New(ctx, otlptracehttp.WithEndpoint(l.httpAddr), otlptracehttp.WithInsecure())
		if err != nil {
			t.Fatal(err)
		}
		return exp
	}
	var shards []*listener
	var router traceIDRouter
	for k := range 3 {
		l := startListen(t, nil, "--dir", filepath.Join(dir, "cap", string(rune('a'+k))), "--save", filepath.Join(dir, string(rune('a'+k))+".snapshot.json"), "-o", filepath.Join(dir, "report.txt"))
		shards = append(shards, l)
		router.to = append(router.to, newExporter(l))
	}
	single := startListen(t, nil, "--dir", filepath.Join(dir, "cap", "all"), "--save", filepath.Join(dir, "all.snapshot.json"), "-o", filepath.Join(dir, "report.txt"))
	tp := sdktrace.NewTracerProvider(
		sdktrace.WithResource(resource.NewSchemaless(attribute.String("service.name", "greenhouse-api"))),
		sdktrace.WithBatcher(router, sdktrace.WithBlocking()),
		sdktrace.WithBatcher(newExporter(single), sdktrace.WithBlocking()))
	makeSpans(tp, n, 4)
	if err := tp.Shutdown(ctx); err != nil {
		t.Fatal(err)
	}
	for _, l := range append(shards, single) {
		l.stop(t)
	}
	merged := filepath.Join(dir, "merged.snapshot.json")
	if code, _, errOut := runTest(t, "", "merge", filepath.Join(dir, "a.snapshot.json"), filepath.Join(dir, "b.snapshot.json"),
		filepath.Join(dir, "c.snapshot.json"), "-o", merged); code != 0 {
		t.Fatalf("merge: %s", errOut)
	}
	got, want := jsonDoc(t, merged), jsonDoc(t, filepath.Join(dir, "all.snapshot.json"))
	if causes, _ := want["rootCauses"].([]any); len(causes) < 2 {
		t.Fatalf("one listener's snapshot has %d root causes; the workload has 2", len(causes))
	}
	for _, k := range []string{"totals", "rootCauses", "entryPoints", "findings"} {
		if !reflect.DeepEqual(got[k], want[k]) {
			g, _ := json.MarshalIndent(got[k], "", " ")
			w, _ := json.MarshalIndent(want[k], "", " ")
			t.Errorf("%s of the merged shards differ from one listener's:\n%.2000s\nwant\n%.2000s", k, g, w)
		}
	}
	// The same data twice is refused.
	code, _, errOut := runTest(t, "", "merge", filepath.Join(dir, "a.snapshot.json"), filepath.Join(dir, "a.snapshot.json"))
	if code != exitError || !strings.Contains(errOut, "twice") {
		t.Fatalf("merging a snapshot with itself: exit %d: %s", code, errOut)
	}
}

// jsonDoc reads a JSON document.
func jsonDoc(t *testing.T, path string) map[string]any {
	t.Helper()
	data, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	var doc map[string]any
	if err := json.Unmarshal(data, &doc); err != nil {
		t.Fatal(err)
	}
	return doc
}
