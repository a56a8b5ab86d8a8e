package traces

import (
	"bufio"
	"bytes"
	"compress/gzip"
	"context"
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"fmt"
	"io"
	"strings"

	"github.com/google/pprof/profile"
	"google.golang.org/protobuf/encoding/protowire"
)

// Loader reads any number of inputs, sniffing each one's format, and
// merges them into sources: all profiles into one Profile source, all
// span files into one Spans source. Loader is not safe for concurrent use.
type Loader struct {
	opts     Options
	profiles *profileAppender
	spans    *SpanCollector
	inputs   []Input
	warnings Warnings
	byKind   map[Kind][]string // input names of each kind admitted (see admit)
	notes    []string          // inputs skipped (see Source.Notes)
}

// NewLoader returns a Loader using opts.
func NewLoader(opts Options) *Loader {
	opts.Limits = opts.Limits.withDefaults()
	return &Loader{opts: opts}
}

var gzipMagic = []byte{0x1f, 0x8b}

// Add reads one input. name labels it in errors and in the report. With
// Options.KeepGoing, an unreadable input is recorded as a warning and Add
// returns nil.
func (l *Loader) Add(name string, r io.Reader) error {
	err := l.add(name, r)
	if err != nil && l.opts.KeepGoing && !errors.Is(err, ErrMismatch) &&
		!errors.Is(err, context.Canceled) && !errors.Is(err, context.DeadlineExceeded) {
		msg := err.Error()
		var pe *ParseError
		if errors.As(err, &pe) && pe.File == name {
			msg = strings.TrimPrefix(strings.TrimPrefix(msg, name), ": ")
		} else {
			msg = strings.TrimPrefix(msg, name+": ")
		}
		l.warnings.Add(Warning{Kind: "skipped-input", File: name, Message: msg})
		return nil
	}
	return err
}

func (l *Loader) add(name string, r io.Reader) error {
	hash := sha256.New()
	if !l.opts.SkipDigest {
		r = io.TeeReader(r, hash)
	}
	counted := &countingReader{r: r}
	br := bufio.NewReaderSize(counted, 64<<10)
	// Unwrap gzip layers (a gzipped .pb.gz is not rare), each inside the
	// ratio and size limits, so that no decoder downstream ever sees gzip:
	// the pprof library would decompress it again without a limit.
	var body io.Reader = br
	bb := br
	for layer := 0; ; layer++ {
		head, err := bb.Peek(2)
		if err != nil && !errors.Is(err, io.EOF) {
			return readError(name, err, counted.n)
		}
		if !bytes.Equal(head, gzipMagic) {
			break
		}
		if layer == 3 {
			return &ParseError{File: name, Err: fmt.Errorf("%w: more than 3 nested gzip layers", ErrFormat)}
		}
		zr, err := gzip.NewReader(bb)
		if err != nil {
			return readError(name, fmt.Errorf("decompressing: %w", err), counted.n)
		}
		body = &sizeLimitReader{r: &ratioLimitReader{r: zr, compressed: counted, limits: l.opts.Limits, name: name},
			max: l.opts.Limits.MaxBytes, name: name}
		bb = bufio.NewReaderSize(body, 64<<10)
	}
	if body == io.Reader(br) {
		body = &sizeLimitReader{r: br, max: l.opts.Limits.MaxBytes, name: name}
		bb = bufio.NewReaderSize(body, 64<<10)
	}
	prefix, err := bb.Peek(512)
	if err != nil && !errors.Is(err, io.EOF) && !errors.Is(err, bufio.ErrBufferFull) {
		return readError(name, err, counted.n)
	}
	if len(prefix) == 0 {
		return &ParseError{File: name, Err: fmt.Errorf("%w: the input is empty", ErrFormat)}
	}

	in := Input{Name: name}
	switch {
	case LooksLikeOTLPJSON(prefix):
		in.Format = "otlp-json"
		if key, ok := foreignJSON(prefix); ok {
			l.notes = append(l.notes, fmt.Sprintf("%s skipped: JSON but not OTLP trace data (it starts with %q)", name, key))
			return nil
		}
		if !l.admit(Spans, name) {
			return nil
		}
		if l.spans == nil {
			l.spans = NewSpanCollector(l.opts)
		}
		if err := l.spans.Add(name, bb); err != nil {
			return readError(name, err, counted.n)
		}
	default:
		in.Format = "pprof"
		if !l.admit(Profile, name) {
			return nil
		}
		data, err := readAll(bb)
		if err != nil {
			return readError(name, err, counted.n)
		}
		p, ok := decodeProfile(data)
		if !ok {
			// Not for the fast decoder: legacy formats, and malformed
			// input, whose error the library words.
			lp, err := profile.ParseData(data)
			if err != nil {
				return pprofError(name, data, err)
			}
			p = lowerProfile(lp)
		}
		if len(p.sampleTypes) == 0 {
			return &ParseError{File: name, Err: errors.New("malformed pprof profile: it has no sample types")}
		}
		if l.profiles == nil {
			l.profiles = newProfileAppender(l.opts.Limits)
		}
		if err := l.profiles.add(name, p); err != nil {
			return err
		}
	}
	// Drain what the decoder did not read so that the digest covers the file.
	if _, err := io.Copy(io.Discard, counted); err != nil {
		return readError(name, err, counted.n)
	}
	in.Bytes = counted.n
	if !l.opts.SkipDigest {
		in.SHA256 = hex.EncodeToString(hash.Sum(nil))
	}
	l.inputs = append(l.inputs, in)
	return nil
}

// Source returns the merged source of everything added. It fails when
// nothing readable was added, when no input yielded a span or a sample,
// and when the inputs hold both profiles and traces without
// Options.Source to choose.
func (l *Loader) Source() (*Source, error) {
	if err := l.mixError(); err != nil {
		return nil, err
	}
	var src *Source
	switch {
	case l.profiles != nil && l.profiles.src != nil:
		src = l.profiles.src
	case l.spans != nil:
		s, err := l.spans.Source()
		if err != nil {
			return nil, err
		}
		src = s
	default:
		if l.warnings.Len() > 0 {
			return nil, fmt.Errorf("no readable input (%s)", strings.Join(l.warnings.Strings(), "; "))
		}
		return nil, l.nothingRead(nil)
	}
	if src.Paths.Len() == 0 {
		return nil, l.nothingRead(src)
	}
	src.Inputs = l.inputs
	src.Notes = append(l.notes, src.Notes...)
	src.Warnings.Merge(l.warnings)
	if err := src.checkSums(); err != nil {
		return nil, err
	}
	if err := src.Validate(); err != nil {
		return nil, err
	}
	return src, nil
}

// Validate checks the Source invariants documented on the type.
func (s *Source) Validate() error {
	if len(s.ValueTypes) == 0 {
		return errors.New("source has no value types")
	}
	if s.DefaultValue < 0 || s.DefaultValue >= len(s.ValueTypes) {
		return fmt.Errorf("default value index %d out of range", s.DefaultValue)
	}
	ps := &s.Paths
	if ps.Len() > 0 && ps.nv != len(s.ValueTypes) {
		return fmt.Errorf("paths have %d values for %d value types", ps.nv, len(s.ValueTypes))
	}
	for i := range ps.recs {
		r := &ps.recs[i]
		fs := ps.Frames(i)
		if len(fs) == 0 {
			return fmt.Errorf("path %d has no frames", i)
		}
		for _, f := range fs {
			if f <= 0 || int(f) >= len(s.Frames) {
				return fmt.Errorf("path %d has frame %d out of range", i, f)
			}
		}
		if r.call < 0 || int(r.call) >= len(s.Calls) {
			return fmt.Errorf("path %d has call %d out of range", i, r.call)
		}
		if r.request < 0 || int(r.request) >= len(s.Requests) {
			return fmt.Errorf("path %d has request %d out of range", i, r.request)
		}
	}
	return nil
}

// readChunk is the size of the pieces a profile is read in: most
// profiles fit in one. A large allocation fresh from the system is zero
// already, so the part of it a smaller profile leaves unused costs
// address space, not memory; it is also small enough that a gzip bomb,
// stopped by the ratio limit, cannot make culprit allocate much.
const readChunk = 8 << 20

// readAll reads r to the end: in readChunk pieces, joined into one buffer
// of the exact size when there are several. io.ReadAll grows from 512
// bytes, copying and clearing the data a dozen times over (25 ms of
// clearing alone for a 5 MiB profile).
func readAll(r io.Reader) ([]byte, error) {
	var chunks [][]byte
	total := 0
	for done := false; !done; {
		c := make([]byte, readChunk)
		n := 0
		for n < len(c) {
			m, err := r.Read(c[n:])
			n += m
			if errors.Is(err, io.EOF) {
				done = true
				break
			}
			if err != nil {
				return nil, err
			}
		}
		chunks = append(chunks, c[:n])
		total += n
	}
	if len(chunks) == 1 {
		return chunks[0], nil
	}
	out := make([]byte, 0, total)
	for _, c := range chunks {
		out = append(out, c...)
	}
	return out, nil
}

// readError names the input in a read error; offset is how many bytes of
// the (compressed) input had been read when it happened.
func readError(name string, err error, offset int64) error {
	var pe *ParseError
	if errors.As(err, &pe) {
		return err
	}
	if errors.Is(err, ErrLimit) {
		return fmt.Errorf("%s: %w", name, err)
	}
	if errors.Is(err, io.ErrUnexpectedEOF) || errors.Is(err, gzip.ErrChecksum) || errors.Is(err, gzip.ErrHeader) {
		return &ParseError{File: name, Offset: offset, Err: fmt.Errorf("truncated or corrupt gzip stream: %w", err)}
	}
	return &ParseError{File: name, Err: err}
}

// pprofError explains why data is not a profile. profile.ParseData falls
// back to legacy text formats and then reports only "unrecognized profile
// format"; the protobuf decoder's own error says more.
func pprofError(name string, data []byte, err error) error {
	msg := strings.TrimPrefix(err.Error(), "parsing profile: ")
	if strings.HasPrefix(msg, "malformed profile: ") {
		return &ParseError{File: name, Err: fmt.Errorf("malformed pprof profile: %s", strings.TrimPrefix(msg, "malformed profile: "))}
	}
	var offset int64
	if _, perr := profile.ParseUncompressed(data); perr != nil && msg == "unrecognized profile format" {
		msg = "protobuf: " + strings.TrimPrefix(perr.Error(), "parsing profile: ")
		if off, why := badField(data); off >= 0 {
			offset = off
			msg += "; " + why
		}
	}
	return &ParseError{File: name, Offset: offset, Err: fmt.Errorf("%w: neither OTLP/JSON nor a pprof profile (%s)", ErrFormat, msg)}
}

// badField walks the top-level protobuf fields of data and returns the
// byte offset of the first one that does not decode, and why; -1 when
// every field is well formed (the problem is then in their contents).
func badField(data []byte) (int64, string) {
	for off := 0; off < len(data); {
		num, typ, n := protowire.ConsumeTag(data[off:])
		if n < 0 {
			return int64(off), "bad field tag: " + wireProblem(n)
		}
		m := protowire.ConsumeFieldValue(num, typ, data[off+n:])
		if m < 0 {
			return int64(off), fmt.Sprintf("field %d: %s", num, wireProblem(m))
		}
		off += n + m
	}
	return -1, ""
}

// wireProblem words a protowire error code (the errCode constants of
// protowire/wire.go, v1.36). protowire's own messages
// vary their spacing from build to build on purpose, so they are not
// quoted.
func wireProblem(code int) string {
	switch code {
	case -1:
		return "runs past the end of the input (truncated?)"
	case -2:
		return "invalid field number"
	case -3:
		return "varint overflows 64 bits"
	case -4:
		return "reserved wire type"
	case -5:
		return "mismatched end-group marker"
	case -6:
		return "groups nested too deeply"
	}
	return "malformed field"
}

// sizeLimitReader fails once more than max bytes have been read.
type sizeLimitReader struct {
	r    io.Reader
	n    int64
	max  int64
	name string
}

func (s *sizeLimitReader) Read(p []byte) (int, error) {
	n, err := s.r.Read(p)
	s.n += int64(n)
	if s.n > s.max {
		return n, fmt.Errorf("decompressed size exceeds %d bytes (raise it with --max-bytes): %w", s.max, ErrLimit)
	}
	return n, err
}

// ratioLimitReader fails when decompressed output outgrows the compressed
// input by more than the configured ratio (a gzip bomb). Small inputs get
// a 1 MiB allowance so that tiny, very compressible files still read.
type ratioLimitReader struct {
	r          io.Reader
	out        int64
	compressed *countingReader
	limits     Limits
	name       string
}

func (z *ratioLimitReader) Read(p []byte) (int, error) {
	n, err := z.r.Read(p)
	z.out += int64(n)
	if z.out > 1<<20 && z.out > z.limits.MaxRatio*z.compressed.n {
		return n, fmt.Errorf("decompresses to more than %d times its compressed size (a gzip bomb? raise it with --max-ratio): %w",
			z.limits.MaxRatio, ErrLimit)
	}
	return n, err
}
