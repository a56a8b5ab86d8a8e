package main

import (
	"bytes"
	"compress/gzip"
	"encoding/json"
	"flag"
	"fmt"
	"math/rand/v2"
	"os"
	"path/filepath"
	"runtime"
	"runtime/trace"
	"slices"
	"strings"
	"testing"
	"time"
	"unicode/utf8"

	"github.com/google/pprof/profile"
)

// This file holds the invalid-input corpus: broken, hostile and awkward
// inputs, each made by a generator below, and what `culprit rank` must
// say about them. The small ones are committed to testdata/invalid/ so
// that they can be fed to the tool by hand; the test checks that the
// committed files still match their generators. Regenerate them with
//
//	go test ./cmd/culprit -run TestInvalidCorpus -update-corpus

var updateCorpus = flag.Bool("update-corpus", false, "regenerate the files of testdata/invalid/ from their generators")

// corpusDir is the invalid-input corpus, relative to this package.
const corpusDir = "../../testdata/invalid"

// corpusTimeout bounds each case: bad input must never make culprit hang.
const corpusTimeout = 5 * time.Second

// corpusCase is one invalid input and the outcome it must have.
type corpusCase struct {
	name string // subtest name
	// file is the input's name in testdata/invalid/ (or, when temp is set,
	// in a temporary directory).
	file string
	gen  func() []byte
	// temp marks an input generated at test time only: too big to commit.
	temp bool
	// about is a one-line description for the corpus README.
	about string
	// flags are put between "rank" and the input.
	flags []string
	// status is the expected exit status.
	status int
	// want are substrings of stderr (status 1) or of the JSON report's
	// warnings (status 0). "{file}" stands for the path given to rank;
	// the first entry names the file and the position.
	want []string
	// report are substrings of the JSON report (status 0).
	report []string
	// maxAlloc, when not zero, bounds the bytes the run may allocate.
	maxAlloc uint64
}

// corpusCases lists the corpus. Several cases may share a file (with
// different flags); its generator is then the same function.
func corpusCases() []corpusCase {
	return []corpusCase{
		{name: "empty", file: "empty.bin", gen: func() []byte { return nil },
			about: "an empty file", status: exitError,
			want: []string{"{file}: byte 0: unrecognised input format: the input is empty"}},
		// The protobuf decoder's own error is reported (the pprof library
		// hides it behind its legacy-format fallback), with the first field
		// that does not decode; here it is the very first (byte 0, which
		// ParseError leaves unprinted).
		{name: "random bytes", file: "random.bin", gen: randomBytes,
			about: "4 KiB of seeded pseudo-random bytes", status: exitError,
			want: []string{"{file}: byte 0: unrecognised input format: neither OTLP/JSON nor a pprof profile (protobuf: unknown wire type: 6; field 8: reserved wire type)"}},
		{name: "random bytes keep going", file: "random.bin", gen: randomBytes,
			flags: []string{"--keep-going"}, status: exitError,
			want: []string{"no readable input", "skipped-input (e.g. {file}: byte 0: unrecognised input format"}},
		{name: "png header", file: "png-header.png", gen: pngHeader,
			about: "a PNG signature and header chunk followed by junk", status: exitError,
			want: []string{"{file}: byte 10: unrecognised input format: neither OTLP/JSON nor a pprof profile (protobuf: type mismatch; bad field tag: invalid field number)"}},
		// The compressed stream ends at the end of the file (byte 659).
		{name: "truncated gzip", file: "truncated.pb.gz", gen: truncatedGzip,
			about: "a gzipped pprof profile cut in the middle of its compressed stream", status: exitError,
			want: []string{"{file}: byte 659: truncated or corrupt gzip stream: unexpected EOF"}},
		// The field that runs past the end, and where it starts.
		{name: "truncated protobuf", file: "truncated.pb", gen: truncatedProto,
			about: "an uncompressed pprof profile cut in the middle of a message", status: exitError,
			want: []string{"{file}: byte 858: unrecognised input format: neither OTLP/JSON nor a pprof profile (protobuf: too much data; field 4: runs past the end of the input (truncated?))"}},
		{name: "sample value count", file: "sample-value-count.pb", gen: sampleValueCount,
			about: "a pprof profile with two sample types whose sample has one value", status: exitError,
			want: []string{"{file}: byte 12: malformed pprof profile: mismatch: sample has 1 values vs. 2 types"}},
		{name: "no sample types", file: "no-sample-types.pb", gen: noSampleTypes,
			about: "a valid pprof profile without sample types or samples", status: exitError,
			want: []string{"{file}: byte 0: malformed pprof profile: it has no sample types"}},
		{name: "gzip bomb", file: "bomb.pb.gz", gen: gzipBomb, temp: true,
			about: "2 GiB of zeros in 2048 gzip members (about 2 MiB)", status: exitError,
			want:     []string{"{file}: byte 13107200 of the decompressed data: decompresses to more than 200 times its compressed size (a gzip bomb? raise it with --max-ratio): input limit exceeded"},
			maxAlloc: 128 << 20},
		{name: "gzip bomb max bytes", file: "bomb.pb.gz", gen: gzipBomb, temp: true,
			flags:  []string{"--max-ratio", "1000000", "--max-bytes", "16777216"},
			status: exitError, maxAlloc: 128 << 20,
			want: []string{"{file}: byte 16777216 of the decompressed data: decompressed size exceeds 16777216 bytes (raise it with --max-bytes): input limit exceeded"}},
		// Every gzip layer is unwrapped inside the same limits, so the
		// pprof library never decompresses anything without one.
		{name: "double gzip", file: "double.pb.gz", gen: doubleGzip, temp: true,
			about:  "8 MiB of zeros gzipped twice",
			flags:  []string{"--max-bytes", "2097152"},
			status: exitError, maxAlloc: 16 << 20, // 8 MiB unpacked; the race detector adds a little
			want: []string{"{file}: byte 1048576 of the decompressed data: decompresses to more than 200 times its compressed size (a gzip bomb? raise it with --max-ratio): input limit exceeded"}},
		{name: "double gzip max bytes", file: "double.pb.gz", gen: doubleGzip, temp: true,
			about:  "8 MiB of zeros gzipped twice",
			flags:  []string{"--max-bytes", "2097152", "--max-ratio", "1000000"},
			status: exitError, maxAlloc: 16 << 20, // 8 MiB unpacked; the race detector adds a little
			want: []string{"{file}: byte 2097152 of the decompressed data: decompressed size exceeds 2097152 bytes (raise it with --max-bytes): input limit exceeded"}},
		{name: "not OTLP", file: "not-otlp.json", gen: notOTLP,
			about: "a JSON object that is not an OTLP export request: skipped, and then no input is left", status: exitError,
			want: []string{`no input yielded any span or sample ({file} skipped: JSON but not OTLP trace data (it starts with "hello"))`}},
		{name: "deep nesting", file: "deep-nesting.json", gen: deepNesting,
			about: "JSON nested 10,000 levels deep", status: exitError,
			want: []string{"{file}:1:4113: input limit exceeded: JSON nested deeper than 4096 levels"}},
		{name: "huge line", file: "huge-line.jsonl", gen: hugeLine,
			about: "JSON lines whose second line is longer than the lowered --max-line-bytes",
			flags: []string{"--max-line-bytes", "4096"}, status: exitError,
			want: []string{"{file}:2: input limit exceeded: line is longer than 4096 bytes (raise it with --max-line-bytes)"}},
		{name: "spans is a string", file: "wrong-type-spans.jsonl", gen: wrongTypeSpans,
			about: `JSON lines whose second line has "spans": "x"`, status: exitError,
			want: []string{"{file}:2:72: not OTLP/JSON: resourceSpans.0.scopeSpans.0.spans: unexpected JSON string"}},
		// Known gap: the position is the document's start (line 1, no
		// column) and the field is not named; the value is at line 12,
		// column 36. Want "{file}:12:36: not OTLP/JSON:
		// resourceSpans.0.scopeSpans.0.spans.0.startTimeUnixNano: expected
		// an integer, found an object".
		{name: "time is an object", file: "wrong-type-time.json", gen: wrongTypeTime,
			about: `a pretty-printed document with "startTimeUnixNano": {}`, status: exitError,
			want: []string{"{file}:12:36: not OTLP/JSON: invalid integer object"}},
		// Invalid UTF-8 is replaced by U+FFFD (as encoding/json does), so
		// no invalid byte reaches a report.
		// A repair, so it is counted in the warnings (and refused by --strict).
		{name: "invalid UTF-8", file: "invalid-utf8.jsonl", gen: invalidUTF8,
			about: "a statement holding invalid UTF-8", status: exitOK,
			report: []string{"from caf\ufffd_plants where id = ?"},
			want:   []string{"invalid-utf8 (e.g. {file}:1: invalid UTF-8 at byte 767 of the record, replaced by U+FFFD)"}},
		{name: "invalid UTF-8 strict", file: "invalid-utf8.jsonl", gen: invalidUTF8,
			flags: []string{"--strict"}, status: exitError,
			want: []string{"{file}:1: span data needs repair (strict mode): invalid-utf8: invalid UTF-8 at byte 767"}},
		// NaN is how the proto3 JSON mapping writes a double that is not a
		// number (protobuf.dev/programming-guides/json): valid input.
		{name: "NaN double", file: "nan-double.jsonl", gen: nanDouble,
			about: `an attribute with "doubleValue": "NaN" (valid OTLP/JSON)`, status: exitOK,
			report: []string{"select * from plants where id = ?"}},
		{name: "negative duration", file: "negative-duration.jsonl", gen: negativeDuration,
			about: "a span that ends before it starts", status: exitOK,
			want: []string{"negative-duration (e.g. {file}:2: span eee19b7ec3c1b173"}},
		{name: "negative duration strict", file: "negative-duration.jsonl", gen: negativeDuration,
			flags: []string{"--strict"}, status: exitError,
			want: []string{"{file}:2: span data needs repair (strict mode): negative-duration: span eee19b7ec3c1b173"}},
		{name: "parent cycle", file: "parent-cycle.jsonl", gen: parentCycle,
			about: "two spans that are each other's parent", status: exitOK,
			want: []string{"parent-cycle (e.g. {file}:2: span eee19b7ec3c1b173"}},
		{name: "parent cycle strict", file: "parent-cycle.jsonl", gen: parentCycle,
			flags: []string{"--strict"}, status: exitError,
			want: []string{"{file}:2: span data needs repair (strict mode): parent-cycle: span eee19b7ec3c1b173"}},
		{name: "duplicate IDs", file: "duplicate-ids.jsonl", gen: duplicateIDs,
			about: "a span read twice with the same trace and span ID", status: exitOK,
			want: []string{"duplicate-span-id (e.g. {file}:2: span eee19b7ec3c1b173", "also read at {file}:1"}},
		{name: "UTF-16", file: "utf16.json", gen: func() []byte { return []byte("\xff\xfe{\x00}\x00") },
			about: "JSON in UTF-16", status: exitError,
			want: []string{"{file}: byte 0: unrecognised input format: UTF-16 text"}},
		// JSON lines whose first line is broken stay JSON lines: the good
		// lines are kept with --keep-going.
		{name: "bad first line", file: "bad-first-line.jsonl", gen: badFirstLine,
			about: "JSON lines whose first line is not JSON", status: exitError,
			want: []string{"{file}:1:1: malformed JSON: invalid character 'g' looking for beginning of value"}},
		{name: "bad first line keep going", file: "bad-first-line.jsonl", gen: badFirstLine,
			flags: []string{"--keep-going"}, status: exitOK,
			report: []string{"select * from plants where id = ?"},
			want:   []string{"malformed-line (e.g. {file}:1:1: malformed JSON"}},
		// Recursive code gives stacks thousands of frames deep: the middle
		// is elided, and counted.
		{name: "deep stack", file: "deep-stack.pb", gen: deepStack, temp: true,
			about: "a pprof sample 20,000 frames deep", status: exitOK,
			report: []string{"example.com/greenhouse/catalog.(*Store).List"},
			want:   []string{"deep-stack (e.g. {file}: sample 41 has 20000 frames, more than --max-depth 4096: the middle 15905 are elided"}},
		{name: "duplicate IDs strict", file: "duplicate-ids.jsonl", gen: duplicateIDs,
			flags: []string{"--strict"}, status: exitError,
			want: []string{"{file}:2: span data needs repair (strict mode): duplicate-span-id: span eee19b7ec3c1b173"}},
		{name: "exectrace future version", file: "exectrace-go1.99.trace", gen: func() []byte { return execHeader("1.99", 32) },
			about: "a Go execution trace header of a Go version not released", status: exitError,
			want: []string{"{file}: a Go execution trace from go 1.99, which this build cannot read"}},
		{name: "exectrace old version", file: "exectrace-go1.21.trace", gen: func() []byte { return execHeader("1.21", 32) },
			about: "a Go execution trace header of Go 1.21 (the format before 1.22)", status: exitError,
			want: []string{"{file}: a Go execution trace from go 1.21; culprit reads traces of Go 1.22 and later"}},
		{name: "exectrace corrupt", file: "exectrace-corrupt.trace", gen: execCorrupt,
			about: "a Go 1.26 execution trace header followed by seeded pseudo-random bytes", status: exitError,
			want: []string{"{file}: byte 17: malformed Go execution trace"}},
		{name: "exectrace truncated", file: "exectrace-cut.trace", gen: execTruncated, temp: true, status: exitError,
			about: "a Go execution trace recorded by runtime/trace, its last third cut off",
			want:  []string{"{file}: byte ", "malformed Go execution trace"}},
		{name: "exectrace truncated gzip", file: "exectrace-cut.trace.gz", gen: func() []byte { return gzipped(execTruncated()) }, temp: true,
			about: "the same, gzipped", status: exitError, want: []string{"{file}: byte ", "malformed Go execution trace"}},
	}
}

// execHeader is the header Go's runtime/trace writes ("go 1.N trace"
// and three NUL bytes) for version v, and n zero bytes.
func execHeader(v string, n int) []byte {
	return append([]byte("go "+v+" trace\x00\x00\x00"), make([]byte, n)...)
}

func execCorrupt() []byte {
	return append(execHeader("1.26", 0), randomBytes()[:512]...)
}

// execTruncated records a short execution trace with Go's runtime/trace
// and cuts off its last third.
func execTruncated() []byte {
	var buf bytes.Buffer
	if err := trace.Start(&buf); err != nil {
		panic(err)
	}
	ch := make(chan int)
	for i := range 50 {
		go func() { time.Sleep(time.Duration(i) * time.Microsecond); ch <- i }()
	}
	for range 50 {
		<-ch
	}
	trace.Stop()
	return buf.Bytes()[:buf.Len()*2/3]
}

func gzipped(b []byte) []byte {
	var buf bytes.Buffer
	zw := gzip.NewWriter(&buf)
	zw.Write(b)
	zw.Close()
	return buf.Bytes()
}

func TestInvalidCorpus(t *testing.T) {
	cases := corpusCases()
	if *updateCorpus {
		writeCorpus(t, cases)
	}
	checkCorpusFiles(t, cases)

	tmp := t.TempDir()
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			path := filepath.Join(corpusDir, c.file)
			if c.temp {
				path = filepath.Join(tmp, c.file)
				if _, err := os.Stat(path); err != nil {
					if err := os.WriteFile(path, c.gen(), 0o644); err != nil {
						t.Fatal(err)
					}
				}
			}
			args := append([]string{"rank"}, c.flags...)
			if c.status == exitOK {
				args = append(args, "--format", "json")
			}
			args = append(args, path)

			code, stdout, stderr, alloc := runBounded(t, args)
			t.Logf("exit %d, allocated %d MiB\nstderr: %s", code, alloc>>20, stderr)
			for _, leak := range []string{"panic", "goroutine ", ".go:", "internal error"} {
				if strings.Contains(stderr, leak) {
					t.Errorf("stderr shows %q, a crash or stack trace:\n%s", leak, stderr)
				}
			}
			if code != c.status {
				t.Fatalf("exit status %d, want %d; stderr:\n%s", code, c.status, stderr)
			}
			if c.maxAlloc > 0 && alloc > c.maxAlloc {
				t.Errorf("the run allocated %d MiB, more than %d MiB", alloc>>20, c.maxAlloc>>20)
			}
			got := stderr
			if c.status == exitOK {
				var doc struct{ Warnings []string }
				if err := json.Unmarshal([]byte(stdout), &doc); err != nil {
					t.Fatalf("report is not JSON: %v", err)
				}
				if !utf8.ValidString(stdout) {
					t.Error("report is not valid UTF-8")
				}
				got = strings.Join(doc.Warnings, "\n")
				for _, w := range c.report {
					if !strings.Contains(stdout, w) {
						t.Errorf("report lacks %q:\n%s", w, stdout)
					}
				}
			}
			for _, w := range c.want {
				w = strings.ReplaceAll(w, "{file}", path)
				if !strings.Contains(got, w) {
					t.Errorf("output lacks %q:\n%s", w, got)
				}
			}
		})
	}
}

// runBounded runs culprit with args, failing the test if it takes longer
// than corpusTimeout. It returns the exit status, the output and the
// bytes allocated meanwhile (by the whole test binary; the cases do not
// run in parallel).
func runBounded(t *testing.T, args []string) (code int, stdout, stderr string, alloc uint64) {
	t.Helper()
	type result struct {
		code     int
		out, err string
		alloc    uint64
	}
	done := make(chan result, 1)
	go func() {
		var before, after runtime.MemStats
		runtime.GC()
		runtime.ReadMemStats(&before)
		s, out, errb := testStreams("")
		code := run(args, s)
		runtime.ReadMemStats(&after)
		done <- result{code, out.String(), errb.String(), after.TotalAlloc - before.TotalAlloc}
	}()
	timer := time.NewTimer(corpusTimeout)
	defer timer.Stop()
	select {
	case r := <-done:
		return r.code, r.out, r.err, r.alloc
	case <-timer.C:
		t.Fatalf("culprit %s did not finish within %v", strings.Join(args, " "), corpusTimeout)
		return
	}
}

// storedFiles returns one case per committed file, in file-name order.
func storedFiles(cases []corpusCase) []corpusCase {
	var out []corpusCase
	for _, c := range cases {
		if !c.temp && !slices.ContainsFunc(out, func(o corpusCase) bool { return o.file == c.file }) {
			out = append(out, c)
		}
	}
	slices.SortFunc(out, func(a, b corpusCase) int { return strings.Compare(a.file, b.file) })
	return out
}

// writeCorpus writes every committed file and the README. It writes
// nothing else.
func writeCorpus(t *testing.T, cases []corpusCase) {
	t.Helper()
	if err := os.MkdirAll(corpusDir, 0o755); err != nil {
		t.Fatal(err)
	}
	for _, c := range storedFiles(cases) {
		if err := os.WriteFile(filepath.Join(corpusDir, c.file), c.gen(), 0o644); err != nil {
			t.Fatal(err)
		}
	}
	if err := os.WriteFile(filepath.Join(corpusDir, "README.md"), corpusReadme(cases), 0o644); err != nil {
		t.Fatal(err)
	}
}

// checkCorpusFiles fails unless testdata/invalid/ holds exactly the
// generated files and README, byte for byte.
func checkCorpusFiles(t *testing.T, cases []corpusCase) {
	t.Helper()
	const hint = "; regenerate with: go test ./cmd/culprit -run TestInvalidCorpus -update-corpus"
	want := map[string][]byte{"README.md": corpusReadme(cases)}
	for _, c := range storedFiles(cases) {
		want[c.file] = c.gen()
	}
	for name, data := range want {
		got, err := os.ReadFile(filepath.Join(corpusDir, name))
		if err != nil {
			t.Errorf("testdata/invalid/%s: %v%s", name, err, hint)
		} else if !bytes.Equal(got, data) {
			t.Errorf("testdata/invalid/%s differs from its generator%s", name, hint)
		}
	}
	entries, err := os.ReadDir(corpusDir)
	if err != nil {
		return // reported above
	}
	for _, e := range entries {
		if _, ok := want[e.Name()]; !ok {
			t.Errorf("testdata/invalid/%s is made by no generator in corpus_test.go: add a case or delete it", e.Name())
		}
	}
}

// corpusReadme documents the committed corpus.
func corpusReadme(cases []corpusCase) []byte {
	var b bytes.Buffer
	b.WriteString(`# Invalid-input corpus

Broken, hostile and awkward inputs for culprit's readers. Every file here is
made by a generator in cmd/culprit/corpus_test.go, which also states what
` + "`culprit rank`" + ` must do with it (exit status, error text and position, or the
warnings of the report). Do not edit these files by hand; regenerate them with

    go test ./cmd/culprit -run TestInvalidCorpus -update-corpus

TestInvalidCorpus fails when a file here no longer matches its generator.

| File | Content | Expected exit status |
|------|---------|----------------------|
`)
	for _, c := range storedFiles(cases) {
		fmt.Fprintf(&b, "| `%s` | %s | %s |\n", c.file, c.about, corpusOutcomes(cases, c.file))
	}
	b.WriteString("\nGenerated at test time only, too big to commit:\n\n")
	seen := map[string]bool{}
	for _, c := range cases {
		if c.temp && !seen[c.file] {
			seen[c.file] = true
			fmt.Fprintf(&b, "- `%s`: %s; %s\n", c.file, c.about, corpusOutcomes(cases, c.file))
		}
	}
	return b.Bytes()
}

// corpusOutcomes describes the expected exit status of every case of file,
// e.g. "0 (warnings); with `--strict`: 1".
func corpusOutcomes(cases []corpusCase, file string) string {
	var out []string
	for _, c := range cases {
		if c.file != file {
			continue
		}
		o := fmt.Sprint(c.status)
		if c.status == exitOK && len(c.want) > 0 {
			o += " (warnings)"
		}
		if len(c.flags) > 0 {
			o = "with `" + strings.Join(c.flags, " ") + "`: " + o
		}
		out = append(out, o)
	}
	return strings.Join(out, "; ")
}

// Generators. Each returns the same bytes on every call, on every
// platform: randomness is seeded, and gzip members are written without
// compression where they are committed (stored blocks do not depend on the
// compressor's heuristics, so a new Go release cannot change them).

func randomBytes() []byte {
	r := rand.New(rand.NewPCG(20260101, 7))
	b := make([]byte, 4096)
	for i := range b {
		b[i] = byte(r.Uint32())
	}
	return b
}

func pngHeader() []byte {
	var b bytes.Buffer
	b.WriteString("\x89PNG\r\n\x1a\n")
	// IHDR: length 13, type, 16×16 pixels, 8-bit RGBA, and a CRC.
	b.Write([]byte{0, 0, 0, 13, 'I', 'H', 'D', 'R', 0, 0, 0, 16, 0, 0, 0, 16, 8, 6, 0, 0, 0, 0x1f, 0xf3, 0xff, 0x61})
	r := rand.New(rand.NewPCG(89, 80))
	for range 256 {
		b.WriteByte(byte(r.Uint32()))
	}
	return b.Bytes()
}

// greenhouseProfile is a small valid profile of the invented greenhouse
// shop, built with the pprof library (the reference encoder): samples of
// catalog.(*Store).List querying the database, with two sample types.
func greenhouseProfile() *profile.Profile {
	fn := func(id uint64, name, file string) *profile.Function {
		return &profile.Function{ID: id, Name: name, SystemName: name, Filename: file}
	}
	funcs := []*profile.Function{
		fn(1, "main.main", "/src/greenhouse/main.go"),
		fn(2, "example.com/greenhouse/catalog.(*Store).List", "/src/greenhouse/catalog/store.go"),
		fn(3, "database/sql.(*DB).QueryContext", "/usr/local/go/src/database/sql/sql.go"),
		fn(4, "example.com/greenhouse/orders.(*Service).Place", "/src/greenhouse/orders/service.go"),
	}
	loc := func(id uint64, f *profile.Function, line int64) *profile.Location {
		return &profile.Location{ID: id, Address: 0x401000 + id*16, Line: []profile.Line{{Function: f, Line: line}}}
	}
	locs := []*profile.Location{loc(1, funcs[0], 12), loc(2, funcs[1], 48), loc(3, funcs[2], 1710), loc(4, funcs[3], 77)}
	p := &profile.Profile{
		SampleType:    []*profile.ValueType{{Type: "samples", Unit: "count"}, {Type: "cpu", Unit: "nanoseconds"}},
		PeriodType:    &profile.ValueType{Type: "cpu", Unit: "nanoseconds"},
		Period:        10_000_000,
		DurationNanos: 30_000_000_000,
		Function:      funcs,
		Location:      locs,
	}
	for i := range 40 {
		leaf := []*profile.Location{locs[2], locs[1], locs[0]}
		if i%3 == 0 {
			leaf = []*profile.Location{locs[2], locs[3], locs[0]}
		}
		p.Sample = append(p.Sample, &profile.Sample{
			Location: leaf,
			Value:    []int64{int64(i%5 + 1), int64(i%5+1) * 10_000_000},
			Label:    map[string][]string{"route": {fmt.Sprintf("/plants/%d", i%4)}},
		})
	}
	return p
}

func badFirstLine() []byte {
	return []byte("garbage\n" + otlpLine(rootSpan(), querySpan()))
}

// deepStack is the greenhouse profile with one more sample, 20,000 frames
// deep: main.main, a recursive catalog walk, then the store's query.
func deepStack() []byte {
	p := greenhouseProfile()
	walk := &profile.Function{ID: 5, Name: "example.com/greenhouse/catalog.walk", SystemName: "example.com/greenhouse/catalog.walk",
		Filename: "/src/greenhouse/catalog/walk.go"}
	p.Function = append(p.Function, walk)
	stack := []*profile.Location{p.Location[2], p.Location[1]} // leaf first
	for i := range 20_000 - 3 {
		l := &profile.Location{ID: uint64(len(p.Location) + 1), Line: []profile.Line{{Function: walk, Line: int64(10 + i)}}}
		p.Location = append(p.Location, l)
		stack = append(stack, l)
	}
	stack = append(stack, p.Location[0])
	p.Sample = append(p.Sample, &profile.Sample{Location: stack, Value: []int64{1, 10_000_000}})
	return rawProfile(p)
}

func rawProfile(p *profile.Profile) []byte {
	var b bytes.Buffer
	if err := p.WriteUncompressed(&b); err != nil {
		panic(err) // a bytes.Buffer does not fail
	}
	return b.Bytes()
}

// storedGzip gzips data without compression (see Generators).
func storedGzip(data []byte) []byte {
	var b bytes.Buffer
	zw, _ := gzip.NewWriterLevel(&b, gzip.NoCompression)
	zw.Write(data)
	zw.Close()
	return b.Bytes()
}

func truncatedGzip() []byte {
	gz := storedGzip(rawProfile(greenhouseProfile()))
	return gz[:len(gz)/2]
}

func truncatedProto() []byte {
	raw := rawProfile(greenhouseProfile())
	return raw[:len(raw)*2/3]
}

// sampleValueCount encodes a profile whose first sample has one value for
// its two sample types: the encoder writes what it is given, the parser
// must refuse it.
func sampleValueCount() []byte {
	p := greenhouseProfile()
	p.Sample[0].Value = p.Sample[0].Value[:1]
	return rawProfile(p)
}

// noSampleTypes is a profile holding only a period: valid for the pprof
// library, useless for culprit.
func noSampleTypes() []byte {
	return rawProfile(&profile.Profile{Period: 1})
}

// gzipBomb is 2 GiB of zeros as 2048 gzip members of 1 MiB each, which
// gzip readers concatenate (RFC 1952, section 2.2).
func gzipBomb() []byte {
	return zeroMembers(2048)
}

func zeroMembers(mib int) []byte {
	var member bytes.Buffer
	zw, _ := gzip.NewWriterLevel(&member, gzip.BestCompression)
	zw.Write(make([]byte, 1<<20))
	zw.Close()
	return bytes.Repeat(member.Bytes(), mib)
}

// doubleGzip is 8 MiB of zeros in gzip members, gzipped again.
func doubleGzip() []byte {
	var b bytes.Buffer
	zw, _ := gzip.NewWriterLevel(&b, gzip.BestCompression)
	zw.Write(zeroMembers(8))
	zw.Close()
	return b.Bytes()
}

func notOTLP() []byte { return []byte(`{"hello": [1,2,3]}` + "\n") }

func deepNesting() []byte {
	const depth = 10_000
	return []byte(`{"resourceSpans":` + strings.Repeat("[", depth) + strings.Repeat("]", depth) + "}\n")
}

// OTLP/JSON building blocks for the span cases: one trace of the
// greenhouse API, times in ns since the Unix epoch.
const (
	corpusTrace = "5b8efff798038103d269b633813fc60c"
	spanRoot    = "eee19b7ec3c1b174"
	spanQuery   = "eee19b7ec3c1b173"
	spanLoop    = "eee19b7ec3c1b172"
	corpusT0    = int64(1_767_225_600_000_000_000)
)

// corpusSpan is one span of an OTLP/JSON line; attrs is the raw JSON of
// its attributes array's elements.
type corpusSpan struct {
	id, parent, name string
	kind             int
	start, end       int64
	attrs            string
}

func (s corpusSpan) json() string {
	return fmt.Sprintf(`{"traceId":%q,"spanId":%q,"parentSpanId":%q,"name":%q,"kind":%d,"startTimeUnixNano":"%d","endTimeUnixNano":"%d","attributes":[%s]}`,
		corpusTrace, s.id, s.parent, s.name, s.kind, s.start, s.end, s.attrs)
}

// otlpLine is one ExportTraceServiceRequest of the greenhouse API, on one line.
func otlpLine(spans ...corpusSpan) string {
	js := make([]string, len(spans))
	for i, s := range spans {
		js[i] = s.json()
	}
	return `{"resourceSpans":[{"resource":{"attributes":[{"key":"service.name","value":{"stringValue":"greenhouse-api"}}]},"scopeSpans":[{"spans":[` +
		strings.Join(js, ",") + "]}]}]}\n"
}

func rootSpan() corpusSpan {
	return corpusSpan{id: spanRoot, name: "GET /plants", kind: 2, start: corpusT0, end: corpusT0 + 50_000_000,
		attrs: `{"key":"http.route","value":{"stringValue":"/plants"}}`}
}

func querySpan() corpusSpan {
	return corpusSpan{id: spanQuery, parent: spanRoot, name: "SELECT plants", kind: 3, start: corpusT0 + 1_000_000, end: corpusT0 + 9_000_000,
		attrs: `{"key":"db.system","value":{"stringValue":"postgresql"}},{"key":"db.statement","value":{"stringValue":"SELECT * FROM plants WHERE id = 7"}}`}
}

func hugeLine() []byte {
	big := querySpan()
	big.name = strings.Repeat("x", 10_000)
	return []byte(otlpLine(rootSpan()) + otlpLine(big))
}

func wrongTypeSpans() []byte {
	return []byte(otlpLine(rootSpan()) +
		`{"resourceSpans":[{"resource":{"attributes":[]},"scopeSpans":[{"spans":"x"}]}]}` + "\n")
}

func wrongTypeTime() []byte {
	return []byte(`{
  "resourceSpans": [
    {
      "scopeSpans": [
        {
          "spans": [
            {
              "traceId": "` + corpusTrace + `",
              "spanId": "` + spanRoot + `",
              "name": "GET /plants",
              "kind": 2,
              "startTimeUnixNano": {},
              "endTimeUnixNano": "1767225600050000000"
            }
          ]
        }
      ]
    }
  ]
}
`)
}

func invalidUTF8() []byte {
	q := querySpan()
	q.attrs = strings.Replace(q.attrs, "FROM plants", "FROM caf\xe9_plants", 1)
	return []byte(otlpLine(rootSpan(), q))
}

func nanDouble() []byte {
	s := querySpan()
	s.attrs += `,{"key":"greenhouse.load","value":{"doubleValue":"NaN"}}`
	return []byte(otlpLine(rootSpan(), s))
}

func negativeDuration() []byte {
	s := querySpan()
	s.start, s.end = s.end, s.start
	return []byte(otlpLine(rootSpan()) + otlpLine(s))
}

func parentCycle() []byte {
	a := querySpan()
	a.parent = spanLoop
	b := corpusSpan{id: spanLoop, parent: spanQuery, name: "catalog.expand", kind: 1, start: corpusT0 + 2_000_000, end: corpusT0 + 3_000_000}
	return []byte(otlpLine(rootSpan()) + otlpLine(a) + otlpLine(b))
}

func duplicateIDs() []byte {
	return []byte(otlpLine(rootSpan(), querySpan()) + otlpLine(querySpan()))
}
