package main

import (
	"bytes"
	"encoding/json"
	"testing"
	"time"

	coltracepb "go.opentelemetry.io/proto/otlp/collector/trace/v1"
	"google.golang.org/genproto/googleapis/rpc/errdetails"
	spb "google.golang.org/genproto/googleapis/rpc/status"
	"google.golang.org/grpc/codes"
	"google.golang.org/protobuf/encoding/protojson"
	"google.golang.org/protobuf/proto"
	"google.golang.org/protobuf/types/known/anypb"
	"google.golang.org/protobuf/types/known/durationpb"
)

// wireMessages are messages that exercise the string encodings: quotes,
// backslashes, every kind of control character, non-ASCII text.
var wireMessages = []string{
	"",
	"2 of 5 spans have invalid IDs and will not be analysed; the first: span 1: trace ID of 4 bytes",
	`quote " backslash \ slash / <html> & 100%`,
	"tab\t newline\n return\r backspace\b formfeed\f nul\x00 escape\x1b unit\x1f del\x7f",
	"café – 日本 😀 \u2028",
}

// officialJSON is protojson's output without the whitespace it inserts
// at random (its output is deliberately unstable across builds).
func officialJSON(t *testing.T, m proto.Message) []byte {
	t.Helper()
	js, err := protojson.Marshal(m)
	if err != nil {
		t.Fatal(err)
	}
	var out bytes.Buffer
	if err := json.Compact(&out, js); err != nil {
		t.Fatal(err)
	}
	return out.Bytes()
}

// TestWireExportResponse: the hand-encoded ExportTraceServiceResponse is
// byte for byte what the official OTLP types (go.opentelemetry.io/proto/otlp)
// marshal with proto.Marshal and protojson.
func TestWireExportResponse(t *testing.T) {
	for _, rejected := range []int64{0, 1, 2, 1 << 40} {
		for _, msg := range wireMessages {
			want := &coltracepb.ExportTraceServiceResponse{}
			if rejected != 0 || msg != "" {
				want.PartialSuccess = &coltracepb.ExportTracePartialSuccess{RejectedSpans: rejected, ErrorMessage: msg}
			}
			if got, w := appendExportResponse(nil, rejected, msg), marshal(t, want); !bytes.Equal(got, w) {
				t.Errorf("%d %q: protobuf\n%x\nwant\n%x", rejected, msg, got, w)
			}
			if got, w := appendExportResponseJSON(nil, rejected, msg), officialJSON(t, want); !bytes.Equal(got, w) {
				t.Errorf("%d %q: JSON\n%s\nwant\n%s", rejected, msg, got, w)
			}
		}
	}
}

// TestWireStatus: the hand-encoded google.rpc.Status, with a
// google.rpc.RetryInfo detail, is byte for byte what the official types
// (google.golang.org/genproto/googleapis/rpc) marshal, and its codes are
// gRPC's (google.golang.org/grpc/codes).
func TestWireStatus(t *testing.T) {
	for got, want := range map[rpcCode]codes.Code{codeInvalidArgument: codes.InvalidArgument, codeResourceExhausted: codes.ResourceExhausted,
		codeUnimplemented: codes.Unimplemented, codeInternal: codes.Internal, codeUnavailable: codes.Unavailable} {
		if int32(got) != int32(want) {
			t.Errorf("code %d, gRPC's %v is %d", got, want, want)
		}
	}
	for _, code := range []rpcCode{0, codeInvalidArgument, codeUnavailable, -1} {
		for _, msg := range wireMessages {
			for _, retry := range []time.Duration{0, time.Second, 1500 * time.Millisecond, time.Nanosecond, 90 * time.Second} {
				want := &spb.Status{Code: int32(code), Message: msg}
				if retry > 0 {
					d, err := anypb.New(&errdetails.RetryInfo{RetryDelay: durationpb.New(retry)})
					if err != nil {
						t.Fatal(err)
					}
					want.Details = []*anypb.Any{d}
				}
				if got, w := appendStatus(nil, code, msg, retry), marshal(t, want); !bytes.Equal(got, w) {
					t.Errorf("%d %q %v: protobuf\n%x\nwant\n%x", code, msg, retry, got, w)
				}
				if retry == 0 {
					if got, w := appendStatusJSON(nil, code, msg), officialJSON(t, want); !bytes.Equal(got, w) {
						t.Errorf("%d %q: JSON\n%s\nwant\n%s", code, msg, got, w)
					}
				}
			}
		}
	}
}

// TestWireInvalidUTF8: a message with bytes that are not UTF-8 is sent
// with U+FFFD in their place, which the official decoders accept (they
// refuse strings that are not UTF-8).
func TestWireInvalidUTF8(t *testing.T) {
	msg := "span \xff\xfe of trace \xc3"
	st := &spb.Status{}
	if err := proto.Unmarshal(appendStatus(nil, codeInvalidArgument, msg, 0), st); err != nil || st.Message != "span \uFFFD of trace \uFFFD" {
		t.Errorf("protobuf: %q %v", st.Message, err)
	}
	if err := protojson.Unmarshal(appendStatusJSON(nil, codeInvalidArgument, msg), st); err != nil || st.Message != "span \uFFFD of trace \uFFFD" {
		t.Errorf("JSON: %q %v", st.Message, err)
	}
	resp := &coltracepb.ExportTraceServiceResponse{}
	if err := protojson.Unmarshal(appendExportResponseJSON(nil, 1, msg), resp); err != nil || resp.PartialSuccess.ErrorMessage != "span \uFFFD of trace \uFFFD" {
		t.Errorf("response: %v %v", resp, err)
	}
}

// TestListenHTTPAnswers: every OTLP/HTTP answer, in both encodings, as
// the official types decode it (OTLP specification, opentelemetry-proto
// docs/specification.md, "OTLP/HTTP": an ExportTraceServiceResponse on
// success, a google.rpc.Status otherwise), and the body is what the
// official types would have written.
func TestListenHTTPAnswers(t *testing.T) {
	fd := &failDir{osDir: osDir{path: t.TempDir()}}
	l := startListen(t, func(o *listenOptions) { o.dir = fd }, "--max-body", "1000000")
	for _, media := range []string{mediaProto, mediaJSON} {
		encode := func(m proto.Message) []byte {
			if media == mediaJSON {
				js, err := protojson.Marshal(m)
				if err != nil {
					t.Fatal(err)
				}
				return js
			}
			return marshal(t, m)
		}
		decode := func(b []byte, m proto.Message) error {
			if media == mediaJSON {
				return protojson.Unmarshal(b, m)
			}
			return proto.Unmarshal(b, m)
		}
		same := func(t *testing.T, body []byte, m proto.Message) {
			t.Helper()
			want := marshal(t, m)
			if media == mediaJSON {
				want = officialJSON(t, m)
			}
			if !bytes.Equal(body, want) {
				t.Errorf("body\n%q\nthe official types write\n%q", body, want)
			}
		}
		t.Run(media, func(t *testing.T) {
			for _, tc := range []struct {
				name     string
				req      *coltracepb.ExportTraceServiceRequest
				rejected int64
			}{{"success", testRequest(1, 3, 0), 0}, {"partial success", testRequest(2, 5, 2), 2}} {
				code, _, body := post(t, l.httpAddr, media, "", bytes.NewReader(encode(tc.req)))
				resp := &coltracepb.ExportTraceServiceResponse{}
				if err := decode(body, resp); code != 200 || err != nil || resp.GetPartialSuccess().GetRejectedSpans() != tc.rejected ||
					(tc.rejected > 0) != (resp.GetPartialSuccess().GetErrorMessage() != "") {
					t.Fatalf("%s: %d %v %q", tc.name, code, err, body)
				}
				same(t, body, resp)
			}
			for _, tc := range []struct {
				name, contentType, encoding string
				body                        []byte
				httpStatus                  int
				code                        codes.Code
			}{
				{"undecodable", media, "", []byte("\x0a\x05\xff{"), 400, codes.InvalidArgument},
				{"bad gzip", media, "gzip", []byte("not gzip"), 400, codes.InvalidArgument},
				{"oversize", media, "", make([]byte, 1_000_001), 413, codes.ResourceExhausted},
				{"encoding", media, "br", []byte("x"), 415, codes.InvalidArgument},
				{"disk full", media, "", encode(testRequest(3, 2, 0)), 503, codes.Unavailable},
			} {
				fd.full.Store(tc.name == "disk full")
				code, retry, body := post(t, l.httpAddr, tc.contentType, tc.encoding, bytes.NewReader(tc.body))
				fd.full.Store(false)
				st := &spb.Status{}
				if err := decode(body, st); code != tc.httpStatus || err != nil || st.Code != int32(tc.code) || st.Message == "" {
					t.Fatalf("%s: %d %v %q", tc.name, code, err, body)
				}
				if (code == 503) != (retry == "1") {
					t.Errorf("%s: Retry-After %q", tc.name, retry)
				}
				same(t, body, st)
			}
		})
	}
	l.stop(t)
}
