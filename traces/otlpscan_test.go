package traces

import (
	"bytes"
	"fmt"
	"reflect"
	"strings"
	"testing"
)

// The fast path (otlpscan.go) must give exactly the batch that the JSON
// decoder's path gives: the same spans, frames, calls, routes, warnings
// and errors. These tests decode inputs both ways and compare.

// diffOptions returns the option sets the paths are compared under.
func diffOptions() []Options {
	return []Options{{}, {Strict: true}, {KeepGoing: true, Limits: Limits{MaxDepth: 12}}}
}

// bothPaths decodes data as one job of JSON lines, or as one document,
// with and without the fast path. It fails the test unless the batches are
// the same, and returns how many records the fast path accepted.
func bothPaths(t testing.TB, opts Options, data []byte, doc bool) int {
	t.Helper()
	c := NewSpanCollector(opts)
	j := &job{data: data, line: 1, col: 1, doc: doc}
	fast, slow := newDecoder(c, "diff", nil), newDecoder(c, "diff", nil)
	slow.slow = true
	got, want := fast.run(j), slow.run(j)
	if !reflect.DeepEqual(got, want) {
		t.Fatalf("doc %v, options %+v: the paths differ\nfast: %s\nslow: %s\ninput: %q", doc, opts, describeBatch(got), describeBatch(want), data)
	}
	accepted := 0
	recs := [][]byte{data}
	if !doc {
		recs = bytes.Split(data, []byte("\n"))
	}
	for _, rec := range recs {
		if len(bytes.TrimSpace(rec)) == 0 {
			continue
		}
		probe := newDecoder(c, "diff", nil)
		probe.b = &batch{}
		if probe.scan(rec, len(rec)-len(bytes.TrimLeft(rec, " \t\r\n")), 1) {
			accepted++
		}
	}
	return accepted
}

// describeBatch renders a batch for failure messages.
func describeBatch(b *batch) string {
	return fmt.Sprintf("spans %+v\nframes %+v\ncalls %+v\nroutes %q\nwarnings %+v\nerr %v", b.spans, b.frames, b.calls, b.strs, b.warnings, b.err)
}

// fastPathInputs are records that the fast path must accept (true) or
// may leave to the JSON decoder (false); every one is compared.
func fastPathInputs() []struct {
	name   string
	rec    string
	accept bool
} {
	span := func(fields string) string {
		return `{"resourceSpans":[{"resource":{"attributes":[{"key":"service.name","value":{"stringValue":"api"}}]},"scopeSpans":[{"spans":[{"traceId":"` +
			tr1 + `","spanId":"` + sA + `","name":"n","kind":3,"startTimeUnixNano":"5","endTimeUnixNano":"9"` + fields + `}]}]}]}`
	}
	attr := func(value string) string {
		return span(`,"attributes":[{"key":"db.system.name","value":{"stringValue":"redis"}},{"key":"server.address","value":` + value + `}]`)
	}
	return []struct {
		name   string
		rec    string
		accept bool
	}{
		{"generated", string(bytes.Split(genInputForTest(), []byte("\n"))[0]), true},
		{"empty object", `{}`, true},
		{"empty array", `[]`, true},
		{"whitespace everywhere", " {\t\"resourceSpans\" : [ { \"scopeSpans\" : [ { \"spans\" : [ { \"traceId\" : \"" + tr1 + "\" , \"spanId\" : \"" + sA + "\" } ] } ] } ] } \r", true},
		{"keys in other order", `{"resourceSpans":[{"scopeSpans":[{"spans":[{"attributes":[{"value":{"stringValue":"GET"},"key":"http.request.method"}],"endTimeUnixNano":9,"startTimeUnixNano":5,"kind":"SPAN_KIND_CLIENT","name":"x","spanId":"` + sA + `","traceId":"` + tr1 + `"}]}],"resource":{"attributes":[{"key":"service.name","value":{"stringValue":"api"}}]}}]}`, true},
		{"both scope levels", `{"resourceSpans":[{"instrumentationLibrarySpans":[{"spans":[{"traceId":"` + tr1 + `","spanId":"` + sB + `","name":"old"}]}],"scopeSpans":[{"spans":[{"traceId":"` + tr1 + `","spanId":"` + sA + `","name":"new"}]}]}]}`, true},
		{"scopes", `{"resourceSpans":[{"instrumentationLibrarySpans":[{"instrumentationLibrary":{"name":"old-lib","version":"1"},"spans":[{"traceId":"` + tr1 + `","spanId":"` + sB + `","name":"old"}]}],"scopeSpans":[{"spans":[{"traceId":"` + tr1 + `","spanId":"` + sA + `","name":"new"}],"scope":{"name":"@opentelemetry/instrumentation-\u0065xpress","attributes":[]}},{"scope":null,"spans":[{"traceId":"` + tr1 + `","spanId":"` + sC + `"}]}]}]}`, true},
		{"scope name not a string", `{"resourceSpans":[{"scopeSpans":[{"scope":{"name":5},"spans":[]}]}]}`, false},
		{"escapes", strings.Replace(span(""), `"name":"n"`, `"name":"a\"b\\c\/d\b\f\n\r\t\u00e9\u4e2d\ud83d\ude00"`, 1), true},
		{"lone surrogates", strings.Replace(span(""), `"name":"n"`, `"name":"\ud800x\udc00\ud800\u0041"`, 1), true},
		{"escaped statement", span(`,"attributes":[{"key":"db.system.name","value":{"stringValue":"pg"}},{"key":"db.query.text","value":{"stringValue":"SELECT \"x\"\nFROM t"}}]`), true},
		{"escaped attribute key", span(`,"attributes":[{"key":"db.system\u002ename","value":{"stringValue":"pg"}}]`), true},
		{"non-ASCII", strings.Replace(span(""), `"name":"n"`, `"name":"grüße, 世界"`, 1), true},
		{"null fields", `{"resourceSpans":[{"resource":null,"scopeSpans":[{"spans":[{"traceId":"` + tr1 + `","spanId":"` + sA + `","name":null,"kind":null,"startTimeUnixNano":null,"attributes":[null,{"key":"http.route","value":null}]}]}]}]}`, true},
		{"numbers as times", strings.Replace(span(""), `"startTimeUnixNano":"5","endTimeUnixNano":"9"`, `"startTimeUnixNano":1e3,"endTimeUnixNano":2000.0`, 1), true},
		{"kinds", strings.Replace(span(""), `"kind":3`, `"kind":"2"`, 1), true},
		{"kind as float", strings.Replace(span(""), `"kind":3`, `"kind":2.0`, 1), true},
		{"unknown kind", strings.Replace(span(""), `"kind":3`, `"kind":"SPAN_KIND_OTHER"`, 1), true},
		{"int attribute", attr(`{"intValue":"6379"}`), true},
		{"int attribute as number", attr(`{"intValue":6379}`), true},
		{"double attribute", attr(`{"doubleValue":"NaN"}`), true},
		{"bool attribute", attr(`{"boolValue":true}`), true},
		{"bytes attribute", attr(`{"bytesValue":"3q2-7w"}`), true},
		{"array attribute", attr(`{"arrayValue":{"values":[{"stringValue":"x"},null,{"kvlistValue":{"values":[{"key":"a","value":{"boolValue":false}},null]}}]}}`), true},
		{"several values", attr(`{"stringValue":"h","intValue":"1"}`), true},
		{"unknown fields", span(`,"status":{"code":2,"message":"a\u0041"},"events":[{"x":[1,-2.5e-3,true,false,null,{}]}],"flags":1`), true},
		{"service.name twice", `{"resourceSpans":[{"resource":{"attributes":[{"key":"service.name","value":{"intValue":"7"}},{"key":"service.name","value":{"stringValue":"b"}}]},"scopeSpans":[{"spans":[{"traceId":"` + tr1 + `","spanId":"` + sA + `"}]}]}]}`, true},
		{"invalid IDs", `{"resourceSpans":[{"scopeSpans":[{"spans":[{"traceId":"xyz","spanId":"` + sA + `"},{"traceId":"` + tr1 + `","spanId":"0000000000000000"}]}]}]}`, true},
		{"array of requests", "[" + span("") + "," + span("") + "]", true},
		{"deep (too deep with MaxDepth 12)", span(`,"x":[[[[[[[[[[[[[[1]]]]]]]]]]]]]]`), true},

		// Left to the JSON decoder.
		{"duplicate key", span(`,"name":"again"`), false},
		{"key in other case", span(`,"Name":"again"`), false},
		{"key with Kelvin sign", strings.Replace(span(""), `"kind":3`, "\"\u212aind\":3", 1), false},
		{"escaped key", strings.Replace(span(""), `"kind":3`, `"\u006bind":3`, 1), false},
		{"null span", `{"resourceSpans":[{"scopeSpans":[{"spans":[null]}]}]}`, false},
		{"null request", `[null]`, false},
		{"top-level null", `null`, false},
		{"wrong type", strings.Replace(span(""), `"name":"n"`, `"name":5`, 1), false},
		{"bool as string", attr(`{"boolValue":"true"}`), false},
		{"bad double", attr(`{"doubleValue":"lots"}`), false},
		{"bad base64", attr(`{"bytesValue":"@@"}`), false},
		{"bad timestamp", strings.Replace(span(""), `"5"`, `"soon"`, 1), false},
		{"timestamp too large", strings.Replace(span(""), `"5"`, `"99999999999999999999"`, 1), false},
		{"negative timestamp", strings.Replace(span(""), `"5"`, `-5`, 1), false},
		{"escaped timestamp", strings.Replace(span(""), `"5"`, `"\u0035"`, 1), false},
		{"leading zero", strings.Replace(span(""), `"5"`, `05`, 1), false},
		{"trailing comma", span(`,`), false},
		{"trailing garbage", span("") + "x", false},
		{"two values", span("") + " {}", false},
		{"unterminated", span("")[:60], false},
		{"control character", strings.Replace(span(""), `"name":"n"`, "\"name\":\"a\tb\"", 1), false},
		{"invalid escape", strings.Replace(span(""), `"name":"n"`, `"name":"a\qb"`, 1), false},
		{"invalid UTF-8", strings.Replace(span(""), `"name":"n"`, "\"name\":\"a\xffb\"", 1), false},

		{"bad literal", span(`,"x":nul`), false},
	}
}

// genInputForTest returns a few generated JSON lines.
func genInputForTest() []byte {
	data, _ := genInput(5, 3)
	return data
}

// TestFastPathMatchesDecoder checks the fast path against the JSON
// decoder's path on valid and invalid records, as lines and documents.
func TestFastPathMatchesDecoder(t *testing.T) {
	for _, tc := range fastPathInputs() {
		t.Run(tc.name, func(t *testing.T) {
			for _, opts := range diffOptions() {
				n := bothPaths(t, opts, []byte(tc.rec), false)
				bothPaths(t, opts, []byte(tc.rec), true)
				if opts.Limits.MaxDepth == 0 && (n == 1) != tc.accept {
					t.Errorf("fast path accepted %d records, want accept %v", n, tc.accept)
				}
			}
		})
	}
	t.Run("generated lines", func(t *testing.T) {
		data, _ := genInput(7, 40)
		for _, opts := range diffOptions() {
			if n := bothPaths(t, opts, data, false); n != bytes.Count(data, []byte("\n")) {
				t.Errorf("fast path accepted %d of %d lines", n, bytes.Count(data, []byte("\n")))
			}
		}
	})
}

// FuzzOTLPJSONFastPath requires the fast path and the JSON decoder's path
// to make the same batch of any input, as JSON lines and as a document.
func FuzzOTLPJSONFastPath(f *testing.F) {
	for _, tc := range fastPathInputs() {
		f.Add([]byte(tc.rec))
	}
	f.Add(genInputForTest())
	f.Fuzz(func(t *testing.T, data []byte) {
		for _, opts := range diffOptions() {
			bothPaths(t, opts, data, false)
			bothPaths(t, opts, data, true)
		}
	})
}

// BenchmarkOTLPJSONScan compares the fast path with the JSON decoder on
// reading generated records into jsonRequests (without converting spans).
func BenchmarkOTLPJSONScan(b *testing.B) {
	data, nSpans := genInput(2, 3000)
	recs := bytes.Split(bytes.TrimSuffix(data, []byte("\n")), []byte("\n"))
	b.Run("fast", func(b *testing.B) {
		d := newDecoder(NewSpanCollector(Options{}), "bench", nil)
		b.SetBytes(int64(len(data)))
		b.ReportAllocs()
		for b.Loop() {
			for _, rec := range recs {
				if _, ok := d.read(rec, 0); !ok {
					b.Fatal("not accepted")
				}
			}
		}
		b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N)/float64(nSpans), "ns/span")
	})
	b.Run("decoder", func(b *testing.B) {
		var req jsonRequest
		b.SetBytes(int64(len(data)))
		b.ReportAllocs()
		for b.Loop() {
			for _, rec := range recs {
				req.reset()
				if err := unmarshal(rec, &req); err != nil {
					b.Fatal(err)
				}
			}
		}
		b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N)/float64(nSpans), "ns/span")
	})
}
