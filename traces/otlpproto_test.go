package traces

import (
	"bytes"
	"encoding/base64"
	"encoding/hex"
	stdjson "encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"reflect"
	"testing"
	"time"

	coltracepb "go.opentelemetry.io/proto/otlp/collector/trace/v1"
	commonpb "go.opentelemetry.io/proto/otlp/common/v1"
	tracepb "go.opentelemetry.io/proto/otlp/trace/v1"
	"google.golang.org/protobuf/encoding/protojson"
	"google.golang.org/protobuf/proto"
)

// readProto reads binary export requests as one input named name.
func readProto(opts Options, name string, reqs ...[]byte) (*Source, error) {
	c := NewSpanCollector(opts)
	i := 0
	err := c.AddRecords(name, FormatOTLPProto, func() (Record, error) {
		if i == len(reqs) {
			return Record{}, io.EOF
		}
		i++
		return Record{Data: reqs[i-1]}, nil
	})
	if err != nil {
		return nil, err
	}
	return c.Source()
}

// protoFromJSONLine turns one canonical OTLP/JSON line (hex IDs) into the
// official types: IDs rewritten to base64, then protojson (which would
// read hex as base64 and corrupt it).
func protoFromJSONLine(t testing.TB, line []byte) *tracepb.TracesData {
	t.Helper()
	dec := stdjson.NewDecoder(bytes.NewReader(line))
	dec.UseNumber()
	var tree any
	if err := dec.Decode(&tree); err != nil {
		t.Fatal(err)
	}
	rewriteIDs(t, tree, hex.DecodeString, base64.StdEncoding.EncodeToString)
	b, err := stdjson.Marshal(tree)
	if err != nil {
		t.Fatal(err)
	}
	var td tracepb.TracesData
	if err := (protojson.UnmarshalOptions{DiscardUnknown: true}).Unmarshal(b, &td); err != nil {
		t.Fatal(err)
	}
	return &td
}

// TestOTLPProtoMatchesJSON holds the protobuf reader to the OTLP/JSON
// reader: the same spans, encoded by the official OTLP Go types
// (go.opentelemetry.io/proto/otlp with google.golang.org/protobuf's
// proto.Marshal) and by canonical OTLP/JSON, give the same Source.
func TestOTLPProtoMatchesJSON(t *testing.T) {
	t.Run("sdk", func(t *testing.T) {
		// Spans recorded by the official OpenTelemetry Go SDK.
		spans, _ := recordWorkload(t, 20)
		td := sdkToProto(spans)
		bin, err := proto.Marshal(td)
		if err != nil {
			t.Fatal(err)
		}
		want := mustCollect(t, Options{}, input{"in", otlpJSON(t, td) + "\n"})
		got, err := readProto(Options{}, "in", bin)
		if err != nil {
			t.Fatal(err)
		}
		sameSource(t, got, want)
	})
	t.Run("generated", func(t *testing.T) {
		data, _ := genInput(5, 200)
		var reqs [][]byte
		for l := range bytes.SplitSeq(bytes.TrimSuffix(data, []byte("\n")), []byte("\n")) {
			bin, err := proto.Marshal(protoFromJSONLine(t, l))
			if err != nil {
				t.Fatal(err)
			}
			reqs = append(reqs, bin)
		}
		for _, opts := range []Options{{Workers: 1}, {Workers: 3}, {KeepGoing: true, Service: "greenhouse-api"}} {
			want := mustCollect(t, opts, input{"in", string(data)})
			got, err := readProto(opts, "in", reqs...)
			if err != nil {
				t.Fatal(err)
			}
			sameSource(t, got, want)
		}
	})
}

// TestOTLPProtoWireRules checks the cases where the wire format's rules
// (as proto.Unmarshal applies them to the official types) decide what a
// span holds: merged messages, the last oneof member, wrong wire types.
func TestOTLPProtoWireRules(t *testing.T) {
	tid := bytes.Repeat([]byte{0xab}, 16)
	sid := bytes.Repeat([]byte{0xcd}, 8)
	span := &tracepb.Span{TraceId: tid, SpanId: sid, Name: "GET /x", Kind: tracepb.Span_SPAN_KIND_SERVER,
		StartTimeUnixNano: 1_700_000_000_000_000_000, EndTimeUnixNano: 1_700_000_000_500_000_000,
		Attributes: []*commonpb.KeyValue{{Key: "http.route", Value: &commonpb.AnyValue{Value: &commonpb.AnyValue_StringValue{StringValue: "/x"}}}}}
	base, err := proto.Marshal(&coltracepb.ExportTraceServiceRequest{ResourceSpans: []*tracepb.ResourceSpans{{ScopeSpans: []*tracepb.ScopeSpans{{Spans: []*tracepb.Span{span}}}}}})
	if err != nil {
		t.Fatal(err)
	}
	for _, tc := range []struct {
		name string
		data []byte
	}{
		{"plain", base},
		// The request given twice in one buffer: repeated fields append.
		{"concatenated", append(bytes.Clone(base), base...)},
		// An unknown field and a known number with the wrong wire type.
		{"unknown fields", append(append(bytes.Clone(base), 0x98, 0x3e, 0x05), 0x0d, 1, 2, 3, 4)},
	} {
		t.Run(tc.name, func(t *testing.T) {
			var ref tracepb.TracesData
			if err := proto.Unmarshal(tc.data, &ref); err != nil {
				t.Fatalf("proto.Unmarshal: %v", err)
			}
			want := mustCollect(t, Options{}, input{"in", otlpJSON(t, &ref) + "\n"})
			got, err := readProto(Options{}, "in", tc.data)
			if err != nil {
				t.Fatal(err)
			}
			sameSource(t, got, want)
		})
	}
	t.Run("invalid utf-8", func(t *testing.T) {
		bad := bytes.Replace(base, []byte("GET /x"), []byte("GET \xff\xfe"), 1)
		if err := proto.Unmarshal(bad, &tracepb.TracesData{}); err == nil {
			t.Fatal("proto.Unmarshal took invalid UTF-8")
		}
		_, err := readProto(Options{}, "bad.pb", bad)
		var pe *ParseError
		if !errors.As(err, &pe) || pe.File != "bad.pb" || pe.Offset == 0 {
			t.Fatalf("error %v, want a ParseError with an offset", err)
		}
	})
}

// TestLooksLikeOTLPProto tells trace requests from pprof profiles.
func TestLooksLikeOTLPProto(t *testing.T) {
	spans, _ := recordWorkload(t, 2)
	bin, err := proto.Marshal(sdkToProto(spans))
	if err != nil {
		t.Fatal(err)
	}
	if !LooksLikeOTLPProto(bin) {
		t.Error("an SDK export request is not recognised")
	}
	// Profiles written by the pprof library and by Go's own runtime/pprof.
	profs := map[string][]byte{"library": encode(t, testProfile("samples/count", "cpu/nanoseconds"), false)}
	for name, p := range realProfiles(t) {
		profs[name] = gunzip(t, p)
	}
	for name, p := range profs {
		if LooksLikeOTLPProto(p) {
			t.Errorf("the %s profile looks like an OTLP request", name)
		}
	}
}

// FuzzOTLPProto holds the protobuf reader to proto.Unmarshal into the
// official OTLP types (go.opentelemetry.io/proto/otlp): it accepts
// exactly the inputs that proto.Unmarshal accepts, and what it reads is
// what the OTLP/JSON reader reads from the official types' canonical
// OTLP/JSON.
func FuzzOTLPProto(f *testing.F) {
	gen, _ := genInput(3, 2)
	for l := range bytes.SplitSeq(bytes.TrimSuffix(gen, []byte("\n")), []byte("\n")) {
		if bin, err := proto.Marshal(protoFromJSONLine(f, l)); err == nil {
			f.Add(bin)
		}
	}
	f.Add([]byte{0x0a, 0x00})
	f.Add([]byte{0x0a, 0x04, 0x12, 0x02, 0x12, 0x00})
	f.Fuzz(func(t *testing.T, data []byte) {
		var ref tracepb.TracesData
		refErr := proto.Unmarshal(data, &ref)
		got, err := readProto(Options{KeepGoing: true}, "fuzz", data)
		if refErr != nil {
			if err == nil && got != nil && warningCount(got, WarnMalformedRecord) == 0 {
				t.Fatalf("proto.Unmarshal fails (%v), the reader does not", refErr)
			}
			return
		}
		if warningCount(got, WarnMalformedRecord) > 0 && err == nil {
			for _, w := range got.Warnings.Strings() {
				t.Log(w)
			}
			if !badTimestamps(&ref) {
				t.Fatal("the reader refuses what proto.Unmarshal takes")
			}
			return
		}
		if !idLengthsValid(&ref) {
			return // the JSON reader reads wrong-length IDs as base64
		}
		want, werr := collect(Options{KeepGoing: true}, input{"fuzz", otlpJSON(t, &ref) + "\n"})
		if fmt.Sprint(err) != fmt.Sprint(werr) {
			t.Fatalf("reader: %v; OTLP/JSON reader: %v", err, werr)
		}
		if err != nil {
			return
		}
		if !reflect.DeepEqual(digest(got), digest(want)) {
			t.Fatalf("sources differ:\n%v\n%v", digest(got), digest(want))
		}
		for _, kind := range []string{WarnInvalidID, WarnNoSpans} {
			if warningCount(got, kind) != warningCount(want, kind) {
				t.Fatalf("%s warnings: %d, want %d", kind, warningCount(got, kind), warningCount(want, kind))
			}
		}
	})
}

// badTimestamps reports whether a span's time does not fit an int64 (the
// readers refuse it as an invalid timestamp).
func badTimestamps(td *tracepb.TracesData) bool {
	for _, rs := range td.ResourceSpans {
		for _, ss := range rs.ScopeSpans {
			for _, s := range ss.Spans {
				if s.StartTimeUnixNano > math.MaxInt64 || s.EndTimeUnixNano > math.MaxInt64 {
					return true
				}
			}
		}
	}
	return false
}

func idLengthsValid(td *tracepb.TracesData) bool {
	for _, rs := range td.ResourceSpans {
		for _, ss := range rs.ScopeSpans {
			for _, s := range ss.Spans {
				if len(s.TraceId) != 16 || len(s.SpanId) != 8 || len(s.ParentSpanId) != 0 && len(s.ParentSpanId) != 8 {
					return false
				}
			}
		}
	}
	return true
}

// BenchmarkOTLPProto reads binary export requests (the official types'
// encoding of generated spans); BenchmarkOTLPProtoUnmarshal is the
// baseline, proto.Unmarshal of the same requests into the official types.
func BenchmarkOTLPProto(b *testing.B) {
	reqs, nSpans := benchRequests(b)
	start := time.Now()
	for b.Loop() {
		src, err := readProto(Options{}, "bench", reqs...)
		if err != nil || src.Paths.Len() == 0 {
			b.Fatal(err)
		}
	}
	b.ReportMetric(float64(nSpans)*float64(b.N)/time.Since(start).Seconds(), "spans/s")
}

// BenchmarkOTLPProtoDecode is the wire reader alone: the requests
// decoded into the reader's reused values (what proto.Unmarshal does into
// the official types), without converting and assembling the spans.
func BenchmarkOTLPProtoDecode(b *testing.B) {
	reqs, nSpans := benchRequests(b)
	var req jsonRequest
	var text []byte
	bools := [2]bool{false, true}
	start := time.Now()
	for b.Loop() {
		n := 0
		for _, data := range reqs {
			req.reset()
			text = text[:0]
			r := wireReader{rec: data, depth: protoDepth, text: &text, bools: &bools}
			if !r.request(&req, data) {
				b.Fatal(r.why)
			}
			for _, rs := range req.ResourceSpans {
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

func BenchmarkOTLPProtoUnmarshal(b *testing.B) {
	reqs, nSpans := benchRequests(b)
	start := time.Now()
	for b.Loop() {
		for _, r := range reqs {
			var req coltracepb.ExportTraceServiceRequest
			if err := proto.Unmarshal(r, &req); err != nil {
				b.Fatal(err)
			}
		}
	}
	b.ReportMetric(float64(nSpans)*float64(b.N)/time.Since(start).Seconds(), "spans/s")
}

func benchRequests(b *testing.B) ([][]byte, int) {
	data, nSpans := genInput(2, 3000)
	var reqs [][]byte
	for l := range bytes.SplitSeq(bytes.TrimSuffix(data, []byte("\n")), []byte("\n")) {
		bin, err := proto.Marshal(protoFromJSONLine(b, l))
		if err != nil {
			b.Fatal(err)
		}
		reqs = append(reqs, bin)
	}
	var n int
	for _, r := range reqs {
		n += len(r)
	}
	b.SetBytes(int64(n))
	return reqs, nSpans
}
