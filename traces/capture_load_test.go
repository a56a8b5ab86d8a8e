package traces

import (
	"bytes"
	"errors"
	"strings"
	"testing"

	"github.com/culprithq/culprit/traces/capture"
	"google.golang.org/protobuf/proto"
)

// segment builds a capture segment holding the given binary requests.
func segment(t *testing.T, seq uint64, reqs ...[]byte) []byte {
	t.Helper()
	dir := &memSegDir{}
	w := capture.NewWriter(dir, capture.WriterOptions{Instance: [16]byte{7}})
	for _, r := range reqs {
		if err := w.Append(capture.TraceProto, r); err != nil {
			t.Fatal(err)
		}
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	return dir.buf.Bytes()
}

type memSegDir struct{ buf bytes.Buffer }

func (d *memSegDir) Create(string) (capture.File, error) { return (*memSegFile)(&d.buf), nil }
func (d *memSegDir) Sync() error                         { return nil }
func (d *memSegDir) Rename(string, string) error         { return nil }

type memSegFile bytes.Buffer

func (f *memSegFile) Write(p []byte) (int, error) { return (*bytes.Buffer)(f).Write(p) }
func (f *memSegFile) Sync() error                 { return nil }
func (f *memSegFile) Truncate(n int64) error      { (*bytes.Buffer)(f).Truncate(int(n)); return nil }
func (f *memSegFile) Close() error                { return nil }

// TestCaptureInputs reads capture segments and binary OTLP files through
// the Loader: the same spans as their OTLP/JSON form, a torn last record
// skipped with its position, corruption and bad requests refused with
// theirs.
func TestCaptureInputs(t *testing.T) {
	spans, _ := recordWorkload(t, 6)
	td := sdkToProto(spans)
	bin, err := proto.Marshal(td)
	if err != nil {
		t.Fatal(err)
	}
	load := func(opts Options, inputs ...input) (*Source, error) {
		l := NewLoader(opts)
		for _, in := range inputs {
			if err := l.Add(in.name, strings.NewReader(in.data)); err != nil {
				return nil, err
			}
		}
		return l.Source()
	}
	want := mustCollect(t, Options{}, input{"in", otlpJSON(t, td) + "\n"})
	t.Run("protobuf file", func(t *testing.T) {
		src, err := load(Options{}, input{"in", string(bin)})
		if err != nil {
			t.Fatal(err)
		}
		if src.Inputs[0].Format != FormatOTLPProto {
			t.Fatalf("format %q", src.Inputs[0].Format)
		}
		sameSource(t, src, want)
	})
	t.Run("segment", func(t *testing.T) {
		src, err := load(Options{}, input{"in", string(segment(t, 1, bin))})
		if err != nil {
			t.Fatal(err)
		}
		if in := src.Inputs[0]; in.Format != FormatCapture || in.Segment == nil || in.Segment.Sequence != 1 ||
			in.Segment.Instance != "07000000000000000000000000000000" {
			t.Fatalf("input %+v", in)
		}
		sameSource(t, src, want)
	})
	t.Run("torn tail", func(t *testing.T) {
		whole := segment(t, 1, bin, bin)
		cut := whole[:len(whole)-10]
		src, err := load(Options{}, input{"in", string(cut)})
		if err != nil {
			t.Fatal(err)
		}
		at := capture.HeaderSize + 9 + len(bin)
		ws := strings.Join(src.Warnings.Strings(), "\n")
		if !strings.Contains(ws, "torn-record") || !strings.Contains(ws, "torn record at byte "+itoa(int64(at))) {
			t.Fatalf("warnings %q, want a torn record at byte %d", ws, at)
		}
		// Nothing of the torn record was read (its spans would repeat the
		// first record's).
		if sum := src.Warnings.Summary(); len(sum) != 1 || sum[0].Count != 1 {
			t.Fatalf("warnings %q, want only the torn record", ws)
		}
		sameSource(t, withoutWarnings(src), want)
	})
	t.Run("corrupt", func(t *testing.T) {
		bad := segment(t, 1, bin, bin)
		bad[capture.HeaderSize+20] ^= 1
		_, err := load(Options{}, input{"in", string(bad)})
		var pe *ParseError
		if !errors.As(err, &pe) || pe.Offset != capture.HeaderSize || !strings.Contains(err.Error(), "checksum") {
			t.Fatalf("%v, want a checksum error at byte %d", err, capture.HeaderSize)
		}
	})
	t.Run("bad request in a segment", func(t *testing.T) {
		// A request whose span name is invalid UTF-8 (refused by
		// proto.Unmarshal into the official types as well).
		badReq := bytes.Replace(bin, []byte(spans[0].Name()), append([]byte{0xff}, spans[0].Name()[1:]...), 1)
		if proto.Unmarshal(badReq, td) == nil {
			t.Fatal("the official types take it")
		}
		_, err := load(Options{}, input{"in", string(segment(t, 1, bin, badReq))})
		var pe *ParseError
		if !errors.As(err, &pe) || pe.File != "in" || pe.Offset <= int64(capture.HeaderSize+9+len(bin)) ||
			!strings.Contains(err.Error(), "invalid UTF-8") {
			t.Fatalf("%v, want an invalid UTF-8 error in the second record", err)
		}
	})
}

// withoutWarnings drops a source's warnings, to compare the rest.
func withoutWarnings(src *Source) *Source {
	src.Warnings = Warnings{}
	return src
}
