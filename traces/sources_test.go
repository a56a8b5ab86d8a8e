package traces

import (
	"bytes"
	"errors"
	"math"
	"strings"
	"testing"

	"github.com/google/pprof/profile"
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

// Values whose sum an int64 cannot hold are refused, never added up into
// negative totals: sample values, and span durations from a writer that
// wrote some times in another unit.
func TestOverflowingSums(t *testing.T) {
	p := testProfile("samples/count")
	big := *p.Sample[0]
	big.Value = []int64{math.MaxInt64/2 + 10}
	p.Sample = []*profile.Sample{&big, &big}
	_, err := load(t, encode(t, p, false))
	if !errors.Is(err, ErrLimit) || !strings.Contains(err.Error(), "add up to more than") {
		t.Errorf("profile: err = %v", err)
	}

	tr2 := "0102030405060708090a0b0c0d0e0f11"
	data := lines(line(tres{"api", []tspan{
		{trace: tr1, id: sA, name: "a", kind: 2, start: plausibleNanos, end: math.MaxInt64 - 1},
		{trace: tr2, id: sB, name: "b", kind: 2, start: plausibleNanos, end: math.MaxInt64 - 1}}}))
	l := NewLoader(Options{})
	if err := l.Add("big.jsonl", strings.NewReader(data)); err != nil {
		t.Fatal(err)
	}
	if _, err := l.Source(); !errors.Is(err, ErrLimit) || !strings.Contains(err.Error(), "another unit") {
		t.Errorf("spans: err = %v", err)
	}
}

// A span with its start in milliseconds and its end in nanoseconds since
// the epoch (a buggy writer) gets duration 0 and a warning, not a
// duration of half a century.
func TestMixedTimeUnits(t *testing.T) {
	data := lines(line(tres{"api", []tspan{
		{trace: tr1, id: sA, name: "root", kind: 2, start: t0, end: t0 + sec},
		{trace: tr1, id: sB, parent: sA, name: "ms", kind: 1, start: t0 / 1_000_000, end: t0 + 2}}}))
	src := mustCollect(t, Options{}, input{"units.jsonl", data})
	if n := warningCount(src, WarnMixedTimeUnits); n != 1 {
		t.Errorf("%d %s warnings: %v", n, WarnMixedTimeUnits, src.Warnings.Strings())
	}
	for i := range src.Paths.Len() {
		if d := src.Paths.Value(i, 0); d < 0 || d > sec {
			t.Errorf("path %d: duration %d", i, d)
		}
	}
	if _, err := collect(Options{Strict: true}, input{"units.jsonl", data}); !errors.Is(err, ErrSpanRepair) {
		t.Errorf("strict: err = %v", err)
	}
}

// A database span of unspecified kind is taken as a CLIENT span, with a
// warning, so that its call is not lost (nor taken as application code).
func TestDatabaseSpanOfUnknownKind(t *testing.T) {
	data := lines(line(tres{"api", []tspan{
		{trace: tr1, id: sA, name: "root", kind: 2, start: t0, end: t0 + sec},
		{trace: tr1, id: sB, parent: sA, name: "SELECT plants", kind: 0, start: t0 + 1, end: t0 + 2,
			attrs: []attr{str("db.system.name", "postgresql"), str("db.query.text", "SELECT 1")}}}}))
	src := mustCollect(t, Options{}, input{"kind.jsonl", data})
	if n := warningCount(src, WarnUnknownSpanKind); n != 1 {
		t.Errorf("%d %s warnings: %v", n, WarnUnknownSpanKind, src.Warnings.Strings())
	}
	p := src.Paths.At(1)
	if f := src.Frames[p.Frames[1]]; f.SpanKind != SpanKindClient || f.Protocol != ProtocolDatabase || p.Call == 0 {
		t.Errorf("frame %+v, call %d", f, p.Call)
	}
	if _, err := collect(Options{Strict: true}, input{"kind.jsonl", data}); !errors.Is(err, ErrSpanRepair) {
		t.Errorf("strict: err = %v", err)
	}
}
