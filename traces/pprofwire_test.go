package traces

import (
	"bytes"
	"compress/gzip"
	"context"
	"fmt"
	"io"
	"math/rand/v2"
	"os"
	"path/filepath"
	"reflect"
	"runtime/pprof"
	"slices"
	"testing"
	"time"

	"github.com/google/pprof/profile"
)

// normalised returns r with every sample's labels in one order (the
// library keeps labels in maps, so lowerProfile's order is random) and
// empty tables nil.
func normalised(r *rawProfile) *rawProfile {
	c := *r
	c.labels = slices.Clone(r.labels)
	for _, s := range c.samples {
		slices.SortFunc(c.labels[s.labStart:s.labEnd], compareLabels)
	}
	c.sampleTypes, c.locs, c.lines = nilIfEmpty(c.sampleTypes), nilIfEmpty(c.locs), nilIfEmpty(c.lines)
	c.samples, c.sampleLocs = nilIfEmpty(c.samples), nilIfEmpty(c.sampleLocs)
	c.values, c.labels = nilIfEmpty(c.values), nilIfEmpty(c.labels)
	return &c
}

func nilIfEmpty[S ~[]E, E any](s S) S {
	if len(s) == 0 {
		return nil
	}
	return s
}

// libraryRaw decodes data with the pprof library, the reference decoder.
func libraryRaw(data []byte) (*rawProfile, error) {
	p, err := profile.ParseData(data)
	if err != nil {
		return nil, err
	}
	return lowerProfile(p), nil
}

// checkSameAsLibrary fails when the wire decoder takes data but reads it
// differently from the pprof library.
func checkSameAsLibrary(t *testing.T, data []byte) (fast bool) {
	t.Helper()
	got, ok := decodeProfile(data)
	want, err := libraryRaw(data)
	if !ok {
		return false
	}
	if err != nil {
		t.Fatalf("wire decoder took an input the pprof library refuses (%v)", err)
	}
	if g, w := normalised(got), normalised(want); !reflect.DeepEqual(g, w) {
		t.Fatalf("wire decoder and pprof library differ:\n got %+v\nwant %+v", g, w)
	}
	return true
}

// realProfiles records profiles with Go's own runtime/pprof (the real
// producer): a CPU profile of labelled work, and goroutine, heap and
// mutex profiles, uncompressed.
func realProfiles(t *testing.T) map[string][]byte {
	t.Helper()
	out := map[string][]byte{}
	var cpu bytes.Buffer
	if err := pprof.StartCPUProfile(&cpu); err != nil {
		t.Skipf("CPU profiling unavailable: %v", err)
	}
	ctx := pprof.WithLabels(context.Background(), pprof.Labels("http.route", "/plants/{id}", "tier", "gold"))
	sink := 0
	pprof.Do(ctx, pprof.Labels(), func(context.Context) {
		for end := time.Now().Add(300 * time.Millisecond); time.Now().Before(end); {
			sink += burn(2000)
		}
	})
	t.Logf("work checksum %d", sink)
	pprof.StopCPUProfile()
	out["cpu"] = cpu.Bytes()
	for _, name := range []string{"goroutine", "heap", "mutex", "allocs"} {
		var buf bytes.Buffer
		if err := pprof.Lookup(name).WriteTo(&buf, 0); err != nil {
			t.Fatal(err)
		}
		out[name] = buf.Bytes()
	}
	for name, gz := range out {
		out[name] = gunzip(t, gz)
	}
	return out
}

//go:noinline
func burn(n int) int {
	s := 0
	for i := range n {
		s += i * i % 7
	}
	return s
}

func gunzip(t *testing.T, data []byte) []byte {
	t.Helper()
	if !bytes.HasPrefix(data, gzipMagic) {
		return data
	}
	zr, err := gzip.NewReader(bytes.NewReader(data))
	if err != nil {
		t.Fatal(err)
	}
	raw, err := io.ReadAll(zr)
	if err != nil {
		t.Fatal(err)
	}
	return raw
}

// TestWireDecoderMatchesLibrary holds the wire decoder to the pprof
// library (github.com/google/pprof/profile, the reference decoder) on
// profiles written by Go's runtime/pprof, on the demo's profiles, and on
// profiles built with the library's encoder.
func TestWireDecoderMatchesLibrary(t *testing.T) {
	inputs := realProfiles(t)
	demo, _ := filepath.Glob(filepath.Join("..", "cmd", "culprit", "demo", "*.pb.gz"))
	for _, name := range demo {
		data, err := os.ReadFile(name)
		if err != nil {
			t.Fatal(err)
		}
		inputs[filepath.Base(name)] = gunzip(t, data)
	}
	var buf bytes.Buffer
	if err := testProfile("samples/count", "cpu/nanoseconds").WriteUncompressed(&buf); err != nil {
		t.Fatal(err)
	}
	inputs["library-encoded"] = buf.Bytes()
	if len(demo) == 0 {
		t.Fatal("no demo profiles found")
	}
	for name, data := range inputs {
		t.Run(name, func(t *testing.T) {
			if !checkSameAsLibrary(t, data) {
				t.Fatal("the wire decoder did not take a well-formed profile")
			}
		})
	}
}

// TestWireDecoderHandsBack checks that inputs the library refuses or
// reads in a way of its own are handed back to it.
func TestWireDecoderHandsBack(t *testing.T) {
	var buf bytes.Buffer
	if err := testProfile("samples/count").WriteUncompressed(&buf); err != nil {
		t.Fatal(err)
	}
	good := buf.Bytes()
	tests := map[string][]byte{
		"empty":     nil,
		"truncated": good[:len(good)-3],
		"legacy text": []byte("--- contention:\ncycles/second=3000000000\n" +
			"36 1 @ 0x4d 0x61\n"),
		// time_nanos twice: concatenated profiles, which the library refuses.
		"concatenated": append(slices.Clone(good), good...),
		// A string table whose first entry is not empty.
		"first string": {0x32, 0x01, 'x'},
	}
	for name, data := range tests {
		t.Run(name, func(t *testing.T) {
			if _, ok := decodeProfile(data); ok {
				t.Fatal("decodeProfile took it")
			}
		})
	}
}

// FuzzPprofWire: whatever the wire decoder takes, the pprof library (the
// reference decoder) must take too and read the same way.
func FuzzPprofWire(f *testing.F) {
	var buf bytes.Buffer
	if err := testProfile("samples/count", "cpu/nanoseconds").WriteUncompressed(&buf); err != nil {
		f.Fatal(err)
	}
	f.Add(buf.Bytes())
	if data, err := os.ReadFile(filepath.Join("..", "cmd", "culprit", "demo", "greenhouse-v42.goroutine.1.pb.gz")); err == nil {
		if zr, err := gzip.NewReader(bytes.NewReader(data)); err == nil {
			if raw, err := io.ReadAll(zr); err == nil {
				f.Add(raw)
			}
		}
	}
	f.Fuzz(func(t *testing.T, data []byte) {
		if len(data) > fuzzMaxBytes {
			return
		}
		checkSameAsLibrary(t, data)
	})
}

// benchProfile encodes (gzipped) a CPU-like profile of n distinct stacks
// of depth 10–40 over 2,000 functions, with a route label, using the
// pprof library: for benchmarks only.
func benchProfile(b *testing.B, n int) []byte {
	r := rand.New(rand.NewPCG(3, 4))
	p := &profile.Profile{
		SampleType: []*profile.ValueType{{Type: "samples", Unit: "count"}, {Type: "cpu", Unit: "nanoseconds"}},
		PeriodType: &profile.ValueType{Type: "cpu", Unit: "nanoseconds"},
		Period:     10_000_000,
	}
	for i := range 2000 {
		p.Function = append(p.Function, &profile.Function{ID: uint64(i + 1),
			Name: fmt.Sprintf("example.com/app/p%d.f%d", i%40, i), Filename: fmt.Sprintf("/src/app/p%d/f.go", i%40)})
	}
	locs := map[[2]int]*profile.Location{}
	for range n {
		s := &profile.Sample{Value: []int64{1, 10_000_000}, Label: map[string][]string{"http.route": {fmt.Sprintf("/r%d", r.IntN(20))}}}
		for d := 10 + r.IntN(31); len(s.Location) < d; {
			k := [2]int{r.IntN(2000), r.IntN(8)} // function, line
			loc := locs[k]
			if loc == nil {
				loc = &profile.Location{ID: uint64(len(locs) + 1), Line: []profile.Line{{Function: p.Function[k[0]], Line: int64(10 + k[1])}}}
				locs[k] = loc
				p.Location = append(p.Location, loc)
			}
			s.Location = append(s.Location, loc)
		}
		p.Sample = append(p.Sample, s)
	}
	var buf bytes.Buffer
	if err := p.Write(&buf); err != nil {
		b.Fatal(err)
	}
	return buf.Bytes()
}

// BenchmarkPprof reads a profile of 20,000 stacks with culprit's reader
// (decompression, decoding, paths) and, for comparison, parses it with
// the pprof library alone.
func BenchmarkPprof(b *testing.B) {
	data := benchProfile(b, 20_000)
	b.Run("culprit", func(b *testing.B) {
		b.SetBytes(int64(len(data)))
		b.ReportAllocs()
		for b.Loop() {
			l := NewLoader(Options{})
			if err := l.Add("bench.pb.gz", bytes.NewReader(data)); err != nil {
				b.Fatal(err)
			}
			if _, err := l.Source(); err != nil {
				b.Fatal(err)
			}
		}
	})
	b.Run("profile.Parse", func(b *testing.B) {
		b.SetBytes(int64(len(data)))
		b.ReportAllocs()
		for b.Loop() {
			if _, err := profile.Parse(bytes.NewReader(data)); err != nil {
				b.Fatal(err)
			}
		}
	})
}
