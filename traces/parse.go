package traces

import (
	"bufio"
	"compress/gzip"
	"context"
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"fmt"
	"io"
	"strconv"
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
	exec     *ExecCollector
	inputs   []Input
	warnings Warnings
	byKind   map[Kind][]string // input names of each kind admitted (see admit)
	notes    []string          // inputs skipped (see Source.Notes)
	// in and plain buffer an input and its plain (not gzipped) body; they
	// are reused from input to input.
	in, plain *bufio.Reader
	// capProfiles are the profile records of capture segments.
	capProfiles []captureProfile
}

// NewLoader returns a Loader using opts.
func NewLoader(opts Options) *Loader {
	opts.Limits = opts.Limits.withDefaults()
	return &Loader{opts: opts}
}

// WarnSkippedInput is an input that could not be read and was skipped
// because Options.KeepGoing is set.
const WarnSkippedInput = "skipped-input"

// Add reads one input. name labels it in errors and in the report. With
// Options.KeepGoing, an unreadable input is recorded as a warning and Add
// returns nil.
func (l *Loader) Add(name string, r io.Reader) error {
	return l.AddSized(name, r, -1)
}

// AddSized is Add for an input whose length in bytes is known (a file's
// size; -1 if unknown): inputs read whole, such as profiles, are read
// into a buffer sized from it instead of one grown piece by piece.
func (l *Loader) AddSized(name string, r io.Reader, size int64) error {
	err := l.add(name, r, size)
	if err != nil && l.opts.KeepGoing && !errors.Is(err, ErrMismatch) &&
		!errors.Is(err, context.Canceled) && !errors.Is(err, context.DeadlineExceeded) {
		w := Warning{Kind: WarnSkippedInput, File: name, Message: strings.TrimPrefix(err.Error(), name+": ")}
		var pe *ParseError
		if errors.As(err, &pe) && pe.File == name {
			w.Line, w.Message = pe.Line, pe.Detail()
			if pe.Line > 0 {
				w.Column = pe.Offset
			}
		}
		l.warnings.Add(w)
		return nil
	}
	return err
}

func (l *Loader) add(name string, r io.Reader, size int64) error {
	hash := sha256.New()
	if !l.opts.SkipDigest {
		r = io.TeeReader(r, hash)
	}
	counted := &countingReader{r: r}
	br := reuseReader(&l.in, counted)
	// Unwrap gzip layers (a gzipped .pb.gz is not rare), each inside the
	// ratio and size limits, so that no decoder downstream ever sees gzip:
	// the pprof library would decompress it again without a limit.
	var body io.Reader = br
	bb := br
	for layer := 0; ; layer++ {
		head, err := bb.Peek(sniffPrefix)
		if err != nil && !errors.Is(err, io.EOF) && !errors.Is(err, bufio.ErrBufferFull) {
			return readError(name, err, counted.n)
		}
		if Sniff(head) != FormatGzip {
			break
		}
		if layer == 3 {
			return &ParseError{File: name, Binary: true, Decompressed: true, Err: fmt.Errorf("%w: more than 3 nested gzip layers", ErrFormat)}
		}
		zr, err := gzip.NewReader(bb)
		if err != nil {
			return readError(name, fmt.Errorf("decompressing: %w", err), counted.n)
		}
		body = &sizeLimitReader{r: &ratioLimitReader{r: zr, compressed: counted, limits: l.opts.Limits, name: name},
			max: l.opts.Limits.MaxBytes, name: name, decompressed: true}
		bb = bufio.NewReaderSize(body, 64<<10)
	}
	gz := body != io.Reader(br) // offsets in body are of decompressed data
	if !gz {
		body = &sizeLimitReader{r: br, max: l.opts.Limits.MaxBytes, name: name}
		bb = reuseReader(&l.plain, body)
	}
	prefix, err := bb.Peek(sniffPrefix)
	if err != nil && !errors.Is(err, io.EOF) && !errors.Is(err, bufio.ErrBufferFull) {
		return readError(name, err, counted.n)
	}
	in := Input{Name: name, Format: Sniff(prefix)}
	switch in.Format {
	case "":
		return &ParseError{File: name, Binary: true, Err: fmt.Errorf("%w: the input is empty", ErrFormat)}
	case FormatOTLPJSON:
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
	case FormatCapture:
		if !l.admit(Spans, name) {
			return nil
		}
		if in.Segment, err = l.addSegment(name, bb); err != nil {
			return readError(name, err, counted.n)
		}
	case FormatOTLPProto:
		if !l.admit(Spans, name) {
			return nil
		}
		data, err := readAll(bb, l.firstChunk(size, gz))
		if err != nil {
			return readError(name, err, counted.n)
		}
		if err := l.addOTLPProto(name, data); err != nil {
			return readError(name, err, counted.n)
		}
	case FormatExecTrace:
		if !l.admit(ExecTrace, name) {
			return nil
		}
		if l.exec == nil {
			l.exec = NewExecCollector(l.opts.Limits)
			l.exec.timing = l.opts.Timing
		}
		if err := l.exec.Add(name, bb); err != nil {
			return readError(name, err, counted.n)
		}
	case FormatPprof:
		if !l.admit(Profile, name) {
			return nil
		}
		data, err := readAll(bb, l.firstChunk(size, gz))
		if err != nil {
			return readError(name, err, counted.n)
		}
		p, ok := decodeProfile(data)
		if !ok {
			// Not for the fast decoder: legacy formats, and malformed
			// input, whose error the library words.
			lp, err := profile.ParseData(data)
			if err != nil {
				return pprofError(name, data, err, gz)
			}
			p = lowerProfile(lp)
		}
		if len(p.sampleTypes) == 0 {
			// Nowhere: the position is where the sample types should have
			// been, the start of the profile.
			return &ParseError{File: name, Binary: true, Decompressed: gz,
				Err: errors.New("malformed pprof profile: it has no sample types (field 1 of the Profile message)")}
		}
		if l.profiles == nil {
			l.profiles = newProfileAppender(l.opts.Limits)
		}
		if err := l.profiles.add(name, p); err != nil {
			return err
		}
	case FormatUTF16:
		return &ParseError{File: name, Binary: true, Err: fmt.Errorf("%w: UTF-16 text; culprit reads JSON in UTF-8 (convert it first)", ErrFormat)}
	default:
		// A format in the sniffing table without a reader here.
		return &ParseError{File: name, Binary: true, Err: fmt.Errorf("%w: no reader for %s input", ErrFormat, in.Format)}
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

// reuseReader returns *b reset to read r, made on first use.
func reuseReader(b **bufio.Reader, r io.Reader) *bufio.Reader {
	if *b == nil {
		*b = bufio.NewReaderSize(r, 64<<10)
	} else {
		(*b).Reset(r)
	}
	return *b
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
	capSrc, fromCapture, err := l.captureSource()
	if err != nil {
		return nil, err
	}
	switch {
	case fromCapture:
		src = capSrc
	case l.profiles != nil && l.profiles.src != nil:
		src = l.profiles.src
	case l.spans != nil:
		s, err := l.spans.Source()
		if err != nil {
			return nil, err
		}
		src = s
	case l.exec != nil:
		src = l.exec.Source()
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
	for i := range ps.Len() {
		r := ps.rec(i)
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
	if tm := s.Timing; tm != nil {
		n := ps.Len()
		if len(tm.Start) != n || len(tm.Parent) != n || tm.Goroutine != nil && len(tm.Goroutine) != n {
			return fmt.Errorf("timing of %d starts, %d parents and %d goroutine marks for %d paths", len(tm.Start), len(tm.Parent), len(tm.Goroutine), n)
		}
		for i, par := range tm.Parent {
			if par >= 0 && (int(par) >= n || ps.rec(int(par)).request != ps.rec(i).request) {
				return fmt.Errorf("path %d has parent %d out of range or in another request", i, par)
			}
		}
	}
	return nil
}

// firstChunk and readChunk bound the pieces an input read whole is read
// in: with no size known, the first is small, so that thousands of small
// profiles do not each clear megabytes; each next one is twice as large
// up to readChunk, small enough that a gzip bomb, stopped by the ratio
// limit, cannot make culprit allocate much.
const (
	firstChunk = 256 << 10
	readChunk  = 8 << 20
)

// gzipGuess is the decompressed size guessed per compressed byte for the
// first piece of a gzip input of known size (profiles compress 2 to 5
// times; a guess too small costs a second piece and a copy).
const gzipGuess = 4

// firstChunk returns the size of the first piece to read an input of
// size bytes (-1: unknown) in, gz if it is decompressed: the whole input
// and one byte (to see its end) when its size is known, else
// firstChunk.
func (l *Loader) firstChunk(size int64, gz bool) int {
	if size < 0 {
		return firstChunk
	}
	if gz {
		size = min(size*gzipGuess, readChunk)
	}
	return int(max(min(size, l.opts.Limits.MaxBytes)+1, 512))
}

func readAll(r io.Reader, first int) ([]byte, error) {
	var chunks [][]byte
	total := 0
	for size, done := first, false; !done; size = max(size, min(2*size, readChunk)) {
		c := make([]byte, size)
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
	var le *limitError
	if errors.As(err, &le) {
		return &ParseError{File: name, Binary: true, Offset: le.at, Decompressed: le.decompressed, Err: err}
	}
	if errors.Is(err, ErrLimit) {
		return fmt.Errorf("%s: %w", name, err)
	}
	if errors.Is(err, io.ErrUnexpectedEOF) || errors.Is(err, gzip.ErrChecksum) || errors.Is(err, gzip.ErrHeader) {
		return &ParseError{File: name, Offset: offset, Binary: true, Err: fmt.Errorf("truncated or corrupt gzip stream: %w", err)}
	}
	return &ParseError{File: name, Err: err}
}

// pprofError explains why data is not a profile. profile.ParseData falls
// back to legacy text formats and then reports only "unrecognized profile
// format"; the protobuf decoder's own error says more.
// gz says data was gzipped: offsets are then of the decompressed data.
func pprofError(name string, data []byte, err error, gz bool) error {
	msg := strings.TrimPrefix(err.Error(), "parsing profile: ")
	if strings.HasPrefix(msg, "malformed profile: ") {
		msg = strings.TrimPrefix(msg, "malformed profile: ")
		pe := &ParseError{File: name, Decompressed: gz, Err: fmt.Errorf("malformed pprof profile: %s", msg)}
		pe.Offset, pe.Binary = locateProblem(data, msg)
		return pe
	}
	pe := &ParseError{File: name, Decompressed: gz}
	if _, perr := profile.ParseUncompressed(data); perr != nil && msg == "unrecognized profile format" {
		msg = "protobuf: " + strings.TrimPrefix(perr.Error(), "parsing profile: ")
		if off, why := badField(data); off >= 0 {
			pe.Offset, pe.Binary = off, true
			msg += "; " + why
		}
	}
	pe.Err = fmt.Errorf("%w: neither OTLP/JSON nor a pprof profile (%s)", ErrFormat, msg)
	return pe
}

// Field numbers of profile.proto's Profile message.
const (
	pbSampleType = 1
	pbSample     = 2
	pbMapping    = 3
	pbLocation   = 4
	pbFunction   = 5
)

// locateProblem finds the byte offset of the message that the pprof
// library's validity check complains about in msg (profile.go's
// CheckValid): the first sample whose values do not match the sample
// types, or the mapping, location or function whose ID is reserved or
// repeated. ok is false for other complaints.
func locateProblem(data []byte, msg string) (offset int64, ok bool) {
	var field int
	var id uint64
	repeated := false
	kinds := map[string]int{"mapping": pbMapping, "mappings": pbMapping, "location": pbLocation,
		"locations": pbLocation, "function": pbFunction, "functions": pbFunction}
	switch {
	case strings.HasPrefix(msg, "mismatch: sample has "):
		field = pbSample
	case strings.HasPrefix(msg, "found "):
		// "found function with reserved ID=0"
		kind, _, _ := strings.Cut(strings.TrimPrefix(msg, "found "), " ")
		field = kinds[kind]
	case strings.HasPrefix(msg, "multiple "):
		// "multiple functions with same id: 7"
		kind, rest, _ := strings.Cut(strings.TrimPrefix(msg, "multiple "), " ")
		_, n, _ := strings.Cut(rest, ": ")
		v, err := strconv.ParseUint(n, 10, 64)
		if err != nil {
			return 0, false
		}
		field, id, repeated = kinds[kind], v, true
	}
	if field == 0 {
		return 0, false
	}
	types, seen := 0, 0
	for off := 0; off < len(data); {
		num, typ, n := protowire.ConsumeTag(data[off:])
		if n < 0 {
			return 0, false
		}
		m := protowire.ConsumeFieldValue(num, typ, data[off+n:])
		if m < 0 {
			return 0, false
		}
		body := data[off+n : off+n+m]
		if typ == protowire.BytesType {
			body, _ = protowire.ConsumeBytes(body)
		}
		switch {
		case num == pbSampleType:
			types++
		case int(num) != field || typ != protowire.BytesType:
		case field == pbSample:
			// sample_type precedes samples in every encoder; a profile
			// listing them after would be reported at its first sample.
			if countValues(body, 2) != types {
				return int64(off), true
			}
		case messageID(body) == id:
			if seen++; !repeated || seen == 2 {
				return int64(off), true
			}
		}
		off += n + m
	}
	return 0, false
}

// countValues counts the values of repeated varint field num in msg,
// packed or not.
func countValues(msg []byte, num protowire.Number) int {
	count := 0
	for len(msg) > 0 {
		f, typ, n := protowire.ConsumeTag(msg)
		if n < 0 {
			return count
		}
		m := protowire.ConsumeFieldValue(f, typ, msg[n:])
		if m < 0 {
			return count
		}
		if f == num {
			if typ == protowire.BytesType {
				packed, _ := protowire.ConsumeBytes(msg[n:])
				for len(packed) > 0 {
					_, k := protowire.ConsumeVarint(packed)
					if k < 0 {
						break
					}
					packed = packed[k:]
					count++
				}
			} else {
				count++
			}
		}
		msg = msg[n+m:]
	}
	return count
}

// messageID returns field 1 (the id) of a Mapping, Location or Function.
func messageID(msg []byte) uint64 {
	for len(msg) > 0 {
		f, typ, n := protowire.ConsumeTag(msg)
		if n < 0 {
			return 0
		}
		if f == 1 && typ == protowire.VarintType {
			v, _ := protowire.ConsumeVarint(msg[n:])
			return v
		}
		m := protowire.ConsumeFieldValue(f, typ, msg[n:])
		if m < 0 {
			return 0
		}
		msg = msg[n+m:]
	}
	return 0
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

// limitError is a limit exceeded at a byte of an input (of its
// decompressed data when decompressed). It wraps ErrLimit.
type limitError struct {
	msg          string
	at           int64
	decompressed bool
}

func (e *limitError) Error() string { return e.msg + ": " + ErrLimit.Error() }
func (e *limitError) Unwrap() error { return ErrLimit }

// sizeLimitReader fails once more than max bytes have been read.
type sizeLimitReader struct {
	r            io.Reader
	n            int64
	max          int64
	name         string
	decompressed bool // r gives decompressed data
}

func (s *sizeLimitReader) Read(p []byte) (int, error) {
	n, err := s.r.Read(p)
	s.n += int64(n)
	if s.n > s.max {
		what := "size"
		if s.decompressed {
			what = "decompressed size"
		}
		return n, &limitError{msg: fmt.Sprintf("%s exceeds %d bytes (raise it with --max-bytes)", what, s.max),
			at: s.max, decompressed: s.decompressed}
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
		return n, &limitError{msg: fmt.Sprintf("decompresses to more than %d times its compressed size (a gzip bomb? raise it with --max-ratio)",
			z.limits.MaxRatio), at: z.out - int64(n), decompressed: true}
	}
	return n, err
}
