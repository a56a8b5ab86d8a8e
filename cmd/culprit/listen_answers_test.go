package main

import (
	"bytes"
	"context"
	"fmt"
	"io"
	"net"
	"net/http"
	"net/http/httptest"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"sync/atomic"
	"syscall"
	"testing"
	"time"

	"github.com/culprithq/culprit/traces/capture"
	coltracepb "go.opentelemetry.io/proto/otlp/collector/trace/v1"
	tracepb "go.opentelemetry.io/proto/otlp/trace/v1"
	"google.golang.org/genproto/googleapis/rpc/errdetails"
	spb "google.golang.org/genproto/googleapis/rpc/status"
	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/credentials/insecure"
	"google.golang.org/grpc/mem"
	"google.golang.org/grpc/status"
	"google.golang.org/protobuf/encoding/protojson"
	"google.golang.org/protobuf/proto"
)

// testRequest returns an export request of n spans (official types), in
// trace seq; badIDs of them have a 4-byte trace ID.
func testRequest(seq, n, badIDs int) *coltracepb.ExportTraceServiceRequest {
	var spans []*tracepb.Span
	for i := range n {
		tid := []byte(fmt.Sprintf("trace-%010d", seq))
		if i < badIDs {
			tid = tid[:4]
		}
		spans = append(spans, &tracepb.Span{TraceId: tid, SpanId: []byte(fmt.Sprintf("s%07d", i+1)), Name: "GET /plants",
			Kind: tracepb.Span_SPAN_KIND_SERVER, StartTimeUnixNano: 1_700_000_000_000_000_000, EndTimeUnixNano: 1_700_000_000_100_000_000})
	}
	return &coltracepb.ExportTraceServiceRequest{ResourceSpans: []*tracepb.ResourceSpans{{ScopeSpans: []*tracepb.ScopeSpans{{Spans: spans}}}}}
}

func marshal(t testing.TB, m proto.Message) []byte {
	t.Helper()
	b, err := proto.Marshal(m)
	if err != nil {
		t.Fatal(err)
	}
	return b
}

// post sends one OTLP/HTTP request and returns the status, the
// Retry-After header and the body.
func post(t testing.TB, addr, contentType, encoding string, body io.Reader) (int, string, []byte) {
	t.Helper()
	req, err := http.NewRequest(http.MethodPost, "http://"+addr+"/v1/traces", body)
	if err != nil {
		t.Fatal(err)
	}
	req.Header.Set("Content-Type", contentType)
	if encoding != "" {
		req.Header.Set("Content-Encoding", encoding)
	}
	resp, err := http.DefaultClient.Do(req)
	if err != nil {
		t.Fatal(err)
	}
	defer resp.Body.Close()
	out, _ := io.ReadAll(resp.Body)
	return resp.StatusCode, resp.Header.Get("Retry-After"), out
}

// failDir is a capture directory on disk whose writes fail with ENOSPC
// while full is set (a full disk).
type failDir struct {
	osDir
	full atomic.Bool
}

type failFile struct {
	*os.File
	d *failDir
}

func (d *failDir) Create(name string) (capture.File, error) {
	f, err := os.OpenFile(filepath.Join(d.path, name), os.O_WRONLY|os.O_CREATE|os.O_EXCL|os.O_APPEND, 0o644)
	if err != nil {
		return nil, err
	}
	return &failFile{f, d}, nil
}

func (f *failFile) Write(p []byte) (int, error) {
	if f.d.full.Load() {
		n, _ := f.File.Write(p[:len(p)/2])
		return n, &os.PathError{Op: "write", Path: f.Name(), Err: syscall.ENOSPC}
	}
	return f.File.Write(p)
}

// TestListenAnswers checks the answers that the OTLP specification
// (opentelemetry-proto docs/specification.md, "OTLP/HTTP" and
// "OTLP/gRPC") requires for each kind of request, and that the listener
// goes on serving after each.
func TestListenAnswers(t *testing.T) {
	fd := &failDir{osDir: osDir{path: t.TempDir()}}
	l := startListen(t, func(o *listenOptions) { o.dir = fd }, "--max-body", "1000000", "--max-inflight", "1", "--read-timeout", "1s")
	stored := 0
	valid := func(t *testing.T) {
		t.Helper()
		stored += 2
		code, _, body := post(t, l.httpAddr, mediaProto, "", bytes.NewReader(marshal(t, testRequest(stored, 2, 0))))
		resp := &coltracepb.ExportTraceServiceResponse{}
		if code != 200 || proto.Unmarshal(body, resp) != nil || resp.PartialSuccess != nil {
			t.Fatalf("valid request: %d %q", code, body)
		}
	}
	refused := func(t *testing.T, code int, contentType, encoding string, body []byte, want int) {
		t.Helper()
		if code != want {
			t.Fatalf("status %d (%s), want %d", code, body, want)
		}
		st := &spb.Status{}
		var err error
		if contentType == mediaProto {
			err = proto.Unmarshal(body, st)
		} else {
			err = protojson.Unmarshal(body, st)
		}
		if err != nil || st.Message == "" {
			t.Fatalf("body %q is not a google.rpc.Status with a message: %v", body, err)
		}
		valid(t)
	}
	bomb := gzipped(make([]byte, 5<<20))
	for _, tc := range []struct {
		name, contentType, encoding string
		body                        []byte
		want                        int
	}{
		{"undecodable protobuf", mediaProto, "", []byte{0x0a, 0x05, 0xff}, 400},
		{"undecodable JSON", mediaJSON, "", []byte(`{"resourceSpans":[{`), 400},
		{"bad gzip", mediaProto, "gzip", []byte("not gzip at all"), 400},
		{"media type", "text/plain", "", []byte("hello"), 415},
		{"encoding", mediaProto, "br", []byte("x"), 415},
		{"oversize", mediaProto, "", make([]byte, 1_000_001), 413},
		{"gzip bomb", mediaProto, "gzip", bomb, 413},
	} {
		t.Run(tc.name, func(t *testing.T) {
			code, _, body := post(t, l.httpAddr, tc.contentType, tc.encoding, bytes.NewReader(tc.body))
			ct := tc.contentType
			if tc.contentType == "text/plain" {
				ct = mediaJSON
			}
			refused(t, code, ct, tc.encoding, body, tc.want)
		})
	}
	t.Run("oversize without length", func(t *testing.T) {
		// A chunked body: no Content-Length to refuse it by.
		code, _, body := post(t, l.httpAddr, mediaProto, "", io.MultiReader(bytes.NewReader(make([]byte, 1_500_000))))
		refused(t, code, mediaProto, "", body, 413)
	})
	t.Run("JSON and gzip", func(t *testing.T) {
		js, _ := protojson.Marshal(testRequest(1000, 3, 0))
		js = bytes.ReplaceAll(js, []byte(`"kind":"SPAN_KIND_SERVER"`), []byte(`"kind":2`))
		// protojson writes IDs in base64; culprit reads both forms.
		code, _, body := post(t, l.httpAddr, mediaJSON, "gzip", bytes.NewReader(gzipped(js)))
		if code != 200 || !strings.HasPrefix(string(body), "{") {
			t.Fatalf("%d %s", code, body)
		}
		stored += 3
	})
	t.Run("partial success", func(t *testing.T) {
		code, _, body := post(t, l.httpAddr, mediaProto, "", bytes.NewReader(marshal(t, testRequest(2000, 5, 2))))
		resp := &coltracepb.ExportTraceServiceResponse{}
		if code != 200 || proto.Unmarshal(body, resp) != nil || resp.GetPartialSuccess().GetRejectedSpans() != 2 ||
			resp.GetPartialSuccess().GetErrorMessage() == "" {
			t.Fatalf("%d %v", code, resp)
		}
		stored += 5 // stored whole; the reader skips the 2

	})
	t.Run("empty request", func(t *testing.T) {
		code, _, _ := post(t, l.httpAddr, mediaProto, "", bytes.NewReader(nil))
		if code != 200 {
			t.Fatalf("empty request: %d", code)
		}
	})
	t.Run("disk full", func(t *testing.T) {
		fd.full.Store(true)
		code, retry, body := post(t, l.httpAddr, mediaProto, "", bytes.NewReader(marshal(t, testRequest(3000, 2, 0))))
		fd.full.Store(false)
		if retry == "" {
			t.Error("503 without Retry-After")
		}
		refused(t, code, mediaProto, "", body, 503)
		if !strings.Contains(l.stderr.String(), "cannot write the capture") {
			t.Errorf("no message on stderr: %q", l.stderr)
		}
	})
	t.Run("slow client and full queue", func(t *testing.T) {
		// A client that sends half a body and stalls holds the only slot.
		c, err := net.Dial("tcp", l.httpAddr)
		if err != nil {
			t.Fatal(err)
		}
		defer c.Close()
		fmt.Fprintf(c, "POST /v1/traces HTTP/1.1\r\nHost: x\r\nContent-Type: %s\r\nContent-Length: 1000\r\n\r\n0123456789", mediaProto)
		time.Sleep(200 * time.Millisecond)
		code, retry, body := post(t, l.httpAddr, mediaProto, "", bytes.NewReader(marshal(t, testRequest(4000, 2, 0))))
		if code != 503 || retry == "" {
			t.Fatalf("with the queue full: %d %q, Retry-After %q", code, body, retry)
		}
		// The read timeout (1 s) frees the slot.
		time.Sleep(3 * time.Second)
		valid(t)
	})
	t.Run("grpc", func(t *testing.T) {
		conn, err := grpc.NewClient(l.grpcAddr, grpc.WithTransportCredentials(insecure.NewCredentials()))
		if err != nil {
			t.Fatal(err)
		}
		defer conn.Close()
		client := coltracepb.NewTraceServiceClient(conn)
		ctx := context.Background()
		if _, err := client.Export(ctx, testRequest(5000, 4, 0)); err != nil {
			t.Fatal(err)
		}
		stored += 4
		if _, err := client.Export(ctx, testRequest(5001, 40_000, 0)); status.Code(err) != codes.ResourceExhausted {
			t.Errorf("oversize: %v", err)
		}
		var out coltracepb.ExportTraceServiceResponse
		err = conn.Invoke(ctx, coltracepb.TraceService_Export_FullMethodName, rawBytes{0x0a, 0x05, 0xff}, &out, grpc.ForceCodecV2(rawClientCodec{}))
		if status.Code(err) != codes.InvalidArgument {
			t.Errorf("undecodable: %v", err)
		}
		fd.full.Store(true)
		_, err = client.Export(ctx, testRequest(5002, 2, 0))
		fd.full.Store(false)
		st := status.Convert(err)
		var delay bool
		for _, d := range st.Details() {
			if ri, ok := d.(*errdetails.RetryInfo); ok && ri.RetryDelay.AsDuration() > 0 {
				delay = true
			}
		}
		if st.Code() != codes.Unavailable || !delay {
			t.Errorf("disk full: %v, details %v", err, st.Details())
		}
		if _, err := client.Export(ctx, testRequest(5003, 3, 0)); err != nil {
			t.Fatal(err)
		}
		stored += 3
	})
	l.stop(t)
	if got := len(captureSpans(t, fd.path)); got != stored {
		t.Fatalf("capture holds %d spans, want the %d acknowledged", got, stored)
	}
	// The capture, protobuf and JSON records alike, reads as an input:
	// every span but the 2 with invalid IDs, and a warning for those.
	report := filepath.Join(t.TempDir(), "rank.json")
	if code, _, errOut := runTest(t, "", "rank", "--format", "json", "-o", report, fd.path); code != 0 {
		t.Fatalf("rank of the capture: %s", errOut)
	}
	doc := jsonDoc(t, report)
	if ws := fmt.Sprint(doc["warnings"]); !strings.Contains(ws, "2 × invalid-id") {
		t.Errorf("warnings %s, want the 2 spans with invalid IDs", ws)
	}
}

// TestListenStopping: once stopping, requests get 503 with Retry-After.
func TestListenStopping(t *testing.T) {
	o := &listenOptions{MaxInflight: 4, MaxBody: 1 << 20}
	rc := newReceiver(capture.NewWriter(&osDir{path: t.TempDir()}, capture.WriterOptions{}), o, io.Discard)
	rc.stop()
	rec := httptest.NewRecorder()
	req := httptest.NewRequest(http.MethodPost, "/v1/traces", bytes.NewReader(marshal(t, testRequest(1, 1, 0))))
	req.Header.Set("Content-Type", mediaProto)
	rc.serveHTTP(rec, req)
	if rec.Code != 503 || rec.Header().Get("Retry-After") == "" {
		t.Fatalf("%d %v", rec.Code, rec.Header())
	}
	rec = httptest.NewRecorder()
	req = httptest.NewRequest(http.MethodPost, grpcExportPath, bytes.NewReader(grpcFrame(0, marshal(t, testRequest(1, 1, 0)))))
	req.Header.Set("Content-Type", "application/grpc")
	rc.serveGRPC(rec, req)
	if got := rec.Header().Get("Grpc-Status"); got != strconv.Itoa(int(codes.Unavailable)) {
		t.Fatalf("gRPC while stopping: grpc-status %q, headers %v", got, rec.Header())
	}
}

// rawBytes and rawClientCodec send bytes as a gRPC message unchanged.
type rawBytes []byte

type rawClientCodec struct{}

func (rawClientCodec) Marshal(v any) (mem.BufferSlice, error) {
	return mem.BufferSlice{mem.SliceBuffer(v.(rawBytes))}, nil
}

func (rawClientCodec) Unmarshal(data mem.BufferSlice, v any) error {
	return proto.Unmarshal(data.Materialize(), v.(proto.Message))
}

func (rawClientCodec) Name() string { return "proto" }

// TestListenTopCause: the status line's top root cause is what rank
// finds in the recent requests.
func TestListenTopCause(t *testing.T) {
	o := &listenOptions{MaxInflight: 4, MaxBody: 1 << 20}
	rc := newReceiver(capture.NewWriter(&osDir{path: t.TempDir()}, capture.WriterOptions{}), o, io.Discard)
	if got := rc.topCause(); got != "" {
		t.Fatalf("with nothing received: %q", got)
	}
	for i := range 3 {
		rc.recent.add(marshal(t, benchRequest(i, 30)), false)
	}
	if got := rc.topCause(); got != "…/catalog.(*Repo).VarietyByID 100%" {
		t.Fatalf("top cause %q", got)
	}
}
