package main

import (
	"bufio"
	"bytes"
	"encoding/json"
	"fmt"
	"io"
	"regexp"
	"sort"
	"strconv"
	"testing"
)

// The checks in this file follow the OTLP specification, "JSON Protobuf
// Encoding" (opentelemetry-proto docs/specification.md): trace and span IDs
// are hex strings of 16 and 8 bytes, enums are integers, 64-bit integers
// (times, intValue) are decimal strings, attributes are arrays of
// {"key", "value"} objects; and the OTLP file exporter's JSON Lines format
// (OpenTelemetry Specification, protocol/file-exporter.md): one TracesData
// object per line. The test decodes with the standard library, not with the
// encoder the generator uses.

var (
	traceIDPattern = regexp.MustCompile(`^[0-9a-f]{32}$`)
	spanIDPattern  = regexp.MustCompile(`^[0-9a-f]{16}$`)
	decimalPattern = regexp.MustCompile(`^(0|[1-9][0-9]*)$`)
)

// jsonSpan is a decoded span with the facts the tests look at.
type jsonSpan struct {
	traceID, spanID, parentID string
	name                      string
	kind                      int64
	start, end                int64
	attrs                     map[string]string // string and int values, as text
	line                      int               // 1-based line number
	service                   string
	scope                     string
}

// jsonTrace is the spans of one trace and the lines they were on.
type jsonTrace struct {
	spans []*jsonSpan
	lines map[int]bool
}

// readOTLPLines decodes and checks every line of r, failing the test at the
// first violation of the format, and returns the traces by ID plus the
// number of lines.
func readOTLPLines(t *testing.T, name string, r io.Reader) (map[string]*jsonTrace, int) {
	t.Helper()
	traces := map[string]*jsonTrace{}
	sc := bufio.NewScanner(r)
	sc.Buffer(make([]byte, 1<<20), 64<<20)
	line := 0
	for sc.Scan() {
		line++
		where := fmt.Sprintf("%s:%d", name, line)
		dec := json.NewDecoder(bytes.NewReader(sc.Bytes()))
		dec.UseNumber()
		var doc map[string]any
		if err := dec.Decode(&doc); err != nil {
			t.Fatalf("%s: invalid JSON: %v", where, err)
		}
		if dec.More() {
			t.Fatalf("%s: more than one JSON value on the line", where)
		}
		for _, rs := range list(t, where, doc, "resourceSpans") {
			res := obj(t, where, rs, "resource")
			resAttrs := attrs(t, where, res)
			service := resAttrs["service.name"]
			for _, ss := range list(t, where, rs, "scopeSpans") {
				scope := str(t, where, obj(t, where, ss, "scope"), "name")
				for _, sp := range list(t, where, ss, "spans") {
					s := decodeSpan(t, where, sp.(map[string]any))
					s.line, s.service, s.scope = line, service, scope
					tr := traces[s.traceID]
					if tr == nil {
						tr = &jsonTrace{lines: map[int]bool{}}
						traces[s.traceID] = tr
					}
					tr.spans = append(tr.spans, s)
					tr.lines[line] = true
				}
			}
		}
	}
	if err := sc.Err(); err != nil {
		t.Fatalf("%s: %v", name, err)
	}
	return traces, line
}

func decodeSpan(t *testing.T, where string, m map[string]any) *jsonSpan {
	t.Helper()
	s := &jsonSpan{
		traceID: str(t, where, m, "traceId"),
		spanID:  str(t, where, m, "spanId"),
		name:    str(t, where, m, "name"),
		attrs:   attrs(t, where, m),
	}
	if !traceIDPattern.MatchString(s.traceID) || s.traceID == "00000000000000000000000000000000" {
		t.Fatalf("%s: traceId %q is not 32 hex digits (non-zero)", where, s.traceID)
	}
	if !spanIDPattern.MatchString(s.spanID) || s.spanID == "0000000000000000" {
		t.Fatalf("%s: spanId %q is not 16 hex digits (non-zero)", where, s.spanID)
	}
	if p, ok := m["parentSpanId"]; ok {
		s.parentID, _ = p.(string)
		if !spanIDPattern.MatchString(s.parentID) {
			t.Fatalf("%s: parentSpanId %q is not 16 hex digits", where, p)
		}
	}
	kind, ok := m["kind"].(json.Number)
	if !ok {
		t.Fatalf("%s: kind %v (%T) is not a JSON number", where, m["kind"], m["kind"])
	}
	s.kind, _ = kind.Int64()
	s.start = decimal(t, where, m, "startTimeUnixNano")
	s.end = decimal(t, where, m, "endTimeUnixNano")
	if s.end < s.start {
		t.Fatalf("%s: span %s ends before it starts", where, s.spanID)
	}
	if st, ok := m["status"]; ok {
		code, ok := st.(map[string]any)["code"].(json.Number)
		if !ok {
			t.Fatalf("%s: status code is not a number", where)
		}
		if c, _ := code.Int64(); c < 0 || c > 2 {
			t.Fatalf("%s: status code %d out of range", where, c)
		}
	}
	return s
}

func list(t *testing.T, where string, m any, key string) []any {
	t.Helper()
	v, ok := m.(map[string]any)[key].([]any)
	if !ok {
		t.Fatalf("%s: %q is not an array", where, key)
	}
	return v
}

func obj(t *testing.T, where string, m any, key string) map[string]any {
	t.Helper()
	v, ok := m.(map[string]any)[key].(map[string]any)
	if !ok {
		t.Fatalf("%s: %q is not an object", where, key)
	}
	return v
}

func str(t *testing.T, where string, m map[string]any, key string) string {
	t.Helper()
	v, ok := m[key].(string)
	if !ok {
		t.Fatalf("%s: %q is not a string", where, key)
	}
	return v
}

func decimal(t *testing.T, where string, m map[string]any, key string) int64 {
	t.Helper()
	s := str(t, where, m, key)
	if !decimalPattern.MatchString(s) {
		t.Fatalf("%s: %s %q is not a decimal string", where, key, s)
	}
	v, err := strconv.ParseInt(s, 10, 64)
	if err != nil {
		t.Fatalf("%s: %s: %v", where, key, err)
	}
	return v
}

// attrs decodes an attribute list (an array of key/value objects with
// unique keys) into text values.
func attrs(t *testing.T, where string, m map[string]any) map[string]string {
	t.Helper()
	out := map[string]string{}
	raw, ok := m["attributes"]
	if !ok {
		return out
	}
	arr, ok := raw.([]any)
	if !ok {
		t.Fatalf("%s: attributes is not an array", where)
	}
	for _, kv := range arr {
		k := str(t, where, kv.(map[string]any), "key")
		if _, dup := out[k]; dup {
			t.Fatalf("%s: duplicate attribute %q", where, k)
		}
		v := obj(t, where, kv, "value")
		if len(v) != 1 {
			t.Fatalf("%s: attribute %q value has %d fields, want exactly one", where, k, len(v))
		}
		switch {
		case v["stringValue"] != nil:
			out[k] = str(t, where, v, "stringValue")
		case v["intValue"] != nil:
			out[k] = strconv.FormatInt(decimal(t, where, v, "intValue"), 10)
		default:
			t.Fatalf("%s: attribute %q has an unexpected value %v", where, k, v)
		}
	}
	return out
}

// checkTraceShape checks one trace's tree: exactly one root, every parent
// present, children within their parent's interval and siblings one after
// another (the generator models sequential work).
func checkTraceShape(t *testing.T, id string, tr *jsonTrace) (root *jsonSpan) {
	t.Helper()
	byID := map[string]*jsonSpan{}
	for _, s := range tr.spans {
		if byID[s.spanID] != nil {
			t.Fatalf("trace %s: duplicate span ID %s", id, s.spanID)
		}
		byID[s.spanID] = s
	}
	children := map[string][]*jsonSpan{}
	for _, s := range tr.spans {
		if s.parentID == "" {
			if root != nil {
				t.Fatalf("trace %s: two root spans", id)
			}
			root = s
			continue
		}
		p := byID[s.parentID]
		if p == nil {
			t.Fatalf("trace %s: span %s has no parent %s in the file", id, s.spanID, s.parentID)
		}
		if s.start < p.start || s.end > p.end {
			t.Errorf("trace %s: span %s [%d,%d] not inside parent %s [%d,%d]", id, s.spanID, s.start, s.end, p.spanID, p.start, p.end)
		}
		children[p.spanID] = append(children[p.spanID], s)
	}
	if root == nil {
		t.Fatalf("trace %s: no root span", id)
	}
	for pid, cs := range children {
		sort.Slice(cs, func(i, j int) bool { return cs[i].start < cs[j].start })
		for i := 1; i < len(cs); i++ {
			if cs[i].start < cs[i-1].end {
				t.Errorf("trace %s: children of %s overlap: %s and %s", id, pid, cs[i-1].spanID, cs[i].spanID)
			}
		}
	}
	return root
}
