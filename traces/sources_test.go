package traces

import (
	"bytes"
	"errors"
	"strings"
	"testing"
)

// A load test's output folder holds profiles and traces side by side:
// without --source the run is refused naming the inputs of each kind and
// the flag; with it, the other kind is skipped with a note.
func TestMixedKinds(t *testing.T) {
	prof := encode(t, testProfile("samples/count"), true)
	spans := lines(line(tres{"api", []tspan{{trace: tr1, id: sA, name: "root", kind: 2, start: t0, end: t0 + sec}}}))
	add := func(l *Loader) {
		t.Helper()
		for _, in := range []struct {
			name string
			data []byte
		}{{"run/cpu.pb.gz", prof}, {"run/spans.jsonl", []byte(spans)}, {"run/heap.pb.gz", prof}} {
			if err := l.Add(in.name, bytes.NewReader(in.data)); err != nil {
				t.Fatal(err)
			}
		}
	}
	l := NewLoader(Options{})
	add(l)
	_, err := l.Source()
	if !errors.Is(err, ErrMismatch) {
		t.Fatalf("err = %v, want ErrMismatch", err)
	}
	for _, want := range []string{"profiles (run/cpu.pb.gz, run/heap.pb.gz)", "traces (run/spans.jsonl)", "--source profiles", "--source traces"} {
		if !strings.Contains(err.Error(), want) {
			t.Errorf("error %q lacks %q", err, want)
		}
	}

	for _, tc := range []struct {
		kind  Kind
		paths int
		notes int
	}{{Spans, 1, 2}, {Profile, 2, 1}} {
		l := NewLoader(Options{Source: tc.kind})
		add(l)
		src, err := l.Source()
		if err != nil {
			t.Fatal(err)
		}
		if src.Kind != tc.kind || len(src.Notes) != tc.notes || !strings.Contains(src.Notes[0], "--source "+tc.kind.plural()) {
			t.Errorf("--source %s: kind %s, notes %q", tc.kind.plural(), src.Kind, src.Notes)
		}
	}
}

// JSON files that are not OTLP (a snapshot, a rules file, a truth file)
// are skipped with a note; a run that yields no span or sample fails.
func TestForeignJSON(t *testing.T) {
	spans := lines(line(tres{"api", []tspan{{trace: tr1, id: sA, name: "root", kind: 2, start: t0, end: t0 + sec}}}))
	l := NewLoader(Options{})
	for name, data := range map[string]string{
		"a/spans.jsonl": spans,
		"a/truth.json":  "{\n  \"services\": {}\n}\n",
		"a/snap.json":   `{"schema":"culprit.snapshot/v1"}`,
	} {
		if err := l.Add(name, strings.NewReader(data)); err != nil {
			t.Fatal(err)
		}
	}
	src, err := l.Source()
	if err != nil {
		t.Fatal(err)
	}
	if len(src.Notes) != 2 || len(src.Inputs) != 1 || src.Warnings.Len() != 0 {
		t.Errorf("notes %q, inputs %v, warnings %v", src.Notes, src.Inputs, src.Warnings.Strings())
	}

	for _, tc := range []struct {
		name, data string
		opts       Options
		want       string
	}{
		{"rules.json", `{"rules":[]}`, Options{}, "no input yielded any span or sample (rules.json skipped"},
		{"empty.jsonl", `{"resourceSpans":[]}`, Options{}, "no input yielded any span or sample"},
		{"spans.jsonl", spans, Options{Service: "nursery"}, `no spans of service "nursery" in the inputs (services found: api`},
	} {
		l := NewLoader(tc.opts)
		if err := l.Add(tc.name, strings.NewReader(tc.data)); err != nil {
			t.Fatal(err)
		}
		if _, err := l.Source(); err == nil || !strings.Contains(err.Error(), tc.want) {
			t.Errorf("%s: err = %v, want %q", tc.name, err, tc.want)
		}
	}
}
