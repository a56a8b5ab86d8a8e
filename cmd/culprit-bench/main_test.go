package main

import (
	"bytes"
	"context"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"testing/iotest"
	"time"

	"github.com/google/pprof/profile"
)

// TestMain lets the test binary stand in for culprit-bench when the
// harness re-executes itself to run a reference phase.
func TestMain(m *testing.M) {
	if os.Getenv(childEnv) != "" {
		os.Exit(run(os.Args[1:], os.Stdout, os.Stderr))
	}
	os.Exit(m.Run())
}

// Tiny sizes for the end-to-end test: seconds, not minutes.
const (
	tinySpans   = 20_000
	tinySamples = 20_000
	tinyStacks  = 2_000
)

func runTiny(tb testing.TB) *report {
	tb.Helper()
	cfg := config{GenDir: tb.TempDir(), SpansN: tinySpans, Samples: tinySamples, Stacks: tinyStacks, Scale: true, Runs: 1}
	var log bytes.Buffer
	rep, err := runHarness(context.Background(), cfg, &log)
	if err != nil {
		tb.Fatalf("runHarness: %v\nlog:\n%s", err, log.String())
	}
	return rep
}

func TestHarnessTiny(t *testing.T) {
	if testing.Short() {
		t.Skip("builds culprit and runs every phase; skipped with -short")
	}
	rep := runTiny(t)

	wantPhases := []string{phaseBaselineSelf, phaseBaselineCulprit, phasePprofParse, phasePprofRank,
		phaseOTLPProtojson, phaseOTLPRank, phaseOTLPRank10x}
	if len(rep.Phases) != len(wantPhases) {
		t.Fatalf("got %d phases, want %d", len(rep.Phases), len(wantPhases))
	}
	for i, name := range wantPhases {
		p := rep.Phases[i]
		t.Run(name, func(t *testing.T) {
			if p.Name != name {
				t.Fatalf("phase %d is %q, want %q", i, p.Name, name)
			}
			if len(p.Walls) != 1 || p.Walls[0] <= 0 || p.Walls[0] > time.Minute {
				t.Errorf("wall times %v, want one in (0, 1m]", p.Walls)
			}
			if p.peakRSS() <= 0 && selfPeakRSS() > 0 {
				t.Errorf("peak RSS %d, want > 0 on a system that reports it", p.peakRSS())
			}
		})
	}

	// The generator writes exactly the requested counts (see the usage of
	// cmd/culprit-gen), so the reference decodes must find them.
	if p := rep.phase(phasePprofParse); p.Samples != tinySamples || p.Stacks != tinyStacks {
		t.Errorf("pprof-parse decoded %d samples over %d stacks, want %d over %d", p.Samples, p.Stacks, tinySamples, tinyStacks)
	}
	if p := rep.phase(phaseOTLPProtojson); p.Spans != tinySpans {
		t.Errorf("otlp-protojson decoded %d spans, want %d", p.Spans, tinySpans)
	}
	if in := rep.input("spans"); in.Spans != tinySpans {
		t.Errorf("span scan counted %d, want %d", in.Spans, tinySpans)
	}
	if in := rep.input("spans-big"); in.Spans != 10*tinySpans {
		t.Errorf("span scan of the 10× file counted %d, want %d", in.Spans, 10*tinySpans)
	}

	wantRatios := []string{
		"pprof: rank ÷ profile.Parse, time",
		"OTLP: protojson ÷ rank, time",
		"OTLP: rank peak RSS ÷ spans, bytes",
		"OTLP: rank 10×N ÷ rank N, time",
		"OTLP: rank 10×N peak RSS ÷ spans, bytes",
		"OTLP: rank 10×N ÷ rank N, peak RSS",
	}
	if len(rep.Ratios) != len(wantRatios) {
		t.Fatalf("got %d ratios, want %d", len(rep.Ratios), len(wantRatios))
	}
	for i, name := range wantRatios {
		r := rep.Ratios[i]
		t.Run(name, func(t *testing.T) {
			if r.Name != name {
				t.Fatalf("ratio %d is %q, want %q", i, r.Name, name)
			}
			if !(r.Raw > 0) || math.IsInf(r.Raw, 0) {
				t.Errorf("raw = %v, want finite and positive", r.Raw)
			}
			if !math.IsNaN(r.Net) && (r.Net <= 0 || math.IsInf(r.Net, 0)) {
				t.Errorf("net = %v, want finite and positive, or NaN", r.Net)
			}
		})
	}

	var out bytes.Buffer
	if err := rep.render(&out); err != nil {
		t.Fatal(err)
	}
	text := out.String()
	for _, want := range append(append([]string{"machine:", "peak RSS"}, wantPhases...), wantRatios...) {
		if !strings.Contains(text, want) {
			t.Errorf("output lacks %q:\n%s", want, text)
		}
	}
}

// BenchmarkTargets runs the whole harness at a tiny size and reports the
// target ratios as metrics; -benchtime=1x runs it once. The numbers of a
// tiny run are dominated by start-up; run cmd/culprit-bench for real ones.
func BenchmarkTargets(b *testing.B) {
	if testing.Short() {
		b.Skip("builds culprit and runs every phase; skipped with -short")
	}
	for b.Loop() {
		rep := runTiny(b)
		units := []string{"rank/parse", "protojson/rank", "B/span", "time-10x/1x", "B/span-10x", "rss-10x/1x"}
		for i, r := range rep.Ratios {
			b.ReportMetric(r.Raw, units[i])
		}
	}
}

func TestCountSpanIDKeys(t *testing.T) {
	line := `{"resourceSpans":[{"scopeSpans":[{"spans":[{"traceId":"01","spanId":"02","parentSpanId":"03"},{"spanId":"04","name":"say \"spanId\""}]}]}]}` + "\n"
	big := strings.Repeat(line, 50_000) // crosses many 1 MiB reads
	tests := []struct {
		name string
		r    io.Reader
		want int64
	}{
		{"empty", strings.NewReader(""), 0},
		{"one line", strings.NewReader(line), 2},
		{"key split across one-byte reads", iotest.OneByteReader(strings.NewReader(line + line)), 4},
		{"half-byte reads", iotest.HalfReader(strings.NewReader(line)), 2},
		{"larger than the buffer", strings.NewReader(big), 100_000},
		{"parentSpanId and escaped keys only", strings.NewReader(`{"parentSpanId":"1","x":"\"spanId\""}`), 0},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			got, err := countSpanIDKeys(tt.r)
			if err != nil {
				t.Fatal(err)
			}
			if got != tt.want {
				t.Errorf("got %d, want %d", got, tt.want)
			}
		})
	}
	t.Run("read error", func(t *testing.T) {
		if _, err := countSpanIDKeys(iotest.ErrReader(io.ErrUnexpectedEOF)); err == nil {
			t.Error("got no error")
		}
	})
}

func TestMedian(t *testing.T) {
	tests := []struct {
		name string
		in   []time.Duration
		want time.Duration
	}{
		{"none", nil, 0},
		{"one", []time.Duration{5}, 5},
		{"odd, unsorted", []time.Duration{9, 1, 5}, 5},
		{"even: mean of the middle two", []time.Duration{4, 1, 10, 6}, 5},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			if got := median(tt.in); got != tt.want {
				t.Errorf("median(%v) = %v, want %v", tt.in, got, tt.want)
			}
		})
	}
}

func TestRatioMet(t *testing.T) {
	tests := []struct {
		name string
		r    ratio
		want string
	}{
		{"upper bound met", ratio{Raw: 1.2, Target: 1.3, AtMost: true}, "yes"},
		{"upper bound equal", ratio{Raw: 1.3, Target: 1.3, AtMost: true}, "yes"},
		{"upper bound missed", ratio{Raw: 1.4, Target: 1.3, AtMost: true}, "no"},
		{"lower bound met", ratio{Raw: 12, Target: 10}, "yes"},
		{"lower bound missed", ratio{Raw: 9.9, Target: 10}, "no"},
		{"no target", ratio{Raw: 3}, ""},
		{"no value", ratio{Raw: math.NaN(), Target: 10}, ""},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			if got := tt.r.met(); got != tt.want {
				t.Errorf("met() = %q, want %q", got, tt.want)
			}
		})
	}
}

func TestParseArgs(t *testing.T) {
	tests := []struct {
		name    string
		args    []string
		wantErr bool
	}{
		{"gen", []string{"-gen", "d"}, false},
		{"files", []string{"-profile", "p", "-spans", "s", "-runs", "1"}, false},
		{"scale with files", []string{"-spans", "s", "-spans-big", "b", "-scale"}, false},
		{"child phase", []string{"-phase", phaseOTLPProtojson, "-in", "f"}, false},
		{"nothing to measure", nil, true},
		{"zero runs", []string{"-gen", "d", "-runs", "0"}, true},
		{"samples below stacks", []string{"-gen", "d", "-samples", "5", "-stacks", "10"}, true},
		{"scale without the big file", []string{"-spans", "s", "-scale"}, true},
		{"big file without scale", []string{"-spans", "s", "-spans-big", "b"}, true},
		{"unknown phase", []string{"-phase", "nope", "-in", "f"}, true},
		{"phase without input", []string{"-phase", phasePprofParse}, true},
		{"positional argument", []string{"-gen", "d", "extra"}, true},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			_, _, _, err := parseArgs(tt.args, io.Discard)
			if (err != nil) != tt.wantErr {
				t.Errorf("parseArgs(%q) error = %v, want error: %v", tt.args, err, tt.wantErr)
			}
		})
	}
}

// The profile for profile-guided optimisation adds up the runs' samples
// and keeps no path of this machine: it is committed to the repository.
func TestMergeProfiles(t *testing.T) {
	dir := t.TempDir()
	var files []string
	for i, n := range []int64{3, 4} {
		fn := &profile.Function{ID: 1, Name: "main.work", Filename: "/home/someone/culprit/cmd/culprit/main.go"}
		m := &profile.Mapping{ID: 1, File: "/tmp/culprit-bench-123/culprit", HasFunctions: true}
		loc := &profile.Location{ID: 1, Mapping: m, Line: []profile.Line{{Function: fn, Line: 7}}}
		p := &profile.Profile{
			SampleType: []*profile.ValueType{{Type: "cpu", Unit: "nanoseconds"}},
			Sample:     []*profile.Sample{{Location: []*profile.Location{loc}, Value: []int64{n}}},
			Location:   []*profile.Location{loc}, Function: []*profile.Function{fn}, Mapping: []*profile.Mapping{m},
		}
		f := filepath.Join(dir, fmt.Sprintf("cpu%d.pprof", i))
		var buf bytes.Buffer
		if err := p.Write(&buf); err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(f, buf.Bytes(), 0o644); err != nil {
			t.Fatal(err)
		}
		files = append(files, f)
	}
	out := filepath.Join(dir, "default.pgo")
	if err := mergeProfiles(out, files); err != nil {
		t.Fatal(err)
	}
	data, err := os.ReadFile(out)
	if err != nil {
		t.Fatal(err)
	}
	p, err := profile.ParseData(data)
	if err != nil {
		t.Fatal(err)
	}
	var total int64
	for _, s := range p.Sample {
		total += s.Value[0]
	}
	if total != 7 {
		t.Errorf("merged samples add up to %d, want 7", total)
	}
	for _, f := range p.Function {
		if f.Name != "main.work" || f.Filename != "" {
			t.Errorf("function %q in file %q, want main.work in none", f.Name, f.Filename)
		}
	}
	for _, m := range p.Mapping {
		if m.File != "culprit" {
			t.Errorf("mapping file %q, want culprit", m.File)
		}
	}
}
