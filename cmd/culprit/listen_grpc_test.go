package main

import (
	"bytes"
	"context"
	"encoding/binary"
	"errors"
	"io"
	"net"
	"net/http"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
	"time"

	coltracepb "go.opentelemetry.io/proto/otlp/collector/trace/v1"
	commonpb "go.opentelemetry.io/proto/otlp/common/v1"
	"google.golang.org/genproto/googleapis/rpc/errdetails"
	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/credentials/insecure"
	"google.golang.org/grpc/encoding"
	_ "google.golang.org/grpc/encoding/gzip" // the client's gzip compressor
	"google.golang.org/grpc/status"
	"google.golang.org/protobuf/proto"
)

// The checks in this file hold the gRPC transport to the gRPC protocol
// over HTTP/2 (grpc/grpc, doc/PROTOCOL-HTTP2.md), with the official gRPC
// Go client and the official message types decoding every answer.

// grpcFrame is one length-prefixed message.
func grpcFrame(flag byte, msg []byte) []byte {
	b := []byte{flag, 0, 0, 0, 0}
	binary.BigEndian.PutUint32(b[1:], uint32(len(msg)))
	return append(b, msg...)
}

// failingReader returns data, then err.
type failingReader struct {
	data []byte
	err  error
}

func (f *failingReader) Read(p []byte) (int, error) {
	if len(f.data) == 0 {
		return 0, f.err
	}
	n := copy(p, f.data)
	f.data = f.data[n:]
	return n, nil
}

// TestGRPCFraming: the length-prefixed message of a unary call, read
// within a limit of 100 bytes, and the status each framing error gets.
func TestGRPCFraming(t *testing.T) {
	msg := []byte("an export request")
	big := bytes.Repeat([]byte("a"), 101)
	cat := func(parts ...[]byte) []byte { return bytes.Join(parts, nil) }
	for _, tc := range []struct {
		name    string
		body    io.Reader
		gzipped bool // grpc-encoding: gzip
		want    []byte
		code    rpcCode
	}{
		{"identity", bytes.NewReader(grpcFrame(0, msg)), false, msg, 0},
		{"identity with grpc-encoding gzip", bytes.NewReader(grpcFrame(0, msg)), true, msg, 0},
		{"gzip", bytes.NewReader(grpcFrame(1, gzipped(msg))), true, msg, 0},
		{"empty message", bytes.NewReader(grpcFrame(0, nil)), false, []byte{}, 0},
		{"at the limit", bytes.NewReader(grpcFrame(0, big[:100])), false, big[:100], 0},
		{"no message", bytes.NewReader(nil), false, nil, codeInternal},
		{"short prefix", bytes.NewReader([]byte{0, 0, 0}), false, nil, codeInternal},
		{"length above the limit", bytes.NewReader([]byte{0, 0, 0, 0, 101}), false, nil, codeResourceExhausted},
		{"length above the limit, compressed", bytes.NewReader([]byte{1, 0xff, 0xff, 0xff, 0xff}), true, nil, codeResourceExhausted},
		{"compressed flag without encoding", bytes.NewReader(grpcFrame(1, gzipped(msg))), false, nil, codeInternal},
		{"unknown flag", bytes.NewReader(grpcFrame(2, msg)), false, nil, codeInternal},
		{"message cut short", bytes.NewReader(grpcFrame(0, msg)[:10]), false, nil, codeInternal},
		{"compressed message cut short", bytes.NewReader(grpcFrame(1, gzipped(msg))[:20]), true, nil, codeInternal},
		{"two messages", bytes.NewReader(cat(grpcFrame(0, msg), grpcFrame(0, msg))), false, nil, codeInternal},
		{"not gzip", bytes.NewReader(grpcFrame(1, msg)), true, nil, codeInvalidArgument},
		{"empty compressed message", bytes.NewReader(grpcFrame(1, nil)), true, nil, codeInvalidArgument},
		{"decompresses above the limit", bytes.NewReader(grpcFrame(1, gzipped(big))), true, nil, codeResourceExhausted},
		{"client stops sending", &failingReader{grpcFrame(0, msg)[:8], errors.New("stream reset")}, false, nil, codeUnavailable},
	} {
		t.Run(tc.name, func(t *testing.T) {
			rc := &receiver{opts: &listenOptions{MaxBody: 100}}
			got, ref := rc.readGRPCMessage(tc.body, tc.gzipped, new(bytes.Buffer))
			switch {
			case tc.code == 0 && ref != nil:
				t.Fatalf("refused: %d %s", ref.code, ref.msg)
			case tc.code == 0 && !bytes.Equal(got, tc.want):
				t.Fatalf("read %q, want %q", got, tc.want)
			case tc.code != 0 && (ref == nil || ref.code != tc.code || ref.msg == ""):
				t.Fatalf("got %q %+v, want code %d with a message", got, ref, tc.code)
			}
		})
	}
}

// FuzzGRPCFrame: any body is read or refused without a panic, and what
// is read is what an uncompressed frame of it would be.
func FuzzGRPCFrame(f *testing.F) {
	f.Add(grpcFrame(0, []byte("x")), false)
	f.Add(grpcFrame(1, gzipped([]byte("hello"))), true)
	f.Add([]byte{0, 0, 0}, false)
	f.Fuzz(func(t *testing.T, body []byte, gz bool) {
		rc := &receiver{opts: &listenOptions{MaxBody: 1 << 10}}
		got, ref := rc.readGRPCMessage(bytes.NewReader(body), gz, new(bytes.Buffer))
		if ref != nil {
			if ref.msg == "" || ref.code == 0 {
				t.Fatalf("refusal without code or message: %+v", ref)
			}
			return
		}
		if body[0] == 0 && !bytes.Equal(grpcFrame(0, got), body) {
			t.Fatalf("read %q from %q", got, body)
		}
	})
}

// grpcConn is a client connection of the official gRPC client.
func grpcConn(t *testing.T, addr string) *grpc.ClientConn {
	t.Helper()
	conn, err := grpc.NewClient(addr, grpc.WithTransportCredentials(insecure.NewCredentials()))
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { conn.Close() })
	return conn
}

// nopCompressor is a message encoding that culprit does not know.
type nopCompressor struct{}

type nopWriteCloser struct{ io.Writer }

func (nopWriteCloser) Close() error { return nil }

func (nopCompressor) Compress(w io.Writer) (io.WriteCloser, error) { return nopWriteCloser{w}, nil }
func (nopCompressor) Decompress(r io.Reader) (io.Reader, error)    { return r, nil }
func (nopCompressor) Name() string                                 { return "culprit-test-nop" }

func init() { encoding.RegisterCompressor(nopCompressor{}) }

// retryDelay returns the google.rpc.RetryInfo delay among a status's
// details, as the official client decodes them from
// grpc-status-details-bin.
func retryDelay(st *status.Status) time.Duration {
	for _, d := range st.Details() {
		if ri, ok := d.(*errdetails.RetryInfo); ok {
			return ri.RetryDelay.AsDuration()
		}
	}
	return 0
}

// TestListenGRPCAnswers: every answer of the gRPC receiver, as the
// official gRPC client and the official types decode it: success,
// partial success, and each refusal with its status code (OTLP
// specification, opentelemetry-proto docs/specification.md, "OTLP/gRPC";
// UNAVAILABLE with a google.rpc.RetryInfo).
func TestListenGRPCAnswers(t *testing.T) {
	fd := &failDir{osDir: osDir{path: t.TempDir()}}
	l := startListen(t, func(o *listenOptions) { o.dir = fd }, "--max-body", "1000000")
	conn := grpcConn(t, l.grpcAddr)
	client := coltracepb.NewTraceServiceClient(conn)
	ctx := context.Background()
	// A request that compresses below the limit and decompresses above it.
	bomb := testRequest(9, 1, 0)
	bomb.ResourceSpans[0].ScopeSpans[0].Spans[0].Attributes = []*commonpb.KeyValue{{Key: "padding",
		Value: &commonpb.AnyValue{Value: &commonpb.AnyValue_StringValue{StringValue: strings.Repeat("a", 2_000_000)}}}}

	t.Run("success", func(t *testing.T) {
		for _, opts := range [][]grpc.CallOption{nil, {grpc.UseCompressor("gzip")}} {
			resp, err := client.Export(ctx, testRequest(1, 3, 0), opts...)
			if err != nil || resp.PartialSuccess != nil {
				t.Fatalf("%v %v", resp, err)
			}
		}
	})
	t.Run("partial success", func(t *testing.T) {
		resp, err := client.Export(ctx, testRequest(2, 5, 2))
		if err != nil || resp.GetPartialSuccess().GetRejectedSpans() != 2 ||
			!strings.HasPrefix(resp.GetPartialSuccess().GetErrorMessage(), "2 of 5 spans have invalid IDs") {
			t.Fatalf("%v %v", resp, err)
		}
	})
	refusals := []struct {
		name string
		call func() error
		code codes.Code
	}{
		{"undecodable", func() error {
			var out coltracepb.ExportTraceServiceResponse
			return conn.Invoke(ctx, coltracepb.TraceService_Export_FullMethodName, rawBytes{0x0a, 0x05, 0xff}, &out, grpc.ForceCodecV2(rawClientCodec{}))
		}, codes.InvalidArgument},
		{"oversize", func() error {
			_, err := client.Export(ctx, testRequest(3, 40_000, 0))
			return err
		}, codes.ResourceExhausted},
		{"gzip bomb", func() error {
			_, err := client.Export(ctx, bomb, grpc.UseCompressor("gzip"))
			return err
		}, codes.ResourceExhausted},
		{"unknown encoding", func() error {
			_, err := client.Export(ctx, testRequest(4, 1, 0), grpc.UseCompressor(nopCompressor{}.Name()))
			return err
		}, codes.Unimplemented},
		{"unknown method", func() error {
			var out coltracepb.ExportTraceServiceResponse
			return conn.Invoke(ctx, "/opentelemetry.proto.collector.trace.v1.TraceService/Import", testRequest(5, 1, 0), &out)
		}, codes.Unimplemented},
		{"disk full", func() error {
			fd.full.Store(true)
			defer fd.full.Store(false)
			_, err := client.Export(ctx, testRequest(6, 2, 0))
			return err
		}, codes.Unavailable},
	}
	for _, tc := range refusals {
		t.Run(tc.name, func(t *testing.T) {
			st := status.Convert(tc.call())
			if st.Code() != tc.code || st.Message() == "" {
				t.Fatalf("status %v, want %v with a message", st, tc.code)
			}
			if d := retryDelay(st); (tc.code == codes.Unavailable) != (d == time.Second) {
				t.Errorf("retry delay %v with %v", d, st.Code())
			}
			// The listener goes on serving.
			if _, err := client.Export(ctx, testRequest(7, 1, 0)); err != nil {
				t.Fatal(err)
			}
		})
	}
	l.stop(t)
}

// TestGRPCStatusEncoding: a status message with characters that
// grpc-message must percent-encode reaches the official client as it
// was, from grpc-message alone (INVALID_ARGUMENT) and from
// grpc-status-details-bin with the retry delay (UNAVAILABLE; the client
// takes the message from there when it is present).
func TestGRPCStatusEncoding(t *testing.T) {
	const msg = "50% full, %41 – café\n\ttab \x00 done"
	var protos http.Protocols
	protos.SetUnencryptedHTTP2(true)
	for _, ref := range []*refusal{invalid(msg), unavailable(msg)} {
		srv := &http.Server{Protocols: &protos, Handler: http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
			writeGRPCStatus(w, http.StatusOK, ref)
		})}
		ln, err := net.Listen("tcp", "127.0.0.1:0")
		if err != nil {
			t.Fatal(err)
		}
		go srv.Serve(ln)
		_, err = coltracepb.NewTraceServiceClient(grpcConn(t, ln.Addr().String())).Export(context.Background(), testRequest(1, 1, 0))
		srv.Close()
		st := status.Convert(err)
		wantRetry := time.Duration(0)
		if ref.code == codeUnavailable {
			wantRetry = time.Second
		}
		if int32(st.Code()) != int32(ref.code) || st.Message() != msg || retryDelay(st) != wantRetry {
			t.Errorf("got %v %q, retry %v; want %d %q, retry %v", st.Code(), st.Message(), retryDelay(st), ref.code, msg, wantRetry)
		}
	}
}

// TestGRPCHTTP2: the HTTP/2 exchange itself, through the standard
// library's client speaking HTTP/2 with prior knowledge: a response's
// headers, message and trailers, and the early refusals.
func TestGRPCHTTP2(t *testing.T) {
	l := startListen(t, nil, "--dir", filepath.Join(t.TempDir(), "capture"))
	var protos http.Protocols
	protos.SetUnencryptedHTTP2(true)
	client := &http.Client{Transport: &http.Transport{Protocols: &protos}}
	call := func(method, path, contentType, enc string, body []byte) *http.Response {
		t.Helper()
		req, err := http.NewRequest(method, "http://"+l.grpcAddr+path, bytes.NewReader(body))
		if err != nil {
			t.Fatal(err)
		}
		req.Header.Set("Content-Type", contentType)
		req.Header.Set("Te", "trailers")
		if enc != "" {
			req.Header.Set("Grpc-Encoding", enc)
		}
		resp, err := client.Do(req)
		if err != nil {
			t.Fatal(err)
		}
		return resp
	}
	t.Run("response", func(t *testing.T) {
		resp := call(http.MethodPost, grpcExportPath, "application/grpc+proto", "", grpcFrame(0, marshal(t, testRequest(1, 5, 2))))
		body, err := io.ReadAll(resp.Body)
		resp.Body.Close()
		if err != nil || resp.ProtoMajor != 2 || resp.StatusCode != 200 || !strings.HasPrefix(resp.Header.Get("Content-Type"), "application/grpc") {
			t.Fatalf("%v %s %d %v", err, resp.Proto, resp.StatusCode, resp.Header)
		}
		if got := resp.Trailer.Get("Grpc-Status"); got != "0" {
			t.Fatalf("trailer grpc-status %q (%v)", got, resp.Trailer)
		}
		if len(body) < 5 || body[0] != 0 || int(binary.BigEndian.Uint32(body[1:])) != len(body)-5 {
			t.Fatalf("not one uncompressed length-prefixed message: %x", body)
		}
		var out coltracepb.ExportTraceServiceResponse
		if err := proto.Unmarshal(body[5:], &out); err != nil || out.GetPartialSuccess().GetRejectedSpans() != 2 {
			t.Fatalf("%v %v", &out, err)
		}
	})
	for _, tc := range []struct {
		name, method, path, contentType, enc string
		httpStatus                           int
		code                                 codes.Code
	}{
		{"GET", http.MethodGet, grpcExportPath, "application/grpc", "", 405, codes.Internal},
		{"not gRPC", http.MethodPost, grpcExportPath, "application/json", "", 415, codes.InvalidArgument},
		{"gRPC over JSON", http.MethodPost, grpcExportPath, "application/grpc+json", "", 415, codes.InvalidArgument},
		{"unknown method", http.MethodPost, "/opentelemetry.proto.collector.metrics.v1.MetricsService/Export", "application/grpc", "", 200, codes.Unimplemented},
		{"unknown encoding", http.MethodPost, grpcExportPath, "application/grpc", "br", 200, codes.Unimplemented},
	} {
		t.Run(tc.name, func(t *testing.T) {
			resp := call(tc.method, tc.path, tc.contentType, tc.enc, grpcFrame(0, marshal(t, testRequest(2, 1, 0))))
			body, _ := io.ReadAll(resp.Body)
			resp.Body.Close()
			// Trailers-Only: the status is in the headers, nothing follows.
			if resp.StatusCode != tc.httpStatus || resp.Header.Get("Grpc-Status") != strconv.Itoa(int(tc.code)) || len(body) != 0 {
				t.Fatalf("%d %v %q", resp.StatusCode, resp.Header, body)
			}
			if !strings.Contains(resp.Header.Get("Grpc-Accept-Encoding"), "gzip") {
				t.Errorf("grpc-accept-encoding %q", resp.Header.Get("Grpc-Accept-Encoding"))
			}
		})
	}
	l.stop(t)
}
