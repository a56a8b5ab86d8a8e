package traces

import (
	"bytes"
	stdjson "encoding/json"
	"errors"
	"strings"
	"testing"

	"github.com/google/pprof/profile"
	"google.golang.org/protobuf/encoding/protowire"
)

// TestBinaryErrorPositions is issue 13 item 12 for binary input: a
// profile that the pprof library's validity check refuses is reported at
// the byte of the offending message. The profiles are encoded by the pprof
// library and the offsets checked by decoding the message found there
// with protowire (the official protobuf wire decoder).
func TestBinaryErrorPositions(t *testing.T) {
	dupFunction := testProfile("samples/count")
	dupFunction.Function[3].ID = dupFunction.Function[2].ID // two functions with ID 3
	badValues := testProfile("samples/count", "cpu/nanoseconds")
	badValues.Sample[0].Value = badValues.Sample[0].Value[:1]
	for _, tc := range []struct {
		name  string
		p     *profile.Profile
		field protowire.Number
		id    uint64
	}{
		{"repeated function id", dupFunction, pbFunction, 3},
		{"values unlike types", badValues, pbSample, 0},
	} {
		t.Run(tc.name, func(t *testing.T) {
			var buf bytes.Buffer
			if err := tc.p.WriteUncompressed(&buf); err != nil {
				t.Fatal(err)
			}
			data := buf.Bytes()
			_, err := load(t, data)
			var pe *ParseError
			if !errors.As(err, &pe) || !pe.Binary || !strings.Contains(err.Error(), "byte ") {
				t.Fatalf("err = %v, want a ParseError with a byte offset", err)
			}
			num, typ, n := protowire.ConsumeTag(data[pe.Offset:])
			if n < 0 || num != tc.field || typ != protowire.BytesType {
				t.Fatalf("byte %d holds field %d, want field %d", pe.Offset, num, tc.field)
			}
			if tc.id != 0 {
				body, _ := protowire.ConsumeBytes(data[pe.Offset+int64(n):])
				if got := messageID(body); got != tc.id {
					t.Errorf("the message at byte %d has id %d, want %d", pe.Offset, got, tc.id)
				}
			}
		})
	}
}

// TestSkippedInputPosition: a skipped input's warning carries the line
// and column of its error as "FILE:LINE:COLUMN:", not "FILE: :L:C:" (the
// attack's B.jsonl: :51:529:).
func TestSkippedInputPosition(t *testing.T) {
	l := NewLoader(Options{KeepGoing: true, Limits: Limits{MaxDepth: 5}})
	good := `{"resourceSpans":[]}` + "\n"
	if err := l.Add("B.jsonl", strings.NewReader(good+good+`{"resourceSpans":[[[[[[[]]]]]]]}`+"\n")); err != nil {
		t.Fatal(err)
	}
	sum := l.warnings.Summary()
	if len(sum) != 1 {
		t.Fatalf("warnings %+v", sum)
	}
	w := sum[0].Examples[0].String()
	// The sixth bracket, too deep, is at column 22.
	if !strings.HasPrefix(w, "B.jsonl:3:22: ") || strings.Contains(w, ": :") {
		t.Errorf("warning %q, want it to start B.jsonl:3:COLUMN:", w)
	}
}

// TestDocumentWarningLines is issue 13 item 12 for pretty-printed
// documents: a warning about a span names the line the span starts on,
// not line 1. The document is indented by encoding/json (the standard
// library), and the expected line is found by searching the text.
func TestDocumentWarningLines(t *testing.T) {
	span := func(id, parent string, kind int) map[string]any {
		return map[string]any{"traceId": "5b8efff798038103d269b633813fc60c", "spanId": id, "parentSpanId": parent,
			"name": "GET /plants", "kind": kind, "startTimeUnixNano": "1767225600000000000", "endTimeUnixNano": "1767225600050000000"}
	}
	doc := map[string]any{"resourceSpans": []any{map[string]any{"scopeSpans": []any{map[string]any{"spans": []any{
		span("eee19b7ec3c1b174", "", 2), span("eee19b7ec3c1b173", "eee19b7ec3c1b174", 3),
		span("eee19b7ec3c1b172", "00000000000000ff", 3), // a client span whose parent is missing: an orphan
	}}}}}}
	data, err := stdjson.MarshalIndent(doc, "", "  ")
	if err != nil {
		t.Fatal(err)
	}
	c := NewSpanCollector(Options{})
	if err := c.Add("doc.json", bytes.NewReader(data)); err != nil {
		t.Fatal(err)
	}
	src, err := c.Source()
	if err != nil {
		t.Fatal(err)
	}
	// The orphan's object opens on the line before its first key
	// (encoding/json sorts keys: "endTimeUnixNano" comes first).
	at := bytes.Index(data, []byte(`"spanId": "eee19b7ec3c1b172"`))
	open := bytes.LastIndexByte(data[:at], '{')
	want := 1 + bytes.Count(data[:open], []byte{'\n'})
	var got []int
	for _, s := range src.Warnings.Summary() {
		if s.Kind == WarnOrphanSpan {
			for _, e := range s.Examples {
				got = append(got, e.Line)
			}
		}
	}
	if len(got) != 1 || got[0] != want || want < 20 {
		t.Errorf("orphan warning lines %v, want [%d]", got, want)
	}
}
