package traces

import (
	"bytes"
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"strings"
	"testing"

	"github.com/google/pprof/profile"
)

// testProfile builds a profile with the pprof library (the reference
// encoder): main.main → app.work (with app.helper inlined into it) →
// database/sql.(*DB).Query.
func testProfile(types ...string) *profile.Profile {
	fn := func(id uint64, name, file string) *profile.Function {
		return &profile.Function{ID: id, Name: name, SystemName: name, Filename: file}
	}
	mainF := fn(1, "main.main", "/h/app/main.go")
	work := fn(2, "example.com/app.work", "/h/app/work.go")
	helper := fn(3, "example.com/app.helper", "/h/app/helper.go")
	query := fn(4, "database/sql.(*DB).Query", "/usr/local/go/src/database/sql/sql.go")
	locQuery := &profile.Location{ID: 1, Line: []profile.Line{{Function: query, Line: 1700}}}
	// Inlined: Line[0] is the inlined callee, the last Line the real function.
	locWork := &profile.Location{ID: 2, Line: []profile.Line{{Function: helper, Line: 7}, {Function: work, Line: 21}}}
	locMain := &profile.Location{ID: 3, Line: []profile.Line{{Function: mainF, Line: 10}}}
	p := &profile.Profile{
		PeriodType:    &profile.ValueType{Type: "cpu", Unit: "nanoseconds"},
		Period:        10_000_000,
		DurationNanos: 1e9,
		Function:      []*profile.Function{mainF, work, helper, query},
		Location:      []*profile.Location{locQuery, locWork, locMain},
	}
	for _, t := range types {
		typ, unit, _ := strings.Cut(t, "/")
		p.SampleType = append(p.SampleType, &profile.ValueType{Type: typ, Unit: unit})
	}
	vals := make([]int64, len(types))
	for i := range vals {
		vals[i] = int64(i + 2)
	}
	p.Sample = []*profile.Sample{{
		Location: []*profile.Location{locQuery, locWork, locMain},
		Value:    vals,
		Label:    map[string][]string{"http.route": {"/plants"}},
		NumLabel: map[string][]int64{"bytes": {512}},
		NumUnit:  map[string][]string{"bytes": {"bytes"}},
	}}
	return p
}

func encode(t *testing.T, p *profile.Profile, gz bool) []byte {
	t.Helper()
	var buf bytes.Buffer
	var err error
	if gz {
		err = p.Write(&buf)
	} else {
		err = p.WriteUncompressed(&buf)
	}
	if err != nil {
		t.Fatal(err)
	}
	return buf.Bytes()
}

func load(t *testing.T, inputs ...[]byte) (*Source, error) {
	t.Helper()
	l := NewLoader(Options{})
	for i, in := range inputs {
		if err := l.Add("p"+string(rune('0'+i))+".pb.gz", bytes.NewReader(in)); err != nil {
			return nil, err
		}
	}
	return l.Source()
}

func TestPprofPathsAndInlining(t *testing.T) {
	for _, gz := range []bool{true, false} {
		src, err := load(t, encode(t, testProfile("samples/count", "cpu/nanoseconds"), gz))
		if err != nil {
			t.Fatal(err)
		}
		if src.Paths.Len() != 1 {
			t.Fatalf("paths = %d", src.Paths.Len())
		}
		var got []string
		for _, f := range src.Paths.At(0).Frames {
			fr := src.Frames[f]
			got = append(got, fr.Function+":"+itoa(fr.Line))
		}
		want := "main.main:10 example.com/app.work:21 example.com/app.helper:7 database/sql.(*DB).Query:1700"
		if strings.Join(got, " ") != want {
			t.Errorf("gzip=%v frames = %v, want %s (root first, inlined innermost last)", gz, got, want)
		}
		if src.DefaultValue != 1 {
			t.Errorf("default value = %d, want the last sample type", src.DefaultValue)
		}
		if v, _ := src.Paths.At(0).Labels.Get("http.route"); v != "/plants" {
			t.Errorf("route label = %q", v)
		}
		if ls := src.Paths.At(0).Labels.String(); !strings.Contains(ls, "bytes=512bytes") {
			t.Errorf("numeric label lost: %s", ls)
		}
		if src.Period != 10_000_000 || src.DurationNanos != 1e9 || src.PeriodType.Type != "cpu" {
			t.Errorf("period/duration = %d %d %v", src.Period, src.DurationNanos, src.PeriodType)
		}
		if len(src.Inputs) != 1 || len(src.Inputs[0].SHA256) != 64 || src.Inputs[0].Format != "pprof" {
			t.Errorf("inputs = %+v", src.Inputs)
		}
	}
}

func TestPprofMerge(t *testing.T) {
	a := encode(t, testProfile("samples/count", "cpu/nanoseconds"), true)
	b := encode(t, testProfile("samples/count", "cpu/nanoseconds"), true)
	src, err := load(t, a, b)
	if err != nil {
		t.Fatal(err)
	}
	if src.Paths.Len() != 2 || src.Total(0) != 4 || src.DurationNanos != 2e9 {
		t.Errorf("merged: %d paths, total %d, duration %d", src.Paths.Len(), src.Total(0), src.DurationNanos)
	}
	// Interning: the second profile reuses the first one's frames.
	if len(src.Frames) != 5 {
		t.Errorf("frames = %d, want 4 (+ the zero frame)", len(src.Frames))
	}
	// The same types in another order still merge, value by value.
	c := encode(t, testProfile("cpu/nanoseconds", "samples/count"), true)
	src, err = load(t, a, c)
	if err != nil {
		t.Fatal(err)
	}
	if src.Paths.At(1).Values[0] != 3 || src.Paths.At(1).Values[1] != 2 {
		t.Errorf("reordered values = %v, want [3 2]", src.Paths.At(1).Values)
	}
}

func TestPprofMergeMismatch(t *testing.T) {
	a := encode(t, testProfile("samples/count", "cpu/nanoseconds"), true)
	b := encode(t, testProfile("goroutine/count"), true)
	_, err := load(t, a, b)
	if !errors.Is(err, ErrMismatch) {
		t.Fatalf("err = %v, want ErrMismatch", err)
	}
	for _, want := range []string{"p1.pb.gz", "goroutine/count", "samples/count"} {
		if !strings.Contains(err.Error(), want) {
			t.Errorf("error %q does not mention %q", err, want)
		}
	}
}

func TestValueIndex(t *testing.T) {
	src, err := load(t, encode(t, testProfile("samples/count", "cpu/nanoseconds"), true))
	if err != nil {
		t.Fatal(err)
	}
	for name, want := range map[string]int{"": 1, "samples": 0, "cpu": 1, "cpu/nanoseconds": 1} {
		if got, err := src.ValueIndex(name); err != nil || got != want {
			t.Errorf("ValueIndex(%q) = %d, %v; want %d", name, got, err, want)
		}
	}
	_, err = src.ValueIndex("alloc_space")
	var ve *ValueError
	if !errors.As(err, &ve) || !strings.Contains(err.Error(), "samples, cpu") {
		t.Errorf("err = %v, want the valid names listed", err)
	}
}

func TestPprofDefaultSampleType(t *testing.T) {
	p := testProfile("alloc_objects/count", "alloc_space/bytes", "inuse_objects/count", "inuse_space/bytes")
	p.DefaultSampleType = "alloc_space"
	src, err := load(t, encode(t, p, true))
	if err != nil {
		t.Fatal(err)
	}
	if src.DefaultValue != 1 {
		t.Errorf("default = %d, want alloc_space (1)", src.DefaultValue)
	}
}

func TestBadInputs(t *testing.T) {
	good := encode(t, testProfile("samples/count"), true)
	tests := []struct {
		name  string
		input []byte
		want  string
	}{
		{"empty", nil, "p0.pb.gz: byte 0: unrecognised input format: the input is empty"},
		{"junk", []byte("hello, this is not a profile"), "p0.pb.gz: byte 2: unrecognised input format: neither OTLP/JSON nor a pprof profile"},
		{"truncated gzip", good[:len(good)/2], "p0.pb.gz"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			_, err := load(t, tt.input)
			if err == nil || !strings.Contains(err.Error(), tt.want) {
				t.Errorf("err = %v, want it to contain %q", err, tt.want)
			}
		})
	}
}

func itoa(n int64) string {
	if n == 0 {
		return "0"
	}
	s := ""
	for n > 0 {
		s = string(rune('0'+n%10)) + s
		n /= 10
	}
	return s
}

// TestInputDigest checks the input's SHA-256 against crypto/sha256 over
// the file's bytes (FIPS 180-4), and that SkipDigest leaves it empty.
func TestInputDigest(t *testing.T) {
	data := encode(t, testProfile("samples/count"), true)
	want := sha256.Sum256(data)
	for _, skip := range []bool{false, true} {
		l := NewLoader(Options{SkipDigest: skip})
		if err := l.Add("p.pb.gz", bytes.NewReader(data)); err != nil {
			t.Fatal(err)
		}
		src, err := l.Source()
		if err != nil {
			t.Fatal(err)
		}
		got := src.Inputs[0].SHA256
		if skip && got != "" || !skip && got != hex.EncodeToString(want[:]) {
			t.Errorf("SkipDigest=%v: SHA256 %q", skip, got)
		}
		if src.Inputs[0].Bytes != int64(len(data)) {
			t.Errorf("SkipDigest=%v: %d bytes, want %d", skip, src.Inputs[0].Bytes, len(data))
		}
	}
}

// TestAddSized: a profile read with its size known (exact, too small,
// too large; raw and gzipped) reads as with Add.
func TestAddSized(t *testing.T) {
	p := testProfile("cpu/nanoseconds")
	base := p.Sample[0]
	for i := range 5000 { // about 100 KB: several pieces when the size is guessed small
		s := *base
		s.Value = []int64{int64(i + 1)}
		s.Label = map[string][]string{"http.route": {"/plants/" + strings.Repeat("x", i%50)}}
		p.Sample = append(p.Sample, &s)
	}
	for _, gz := range []bool{false, true} {
		data := encode(t, p, gz)
		want, err := load(t, data)
		if err != nil {
			t.Fatal(err)
		}
		for _, size := range []int64{int64(len(data)), 10, int64(len(data)) * 100} {
			l := NewLoader(Options{})
			if err := l.AddSized("p.pb.gz", bytes.NewReader(data), size); err != nil {
				t.Fatalf("gzip %v, size %d: %v", gz, size, err)
			}
			got, err := l.Source()
			if err != nil {
				t.Fatalf("gzip %v, size %d: %v", gz, size, err)
			}
			if got.Paths.Len() != want.Paths.Len() || len(got.Frames) != len(want.Frames) || got.Inputs[0].SHA256 != want.Inputs[0].SHA256 {
				t.Fatalf("gzip %v, size %d: %d paths, %d frames, digest %s; want %d, %d, %s", gz, size,
					got.Paths.Len(), len(got.Frames), got.Inputs[0].SHA256, want.Paths.Len(), len(want.Frames), want.Inputs[0].SHA256)
			}
			for i := range got.Paths.Len() {
				if g, w := got.Paths.At(i), want.Paths.At(i); g.Values[0] != w.Values[0] || g.Labels.Labels[0] != w.Labels.Labels[0] {
					t.Fatalf("gzip %v, size %d: path %d differs", gz, size, i)
				}
			}
		}
	}
}
