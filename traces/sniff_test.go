package traces

import (
	"errors"
	"strings"
	"testing"
)

// spanLine is one OTLP/JSON export request holding one database span.
func spanLine(id string) string {
	return `{"resourceSpans":[{"resource":{"attributes":[{"key":"service.name","value":{"stringValue":"greenhouse-web"}}]},` +
		`"scopeSpans":[{"spans":[{"traceId":"5b8efff798038103d269b633813fc60c","spanId":"` + id + `","name":"SELECT plants","kind":3,` +
		`"startTimeUnixNano":"1767225600000000000","endTimeUnixNano":"1767225600001000000"}]}]}]}`
}

// TestBadFirstLineKeepsGoing is issue 13 item 12 and issue 15 item 6: a
// JSON-lines file whose first line is broken is still JSON lines (not a
// protobuf, not one broken document): with --keep-going its good lines are
// kept, without it the error names line 1.
func TestBadFirstLineKeepsGoing(t *testing.T) {
	for _, first := range []string{
		`{"resourceSpans":[{"scopeSpans": oops`, // a broken object
		`garbage`,                               // not JSON at all
		`[`,                                     // an unclosed array
	} {
		data := first + "\n" + spanLine("eee19b7ec3c1b174") + "\n" + spanLine("eee19b7ec3c1b173") + "\n"
		l := NewLoader(Options{KeepGoing: true})
		if err := l.Add("B.jsonl", strings.NewReader(data)); err != nil {
			t.Fatalf("%q: %v", first, err)
		}
		src, err := l.Source()
		if err != nil {
			t.Fatalf("%q: %v", first, err)
		}
		if src.Paths.Len() != 2 {
			t.Errorf("%q: %d paths, want the 2 good lines", first, src.Paths.Len())
		}
		var kinds []string
		for _, s := range src.Warnings.Summary() {
			kinds = append(kinds, s.Kind)
			if s.Kind == WarnMalformedLine && s.Examples[0].Line != 1 {
				t.Errorf("%q: malformed line reported at line %d", first, s.Examples[0].Line)
			}
		}
		if strings.Join(kinds, ",") != WarnMalformedLine {
			t.Errorf("%q: warnings %v, want one malformed-line", first, kinds)
		}

		err = NewLoader(Options{}).Add("B.jsonl", strings.NewReader(data))
		var pe *ParseError
		if !errors.As(err, &pe) || pe.Line != 1 {
			t.Errorf("%q without --keep-going: %v, want an error at line 1", first, err)
		}
	}
}

// TestArrayInput: a file holding a JSON array of export requests is read
// by the Loader as by the span reader (it was refused as a bad protobuf).
func TestArrayInput(t *testing.T) {
	data := "[" + spanLine("eee19b7ec3c1b174") + ",\n" + spanLine("eee19b7ec3c1b173") + "]\n"
	l := NewLoader(Options{})
	if err := l.Add("a.json", strings.NewReader(data)); err != nil {
		t.Fatal(err)
	}
	src, err := l.Source()
	if err != nil {
		t.Fatal(err)
	}
	if src.Paths.Len() != 2 || src.Inputs[0].Format != FormatOTLPJSON {
		t.Errorf("%d paths, format %q", src.Paths.Len(), src.Inputs[0].Format)
	}
}

// FuzzSniff holds the sniffing function and the wire walk that places
// the pprof library's complaints to their contracts on any bytes: a
// non-empty input has a format, gzip's magic wins, JSON layout decisions
// never panic, and a located problem lies inside the data.
func FuzzSniff(f *testing.F) {
	f.Add([]byte(`{"resourceSpans":[]}`+"\n"), "mismatch: sample has 1 values vs. 2 types")
	f.Add([]byte("garbage\n{}\n"), "multiple functions with same id: 3")
	f.Add([]byte("\x1f\x8b\x08\x00"), "found location with reserved id=0")
	f.Add([]byte("\x0a\x04\x08\x01\x10\x02\x12\x03\x10\x01\x10"), "mismatch: sample has 2 values vs. 1 types")
	f.Fuzz(func(t *testing.T, data []byte, msg string) {
		prefix := data[:min(len(data), sniffPrefix)]
		got := Sniff(prefix)
		if (got == "") != (len(prefix) == 0) {
			t.Fatalf("Sniff(%q) = %q", prefix, got)
		}
		if len(prefix) >= 2 && prefix[0] == 0x1f && prefix[1] == 0x8b && got != FormatGzip {
			t.Fatalf("gzip magic sniffed as %q", got)
		}
		jsonLayout(data, false)
		jsonLayout(data, true)
		if off, ok := locateProblem(data, msg); ok && (off < 0 || off >= int64(len(data))) {
			t.Fatalf("problem located at %d of %d bytes", off, len(data))
		}
	})
}
