package traces

import (
	"bytes"
	"errors"
	"fmt"
	"io"
	"runtime"
	"slices"
	"sync"
)

// FormatOTLPJSON is the Input.Format of inputs read by SpanCollector.
const FormatOTLPJSON = "otlp-json"

// Warning kinds recorded while reading OTLP/JSON inputs.
const (
	// WarnMalformedLine is a line (or document) that did not decode and was
	// skipped because Options.KeepGoing is set.
	WarnMalformedLine = "malformed-line"
	// WarnMalformedDocument is a multi-line JSON document that did not
	// decode and was skipped because Options.KeepGoing is set.
	WarnMalformedDocument = "malformed-document"
	// WarnInvalidID is a span skipped because its trace, span or parent ID
	// is missing, all zero, or neither 16/8 bytes of hex nor base64.
	WarnInvalidID = "invalid-id"
	// WarnUnknownSpanKind is a database span (it has db.system.name or
	// db.system) whose kind is unspecified or unknown; it is taken as a
	// CLIENT span, so that its call is not lost.
	WarnUnknownSpanKind = "unknown-span-kind"
	// WarnNoSpans is an input that decoded as JSON but held no spans.
	WarnNoSpans = "no-spans"
	// WarnInvalidUTF8 is a record holding invalid UTF-8, which is
	// replaced by U+FFFD.
	WarnInvalidUTF8 = "invalid-utf8"
)

// jobsAhead is how many jobs a decoder may have queued before the one
// being merged (see read).
const jobsAhead = 4

// defaultBlockSize is how many bytes of JSON lines the reader hands to a
// decoding worker at a time (more when a single line is longer).
const defaultBlockSize = 512 << 10

// SpanCollector gathers spans from any number of OTLP/JSON inputs and
// assembles them into one Source. Spans of one trace may be spread over
// any number of lines and inputs.
//
// A SpanCollector is not safe for concurrent use: call Add for one input
// at a time (each Add decodes in parallel by itself), then Source.
type SpanCollector struct {
	used      bool // Source was called: the spans went into its paths
	opts      Options
	limits    Limits
	workers   int
	blockSize int
	// localEntries bounds each decoder's tables (see localTable).
	localEntries int

	// frames, calls and strs intern what the decoded spans refer to;
	// index 0 of each stands for "none".
	frames     []Frame
	frameIndex map[Frame]int32
	traceIDs   []traceID // interned trace IDs, in order of first reading
	traceIndex map[traceID]int32
	calls      []Call
	callIndex  map[Call]int32
	strs       []string
	strIndex   map[string]int32

	spans    spanStore
	inputs   []Input
	warnings Warnings
	elided   FrameID // the frame of elided path middles (see Source)

	// free and spare hold block and span buffers for reuse, across inputs:
	// thousands of small inputs then cost no more allocation than one.
	free  chan []byte
	spare chan []spanRec
}

// NewSpanCollector returns an empty collector reading with opts. Zero
// limits take their defaults; Workers 0 means GOMAXPROCS.
func NewSpanCollector(opts Options) *SpanCollector {
	w := opts.Workers
	if w <= 0 {
		w = runtime.GOMAXPROCS(0)
	}
	return &SpanCollector{
		opts:         opts,
		limits:       opts.Limits.withDefaults(),
		workers:      w,
		blockSize:    defaultBlockSize,
		localEntries: defaultLocalEntries,
		frames:       []Frame{{}},
		frameIndex:   map[Frame]int32{},
		traceIndex:   map[traceID]int32{},
		calls:        []Call{{}},
		callIndex:    map[Call]int32{},
		strs:         []string{""},
		strIndex:     map[string]int32{},
	}
}

// utf8BOM is the UTF-8 byte order mark.
const utf8BOM = "\xEF\xBB\xBF"

// Add decodes one already-decompressed input: JSON lines with one export
// request (TracesData / ExportTraceServiceRequest) per line, or one JSON
// document (possibly several, one after another) spanning many lines. A
// file whose first non-blank line is a complete JSON value is read as JSON
// lines. name is used in errors and warnings.
//
// On error nothing of this input is kept. A malformed line is an error
// (*ParseError naming name, the line and the byte column) unless
// Options.KeepGoing is set, in which case it is skipped with a
// "malformed-line" warning. Exceeding a limit is always an error wrapping
// ErrLimit.
func (c *SpanCollector) Add(name string, r io.Reader) error {
	cr := &countingReader{r: r, max: c.limits.MaxBytes}
	split := func(send func(*job) bool, fail func(error), free chan []byte) { c.split(name, cr, send, fail, free) }
	return c.addInput(name, FormatOTLPJSON, split, func() int64 { return cr.n })
}

// Record is one OTLP trace export request of an input that holds a
// sequence of them (a capture segment, a protobuf file).
type Record struct {
	Data   []byte
	JSON   bool  // OTLP/JSON; else the binary protobuf encoding
	Offset int64 // where Data starts in the input, for errors
}

// AddRecords reads the export requests that next returns until it
// returns io.EOF, as one input named name of the given format. Data must
// stay unchanged until AddRecords returns. A binary request is read as
// proto.Unmarshal into the official OTLP types would read it; a JSON one
// as one document of Add. Errors are as for Add, with byte offsets for
// binary requests; an error of next ends the input with that error.
// Warnings give a record's number in the input (from 1) as its line.
func (c *SpanCollector) AddRecords(name, format string, next func() (Record, error)) error {
	var n, records int64
	produce := func(send func(*job) bool, fail func(error), _ chan []byte) {
		for {
			r, err := next()
			if errors.Is(err, io.EOF) {
				return
			}
			if err != nil {
				fail(err)
				return
			}
			if n += int64(len(r.Data)); n > c.limits.MaxBytes {
				fail(fmt.Errorf("%s: %w: more than %d bytes (raise it with --max-bytes)", name, ErrLimit, c.limits.MaxBytes))
				return
			}
			records++
			j := &job{data: r.Data, proto: !r.JSON, doc: r.JSON, offset: r.Offset, line: records, col: 1, result: make(chan *batch, 1)}
			if !send(j) {
				return
			}
		}
	}
	return c.addInput(name, format, produce, func() int64 { return n })
}

// addInput reads one input whose jobs produce makes; size returns its
// size in bytes once read. On error nothing of the input is kept.
func (c *SpanCollector) addInput(name, format string, produce producer, size func() int64) error {
	if c.used {
		return errors.New("traces: SpanCollector.Add called after Source")
	}
	input := int32(len(c.inputs))
	mark, before, frames, calls, strs := c.spans.mark(), c.spans.len(), len(c.frames), len(c.calls), len(c.strs)
	traces := len(c.traceIDs)
	var ws Warnings
	if err := c.read(name, input, produce, &ws); err != nil {
		c.spans.truncate(mark)
		for _, f := range c.frames[frames:] {
			delete(c.frameIndex, f)
		}
		for _, k := range c.calls[calls:] {
			delete(c.callIndex, k)
		}
		for _, s := range c.strs[strs:] {
			delete(c.strIndex, s)
		}
		for _, t := range c.traceIDs[traces:] {
			delete(c.traceIndex, t)
		}
		c.traceIDs = c.traceIDs[:traces]
		c.frames, c.calls, c.strs = slices.Delete(c.frames, frames, len(c.frames)),
			slices.Delete(c.calls, calls, len(c.calls)), slices.Delete(c.strs, strs, len(c.strs))
		return err
	}
	c.inputs = append(c.inputs, Input{Name: name, Format: format, Bytes: size()})
	if c.spans.len() == before {
		// Valid JSON with no spans: an empty export, or not OTLP at all.
		what := "OTLP/JSON"
		if format != FormatOTLPJSON {
			what = "OTLP"
		}
		ws.Add(Warning{Kind: WarnNoSpans, File: name, Message: "no spans (is this " + what + " trace data? it needs resourceSpans → scopeSpans → spans)"})
	}
	c.warnings.Merge(ws)
	return nil
}

// countingReader counts the bytes read and fails once more than max were.
type countingReader struct {
	r   io.Reader
	n   int64
	max int64
}

// Read reads from the underlying reader, counting the bytes.
func (cr *countingReader) Read(p []byte) (int, error) {
	n, err := cr.r.Read(p)
	cr.n += int64(n)
	if cr.max > 0 && cr.n > cr.max {
		return n, errInputTooLarge
	}
	return n, err
}

// errInputTooLarge is turned into a limit error naming the input by read.
var errInputTooLarge = errors.New("input too large")

// job is one unit of decoding work: a block of complete lines, or one JSON
// document. result receives exactly one batch.
type job struct {
	data   []byte
	pooled bool  // data's array may be reused once the batch is merged
	line   int64 // line number of data[0]
	col    int64 // byte column of data[0] (documents only; 1 for blocks)
	doc    bool
	proto  bool  // data is one binary protobuf request
	offset int64 // where a binary request starts in the input
	result chan *batch
}

// batch is what a worker made of one job: spans with trace indices local
// to the batch and frame, call and route indices local to the decoder's
// tables, the trace IDs and the table entries new since the decoder's
// last batch, warnings in input order, and the first fatal error.
// restart says the decoder's tables started anew with this batch; ids is
// the decoder's, and only the merge uses it.
type batch struct {
	spans    []spanRec
	traces   []traceID
	frames   []Frame
	calls    []Call
	strs     []string
	warnings []Warning
	err      error
	restart  bool
	ids      *globalIDs
}

// globalIDs maps a decoder's table indices to the collector's.
type globalIDs struct {
	frames, calls, strs []int32
}

// read runs the reading pipeline for one input: a reader goroutine cuts
// the input into jobs, c.workers goroutines decode them, and this
// goroutine merges the batches in input order, so the result does not
// depend on the number of workers.
func (c *SpanCollector) read(name string, input int32, produce producer, ws *Warnings) error {
	// Jobs are merged in input order, so a slow job holds up the ones
	// after it: with only a few in flight, the reader stops on a full
	// queue and the decoders run dry (a scheduler trace showed them
	// blocked a tenth of the time with 2 a worker, a twelfth with
	// jobsAhead = 4 and 8): four keep them about as busy as eight, for
	// 1 MiB more of blocks a worker.
	ahead := jobsAhead * c.workers
	order := make(chan *job, ahead)
	if c.free == nil {
		c.free = make(chan []byte, ahead+2)     // block buffers to reuse
		c.spare = make(chan []spanRec, ahead+2) // batch span buffers to reuse
	}
	free, spare := c.free, c.spare
	jobs := make(chan *job, c.workers)
	done := make(chan struct{})
	var wg sync.WaitGroup

	send := func(j *job) bool {
		select {
		case order <- j:
		case <-done:
			return false
		}
		select {
		case jobs <- j:
			return true
		case <-done:
			return false
		}
	}
	fail := func(err error) {
		j := &job{result: make(chan *batch, 1)}
		j.result <- &batch{err: err}
		select {
		case order <- j:
		case <-done:
		}
	}
	wg.Add(1)
	go func() {
		defer wg.Done()
		defer close(order)
		defer close(jobs)
		produce(send, fail, free)
	}()
	for range c.workers {
		wg.Add(1)
		go func() {
			defer wg.Done()
			d := newDecoder(c, name, spare)
			d.ids = &globalIDs{}
			for {
				select {
				case j, ok := <-jobs:
					if !ok {
						return
					}
					j.result <- d.run(j)
				case <-done:
					return
				}
			}
		}()
	}

	var err error
	for j := range order {
		b := <-j.result
		if b.err != nil {
			err = b.err
			break
		}
		if err = c.merge(name, input, b, ws); err != nil {
			break
		}
		if j.pooled {
			select {
			case free <- j.data[:cap(j.data)]:
			default:
			}
		}
		select {
		case spare <- b.spans[:0]:
		default:
		}
	}
	close(done)
	wg.Wait()
	return err
}

// producer makes the jobs of one input, in input order: send queues one
// (false: stop, the reading failed), fail ends the input with an error,
// and free holds buffers of merged jobs to reuse.
type producer func(send func(*job) bool, fail func(error), free chan []byte)

// split reads r, cutting it into jobs of JSON lines or documents.
func (c *SpanCollector) split(name string, r io.Reader, send func(*job) bool, fail func(error), free chan []byte) {

	br := &blockReader{r: r, size: c.blockSize, maxLine: c.limits.MaxLineBytes, maxBytes: c.limits.MaxBytes, name: name, line: 1, free: free}
	// Read blocks until the first two non-blank lines are seen, to choose
	// between JSON lines and a document (jsonLayout).
	var head []*job
	var seen []byte // the head's text while undecided
	first := true
	lines := false
	for {
		data, line, err := br.next()
		if err != nil {
			fail(err)
			return
		}
		if data == nil {
			lines, _ = jsonLayout(seen, true)
			break
		}
		if first {
			data = bytes.TrimPrefix(data, []byte(utf8BOM))
			first = false
		}
		head = append(head, &job{data: data, line: line, col: 1, pooled: true, result: make(chan *batch, 1)})
		if len(head) == 1 {
			seen = data
		} else {
			seen = append(seen[:len(seen):len(seen)], data...)
		}
		var decided bool
		if lines, decided = jsonLayout(seen, false); decided {
			break
		}
	}
	if lines {
		for _, j := range head {
			if !send(j) {
				return
			}
		}
		for {
			data, line, err := br.next()
			if err != nil {
				fail(err)
				return
			}
			if data == nil {
				return
			}
			if !send(&job{data: data, line: line, col: 1, pooled: true, result: make(chan *batch, 1)}) {
				return
			}
		}
	}

	// A document: read it whole, then cut it into top-level values.
	var doc []byte
	startLine := int64(1)
	if len(head) > 0 {
		startLine = head[0].line
	}
	for _, j := range head {
		doc = append(doc, j.data...)
	}
	for {
		data, _, err := br.next()
		if err != nil {
			fail(err)
			return
		}
		if data == nil {
			break
		}
		doc = append(doc, data...)
	}
	line, col := startLine, int64(1)
	pos := 0
	for pos < len(doc) {
		// Skip whitespace, tracking the position.
		for pos < len(doc) && isSpace(doc[pos]) {
			if doc[pos] == '\n' {
				line++
				col = 1
			} else {
				col++
			}
			pos++
		}
		if pos == len(doc) {
			return
		}
		end, deep := scanJSON(doc[pos:], c.limits.MaxDepth)
		rec := doc[pos : pos+end]
		if deep >= 0 {
			fail(depthError(name, rec, line, col, deep, c.limits.MaxDepth))
			return
		}
		if !send(&job{data: rec, line: line, col: col, doc: true, result: make(chan *batch, 1)}) {
			return
		}
		nl := countLines(rec)
		if nl > 0 {
			line += int64(nl)
			col = int64(len(rec) - bytes.LastIndexByte(rec, '\n'))
		} else {
			col += int64(len(rec))
		}
		pos += end
	}
}

// merge adds a batch's spans to the collector, interning what they refer to.
func (c *SpanCollector) merge(name string, input int32, b *batch, ws *Warnings) error {
	ids := b.ids
	if b.restart {
		*ids = globalIDs{frames: ids.frames[:0], calls: ids.calls[:0], strs: ids.strs[:0]}
	}
	for _, f := range b.frames {
		if _, ok := c.frameIndex[f]; !ok && len(c.frames)-1 >= c.limits.MaxFrames {
			line, local := 0, int32(len(ids.frames))
			for _, s := range b.spans {
				if s.frame == local {
					line = int(s.line)
					break
				}
			}
			return &ParseError{File: name, Line: line,
				Err: fmt.Errorf("%w: more than %d distinct frames", ErrLimit, c.limits.MaxFrames)}
		}
		ids.frames = append(ids.frames, intern(c.frameIndex, &c.frames, f)) // keeps the decoder's copy
	}
	for _, k := range b.calls {
		ids.calls = append(ids.calls, intern(c.callIndex, &c.calls, k))
	}
	for _, s := range b.strs {
		ids.strs = append(ids.strs, intern(c.strIndex, &c.strs, s))
	}
	tmap := make([]int32, len(b.traces))
	for i, t := range b.traces {
		tmap[i] = intern(c.traceIndex, &c.traceIDs, t)
	}
	fmap, cmap, smap := ids.frames, ids.calls, ids.strs
	for _, s := range b.spans {
		s.trace = tmap[s.trace]
		s.frame = fmap[s.frame]
		if s.call >= 0 {
			s.call = cmap[s.call]
		} else {
			s.call = 0
		}
		if s.route >= 0 {
			s.route = smap[s.route]
		} else {
			s.route = 0
		}
		s.input = input
		c.spans.push(s, c.traceIDs[s.trace])
	}
	for _, w := range b.warnings {
		ws.Add(w)
	}
	return nil
}
