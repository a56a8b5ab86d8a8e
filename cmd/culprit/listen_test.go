package main

import (
	"bytes"
	"context"
	"encoding/base64"
	"encoding/binary"
	"encoding/hex"
	"encoding/json"
	"fmt"
	"hash/crc32"
	"io"
	"net/http"
	"net/http/httptest"
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"sync"
	"sync/atomic"
	"testing"
	"time"

	"go.opentelemetry.io/otel/attribute"
	"go.opentelemetry.io/otel/exporters/otlp/otlptrace/otlptracegrpc"
	"go.opentelemetry.io/otel/exporters/otlp/otlptrace/otlptracehttp"
	"go.opentelemetry.io/otel/sdk/resource"
	sdktrace "go.opentelemetry.io/otel/sdk/trace"
	oteltrace "go.opentelemetry.io/otel/trace"
	coltracepb "go.opentelemetry.io/proto/otlp/collector/trace/v1"
	commonpb "go.opentelemetry.io/proto/otlp/common/v1"
	resourcepb "go.opentelemetry.io/proto/otlp/resource/v1"
	tracepb "go.opentelemetry.io/proto/otlp/trace/v1"
	"google.golang.org/grpc"
	"google.golang.org/grpc/credentials/insecure"
	"google.golang.org/protobuf/encoding/protojson"
	"google.golang.org/protobuf/proto"
)

// listener is a `culprit listen` run inside the test.
type listener struct {
	httpAddr, grpcAddr string
	cancel             context.CancelFunc
	done               chan error
	stderr             *syncBuffer
}

// startListen runs `culprit listen ARGS` on ephemeral loopback ports;
// setup may change the options before it starts.
func startListen(t testing.TB, setup func(*listenOptions), args ...string) *listener {
	t.Helper()
	s, _, _ := testStreams("")
	errb := &syncBuffer{}
	s.Err = errb
	ctx, cancel := context.WithCancel(context.Background())
	l := &listener{cancel: cancel, done: make(chan error, 1), stderr: errb}
	ready := make(chan struct{})
	cmd := newListenCmd(s, func(ctx context.Context, o *listenOptions) error {
		o.signals = make(chan os.Signal)
		o.ready = func(h, g string) {
			l.httpAddr, l.grpcAddr = h, g
			close(ready)
		}
		if setup != nil {
			setup(o)
		}
		return runListen(ctx, o)
	})
	cmd.SetArgs(append([]string{"--http", "127.0.0.1:0", "--grpc", "127.0.0.1:0", "--quiet"}, args...))
	go func() { l.done <- cmd.ExecuteContext(ctx) }()
	select {
	case <-ready:
	case err := <-l.done:
		t.Fatalf("listen ended before serving: %v\n%s", err, errb)
	}
	t.Cleanup(cancel)
	return l
}

// stop stops the listener as SIGTERM does and waits for its report.
func (l *listener) stop(t testing.TB) {
	t.Helper()
	l.cancel()
	if err := <-l.done; err != nil {
		t.Fatalf("listen: %v\n%s", err, l.stderr)
	}
}

// bodyStore is a plain OTLP/HTTP receiver for the reference copy of the
// spans: it keeps every request as the official types decode it.
type bodyStore struct {
	mu   sync.Mutex
	reqs []*coltracepb.ExportTraceServiceRequest
}

func (b *bodyStore) ServeHTTP(w http.ResponseWriter, r *http.Request) {
	data, err := io.ReadAll(r.Body)
	req := &coltracepb.ExportTraceServiceRequest{}
	if err == nil {
		err = proto.Unmarshal(data, req)
	}
	if err != nil {
		http.Error(w, err.Error(), http.StatusBadRequest)
		return
	}
	b.mu.Lock()
	b.reqs = append(b.reqs, req)
	b.mu.Unlock()
	out, _ := proto.Marshal(&coltracepb.ExportTraceServiceResponse{})
	w.Header().Set("Content-Type", "application/x-protobuf")
	w.Write(out)
}

// writeOTLPJSON writes requests as canonical OTLP/JSON lines: protojson
// with enum numbers, trace and span IDs rewritten from base64 to hex as
// the OTLP specification requires (opentelemetry-proto
// docs/specification.md, "JSON Protobuf Encoding").
func writeOTLPJSON(t *testing.T, path string, reqs []*coltracepb.ExportTraceServiceRequest) {
	t.Helper()
	var out bytes.Buffer
	for _, req := range reqs {
		b, err := protojson.MarshalOptions{UseEnumNumbers: true}.Marshal(req)
		if err != nil {
			t.Fatal(err)
		}
		dec := json.NewDecoder(bytes.NewReader(b))
		dec.UseNumber()
		var tree any
		if err := dec.Decode(&tree); err != nil {
			t.Fatal(err)
		}
		hexIDs(t, tree)
		line, err := json.Marshal(tree)
		if err != nil {
			t.Fatal(err)
		}
		out.Write(line)
		out.WriteByte('\n')
	}
	if err := os.WriteFile(path, out.Bytes(), 0o644); err != nil {
		t.Fatal(err)
	}
}

func hexIDs(t *testing.T, v any) {
	switch v := v.(type) {
	case map[string]any:
		for k, x := range v {
			if s, ok := x.(string); ok && (k == "traceId" || k == "spanId" || k == "parentSpanId") {
				raw, err := base64.StdEncoding.DecodeString(s)
				if err != nil {
					t.Fatal(err)
				}
				v[k] = hex.EncodeToString(raw)
				continue
			}
			hexIDs(t, x)
		}
	case []any:
		for _, x := range v {
			hexIDs(t, x)
		}
	}
}

// makeSpans records traces of an invented plant-nursery shop with the
// official OpenTelemetry Go SDK from several goroutines, three spans a
// trace, until n spans are made.
func makeSpans(tp *sdktrace.TracerProvider, n, goroutines int) {
	tr := tp.Tracer("example.com/greenhouse")
	var wg sync.WaitGroup
	per := n / 3 / goroutines
	for g := range goroutines {
		wg.Go(func() {
			for i := range per {
				ctx, srv := tr.Start(context.Background(), "GET /plants/{id}", oteltrace.WithSpanKind(oteltrace.SpanKindServer),
					oteltrace.WithAttributes(attribute.String("http.route", "/plants/{id}"), attribute.String("http.request.method", "GET")))
				fn := "example.com/greenhouse/catalog.(*Repo).VarietyByID"
				if (g+i)%4 == 0 {
					fn = "example.com/greenhouse/catalog.(*Tree).expand"
				}
				ctx, in := tr.Start(ctx, "VarietyByID", oteltrace.WithAttributes(attribute.String("code.function.name", fn)))
				_, db := tr.Start(ctx, "SELECT varieties", oteltrace.WithSpanKind(oteltrace.SpanKindClient),
					oteltrace.WithAttributes(attribute.String("db.system.name", "postgresql"),
						attribute.String("db.query.text", fmt.Sprintf("SELECT name FROM varieties WHERE id = %d", i%50))))
				db.End()
				in.End()
				srv.End()
			}
		})
	}
	wg.Wait()
}

// reportDoc reads a JSON report without what names its inputs.
func reportDoc(t *testing.T, path string) map[string]any {
	t.Helper()
	doc := jsonDoc(t, path)
	delete(doc, "producedBy")
	delete(doc, "inputs")
	// Warnings keep their kind and count; their examples name the input
	// file and line.
	if ws, ok := doc["warnings"].([]any); ok {
		for i, w := range ws {
			if s, ok := w.(string); ok {
				ws[i], _, _ = strings.Cut(s, " (e.g. ")
			}
		}
	}
	return doc
}

// TestListenSDKExporters: the official OpenTelemetry Go SDK exporters
// (otlptracehttp and otlptracegrpc, with and without gzip) send spans in
// many batches from concurrent goroutines; after the stop the capture
// holds every span and the report equals `culprit rank` on the same
// spans as an OTLP/JSON file (made from the requests that the same SDK
// sent to a plain receiver decoding them with the official types).
func TestListenSDKExporters(t *testing.T) {
	n := 100_008 // a multiple of 3 spans × 8 goroutines
	if testing.Short() {
		n = 3_000
	}
	for _, tc := range []struct {
		name string
		gzip bool
		grpc bool
	}{{"http", false, false}, {"http-gzip", true, false}, {"grpc", false, true}, {"grpc-gzip", true, true}} {
		t.Run(tc.name, func(t *testing.T) {
			dir := t.TempDir()
			capDir := filepath.Join(dir, "capture")
			report := filepath.Join(dir, "listen.json")
			l := startListen(t, nil, "--dir", capDir, "--format", "json", "-o", report)
			ctx := context.Background()
			var exp sdktrace.SpanExporter
			var err error
			if tc.grpc {
				o := []otlptracegrpc.Option{otlptracegrpc.WithEndpoint(l.grpcAddr), otlptracegrpc.WithInsecure()}
				if tc.gzip {
					o = append(o, otlptracegrpc.WithCompressor("gzip"))
				}
				exp, err = otlptracegrpc.New(ctx, o...)
			} else {
				o := []otlptracehttp.Option{otlptracehttp.WithEndpoint(l.httpAddr), otlptracehttp.WithInsecure()}
				if tc.gzip {
					o = append(o, otlptracehttp.WithCompression(otlptracehttp.GzipCompression))
				}
				exp, err = otlptracehttp.New(ctx, o...)
			}
			if err != nil {
				t.Fatal(err)
			}
			store := &bodyStore{}
			ref := httptest.NewServer(store)
			defer ref.Close()
			refExp, err := otlptracehttp.New(ctx, otlptracehttp.WithEndpointURL(ref.URL+"/v1/traces"))
			if err != nil {
				t.Fatal(err)
			}
			tp := sdktrace.NewTracerProvider(
				sdktrace.WithResource(resource.NewSchemaless(attribute.String("service.name", "greenhouse-api"))),
				sdktrace.WithBatcher(exp, sdktrace.WithBlocking(), sdktrace.WithMaxExportBatchSize(500)),
				sdktrace.WithBatcher(refExp, sdktrace.WithBlocking(), sdktrace.WithMaxExportBatchSize(500)))
			makeSpans(tp, n, 8)
			if err := tp.Shutdown(ctx); err != nil {
				t.Fatal(err)
			}
			l.stop(t)

			jsonl := filepath.Join(dir, "same-spans.jsonl")
			writeOTLPJSON(t, jsonl, store.reqs)
			if len(store.reqs) < 5 {
				t.Fatalf("only %d batches", len(store.reqs))
			}
			rankOut := filepath.Join(dir, "rank.json")
			if code, _, errOut := runTest(t, "", "rank", "--format", "json", "-o", rankOut, jsonl); code != 0 {
				t.Fatalf("rank: %s", errOut)
			}
			got, want := reportDoc(t, report), reportDoc(t, rankOut)
			if !reflect.DeepEqual(got, want) {
				g, _ := json.MarshalIndent(got, "", " ")
				w, _ := json.MarshalIndent(want, "", " ")
				t.Fatalf("listen's report differs from rank's:\n%.3000s\nwant\n%.3000s", g, w)
			}
			// Every span is in the capture.
			if spans := captureSpans(t, capDir); len(spans) != n {
				t.Fatalf("capture holds %d spans, want %d", len(spans), n)
			}
		})
	}
}

// captureSpans reads a capture's trace records with the official types
// and returns the span IDs (trace ID + span ID) it holds.
func captureSpans(t *testing.T, dir string) map[string]bool {
	t.Helper()
	segs, _ := filepath.Glob(filepath.Join(dir, "*.culprit-capture"))
	ids := map[string]bool{}
	for _, seg := range segs {
		data, err := os.ReadFile(seg)
		if err != nil {
			t.Fatal(err)
		}
		for _, rec := range segmentRecords(t, data) {
			req := &coltracepb.ExportTraceServiceRequest{}
			if rec.json {
				err = protojson.Unmarshal(rec.data, req)
			} else {
				err = proto.Unmarshal(rec.data, req)
			}
			if err != nil {
				t.Fatalf("%s: %v", seg, err)
			}
			for _, rs := range req.ResourceSpans {
				for _, ss := range rs.ScopeSpans {
					for _, sp := range ss.Spans {
						ids[string(sp.TraceId)+string(sp.SpanId)] = true
					}
				}
			}
		}
	}
	return ids
}

type segRecord struct {
	json bool
	data []byte
}

// segmentRecords reads a segment by its documented layout (package
// capture's doc): a 40-byte header starting with the magic, then length,
// CRC-32C, type and payload per record. A torn last record ends it.
func segmentRecords(t *testing.T, data []byte) []segRecord {
	t.Helper()
	if len(data) < 40 || string(data[:12]) != "\x89culpcap\r\n\x1a\n" {
		t.Fatalf("no segment header")
	}
	var out []segRecord
	for off := 40; off+9 <= len(data); {
		n := int(binary.LittleEndian.Uint32(data[off:]))
		if off+9+n > len(data) {
			break // torn
		}
		body := data[off+8 : off+9+n]
		if crc32.Checksum(body, crc32.MakeTable(crc32.Castagnoli)) != binary.LittleEndian.Uint32(data[off+4:]) {
			break
		}
		if body[0] == 1 || body[0] == 2 {
			out = append(out, segRecord{json: body[0] == 2, data: body[1:]})
		}
		off += 9 + n
	}
	return out
}

// BenchmarkListen measures spans accepted and stored per second (each
// request synced before it is acknowledged, the default) from 4
// concurrent senders on loopback, with requests of 500 spans of three
// per trace, as protobuf and as OTLP/JSON.
func BenchmarkListen(b *testing.B) {
	for _, media := range []string{mediaProto, mediaJSON} {
		b.Run(media[len("application/"):], func(b *testing.B) {
			l := startListen(b, nil, "--dir", filepath.Join(b.TempDir(), "capture"), "--max-inflight", "16")
			bodies := make([][]byte, 64)
			for i := range bodies {
				req := benchRequest(i, 500)
				if media == mediaJSON {
					js, err := protojson.MarshalOptions{UseEnumNumbers: true}.Marshal(req)
					if err != nil {
						b.Fatal(err)
					}
					bodies[i] = js
				} else {
					bodies[i] = marshal(b, req)
				}
			}
			var next, refused atomic.Int64
			start := time.Now()
			b.ResetTimer()
			var wg sync.WaitGroup
			for range 4 {
				wg.Go(func() {
					client := &http.Client{}
					for {
						i := next.Add(1)
						if i > int64(b.N) {
							return
						}
						resp, err := client.Post("http://"+l.httpAddr+"/v1/traces", media, bytes.NewReader(bodies[i%64]))
						if err != nil {
							b.Error(err)
							return
						}
						io.Copy(io.Discard, resp.Body)
						resp.Body.Close()
						if resp.StatusCode != 200 {
							refused.Add(1)
						}
					}
				})
			}
			wg.Wait()
			b.StopTimer()
			b.ReportMetric(float64(b.N)*500/time.Since(start).Seconds(), "spans/s")
			if refused.Load() > 0 {
				b.Fatalf("%d requests refused", refused.Load())
			}
			l.cancel()
			<-l.done
		})
	}
}

// BenchmarkListenGRPC is BenchmarkListen over OTLP/gRPC (the official
// generated client, one connection, 4 goroutines).
func BenchmarkListenGRPC(b *testing.B) {
	l := startListen(b, nil, "--dir", filepath.Join(b.TempDir(), "capture"), "--max-inflight", "16")
	conn, err := grpc.NewClient(l.grpcAddr, grpc.WithTransportCredentials(insecure.NewCredentials()))
	if err != nil {
		b.Fatal(err)
	}
	defer conn.Close()
	client := coltracepb.NewTraceServiceClient(conn)
	reqs := make([]*coltracepb.ExportTraceServiceRequest, 64)
	for i := range reqs {
		reqs[i] = benchRequest(i, 500)
	}
	var next atomic.Int64
	start := time.Now()
	b.ResetTimer()
	var wg sync.WaitGroup
	for range 4 {
		wg.Go(func() {
			for {
				i := next.Add(1)
				if i > int64(b.N) {
					return
				}
				if _, err := client.Export(context.Background(), reqs[i%64]); err != nil {
					b.Error(err)
					return
				}
			}
		})
	}
	wg.Wait()
	b.StopTimer()
	b.ReportMetric(float64(b.N)*500/time.Since(start).Seconds(), "spans/s")
	l.cancel()
	<-l.done
}

// benchRequest is n spans of traces like the greenhouse shop's: a server
// span, an application span and a database call each.
func benchRequest(seq, n int) *coltracepb.ExportTraceServiceRequest {
	str := func(k, v string) *commonpb.KeyValue {
		return &commonpb.KeyValue{Key: k, Value: &commonpb.AnyValue{Value: &commonpb.AnyValue_StringValue{StringValue: v}}}
	}
	var spans []*tracepb.Span
	for i := range n {
		trace := []byte(fmt.Sprintf("t%05d-%09d", seq, i/3))
		id := func(k int) []byte { return []byte(fmt.Sprintf("%07d%d", i/3, k)) }
		sp := &tracepb.Span{TraceId: trace, SpanId: id(i % 3), StartTimeUnixNano: 1_700_000_000_000_000_000 + uint64(i), EndTimeUnixNano: 1_700_000_000_100_000_000}
		switch i % 3 {
		case 0:
			sp.Name, sp.Kind = "GET /plants/{id}", tracepb.Span_SPAN_KIND_SERVER
			sp.Attributes = []*commonpb.KeyValue{str("http.route", "/plants/{id}"), str("http.request.method", "GET")}
		case 1:
			sp.Name, sp.ParentSpanId = "VarietyByID", id(0)
			sp.Attributes = []*commonpb.KeyValue{str("code.function.name", "example.com/greenhouse/catalog.(*Repo).VarietyByID")}
		case 2:
			sp.Name, sp.Kind, sp.ParentSpanId = "SELECT varieties", tracepb.Span_SPAN_KIND_CLIENT, id(1)
			sp.Attributes = []*commonpb.KeyValue{str("db.system.name", "postgresql"), str("db.query.text", "SELECT name FROM varieties WHERE id = $1")}
		}
		spans = append(spans, sp)
	}
	return &coltracepb.ExportTraceServiceRequest{ResourceSpans: []*tracepb.ResourceSpans{{
		Resource:   &resourcepb.Resource{Attributes: []*commonpb.KeyValue{str("service.name", "greenhouse-api")}},
		ScopeSpans: []*tracepb.ScopeSpans{{Spans: spans}}}}}
}
