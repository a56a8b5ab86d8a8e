package traces

import (
	"bytes"
	"compress/gzip"
	"errors"
	"io"
	"reflect"
	"strings"
	"testing"

	"github.com/google/pprof/profile"
)

// fuzzMaxBytes keeps the fuzzer's inputs from exhausting memory.
const fuzzMaxBytes = 4 << 20

// loadOne reads data as the input named name through a Loader, with
// limits low enough for the fuzzer to reach every limit check.
func loadOne(name string, data []byte) (*Source, error) {
	limits := Limits{MaxBytes: fuzzMaxBytes, MaxRatio: 200, MaxLineBytes: 1 << 16, MaxDepth: 64, MaxFrames: 1 << 12}
	l := NewLoader(Options{Limits: limits, Workers: 1})
	if err := l.Add(name, bytes.NewReader(data)); err != nil {
		return nil, err
	}
	return l.Source()
}

// FuzzPprof feeds arbitrary bytes to the Loader. Every error must render
// (non-empty, naming the input); every source read from a profile must
// keep the model's invariants and read the same again after a round trip
// through the pprof library (the reference decoder and encoder), wherever
// the library's own round trip keeps the profile unchanged:
// Loader(data) = Loader(WriteUncompressed(ParseData(gunzip(data)))).
func FuzzPprof(f *testing.F) {
	var raw, gz bytes.Buffer
	p := testProfile("samples/count", "cpu/nanoseconds")
	if err := p.WriteUncompressed(&raw); err != nil {
		f.Fatal(err)
	}
	if err := p.Write(&gz); err != nil {
		f.Fatal(err)
	}
	f.Add(raw.Bytes())
	f.Add(gz.Bytes())
	f.Add(raw.Bytes()[:raw.Len()*2/3])
	f.Add(gz.Bytes()[:gz.Len()/2])
	// Two members, as a gzip reader concatenates them (RFC 1952, section 2.2).
	f.Add(append(append([]byte(nil), gz.Bytes()...), gz.Bytes()...))
	var twice bytes.Buffer
	zw := gzip.NewWriter(&twice)
	zw.Write(gz.Bytes())
	zw.Close()
	f.Add(twice.Bytes())

	const name = "fuzz.pb"
	f.Fuzz(func(t *testing.T, data []byte) {
		src, err := loadOne(name, data)
		if err != nil {
			msg := err.Error()
			if msg == "" {
				t.Fatalf("error %T renders as nothing", err)
			}
			if !strings.Contains(msg, name) {
				t.Fatalf("error does not name the input: %v", err)
			}
			var pe *ParseError
			if errors.As(err, &pe) && pe.File != name {
				t.Fatalf("ParseError.File = %q, want %q", pe.File, name)
			}
			return
		}
		if err := src.Validate(); err != nil {
			t.Fatalf("Source returned an invalid source: %v", err)
		}
		if src.Kind != Profile {
			return // OTLP/JSON: FuzzOTLPJSON checks those
		}
		// The Loader takes off one gzip layer and hands the rest to
		// profile.ParseData, which takes off another.
		plain := data
		if bytes.HasPrefix(data, gzipMagic) {
			zr, err := gzip.NewReader(bytes.NewReader(data))
			if err != nil {
				t.Fatalf("the Loader read a gzip stream that does not open: %v", err)
			}
			if plain, err = io.ReadAll(io.LimitReader(zr, fuzzMaxBytes+1)); err != nil {
				t.Fatalf("the Loader read a gzip stream that does not decompress: %v", err)
			}
		}
		ref, err := profile.ParseData(plain)
		if err != nil {
			t.Fatalf("the Loader read what the pprof library refuses: %v", err)
		}
		var again bytes.Buffer
		if err := ref.WriteUncompressed(&again); err != nil {
			t.Fatal(err)
		}
		// Where the library's own round trip changes the profile (it drops
		// a numeric label of value 0, for one), there is nothing to compare.
		if back, err := profile.ParseData(again.Bytes()); err != nil || back.String() != ref.String() {
			return
		}
		src2, err := loadOne(name, again.Bytes())
		if err != nil {
			t.Fatalf("re-encoded profile does not read: %v", err)
		}
		if !reflect.DeepEqual(src.ValueTypes, src2.ValueTypes) || src.DefaultValue != src2.DefaultValue ||
			src.Period != src2.Period || src.PeriodType != src2.PeriodType {
			t.Fatalf("value types differ after a round trip: %v %d %d %v; %v %d %d %v",
				src.ValueTypes, src.DefaultValue, src.Period, src.PeriodType,
				src2.ValueTypes, src2.DefaultValue, src2.Period, src2.PeriodType)
		}
		sameSource(t, src, src2)
	})
}
