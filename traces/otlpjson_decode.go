package traces

import (
	"bytes"
	"encoding/binary"
	"encoding/hex"
	"errors"
	"fmt"
	"math"
	"reflect"
	"strconv"
	"strings"
	"unicode/utf8"

	json "github.com/goccy/go-json"
)

// decoder turns jobs into batches; each worker goroutine has its own.
type decoder struct {
	c       *SpanCollector
	name    string
	b       *batch
	traceIx map[traceID]int32
	// frames, calls and routes outlive jobs: a batch carries only the
	// entries new to this decoder, so the merge hashes each value about
	// once a decoder rather than once a batch.
	frames   localTable[Frame]
	calls    localTable[Call]
	routes   localTable[string]
	attrs    attrSet
	memo     memo
	redacted redactMemo
	ids      *globalIDs     // handed to the merge with every batch
	spare    chan []spanRec // span buffers of merged batches
	req      jsonRequest    // reused for every record that is one object
	// scanned, text, bools, scanner and names are the fast path's
	// (otlpscan.go): the requests it reads (reused), its arena of
	// unescaped strings, the values that boolValues point to, its state,
	// and the field names it knows.
	scanned []jsonRequest
	// wire and wreader are the protobuf reader's (otlpproto.go).
	wire    []jsonRequest
	wreader wireReader
	text    []byte
	bools   [2]bool
	scanner scanner
	names   *fieldNames
	// slow turns the fast path off (for tests that compare the paths).
	slow bool
	// scanFailAt is where the scanner gave up on the record, or -1.
	scanFailAt int
	// doc finds the lines of the spans of a multi-line document.
	doc docLines
	// stmts caches Options.Statement results by system and raw text:
	// instrumentation mostly records parameterised statements, which
	// repeat exactly. Bounded; keys are copies, never job data. When
	// statements carry literals the cache never hits and only costs
	// (a key copy and two hashes a span), so it switches itself off for a
	// while when fewer than one lookup in 8 hits (stmtSkip).
	stmts                 map[string]string
	stmtLookups, stmtHits int
	stmtSkip              int
	stmtBuf               []byte // the last uncached result
}

// Statement cache bounds: entries, lookups per hit-rate check, and
// statements normalised without the cache after a poor check.
const (
	maxStatementCache = 8192
	stmtCheckEvery    = 4096
	stmtSkipFor       = 1 << 16
)

// statement applies Options.Statement through the cache. The result may
// be a view of d.stmtBuf, valid until the next call.
func (d *decoder) statement(system, raw string) string {
	if d.stmtSkip > 0 {
		d.stmtSkip--
		d.stmtBuf = d.c.opts.Statement(d.stmtBuf[:0], system, raw)
		return bytesString(d.stmtBuf)
	}
	if d.stmtLookups++; d.stmtLookups == stmtCheckEvery {
		if d.stmtHits*8 < d.stmtLookups {
			d.stmtSkip = stmtSkipFor
			d.stmts = nil
		}
		d.stmtLookups, d.stmtHits = 0, 0
	}
	key := system + "\x00" + raw // a new string: safe to keep past the job
	if v, ok := d.stmts[key]; ok {
		d.stmtHits++
		return v
	}
	d.stmtBuf = d.c.opts.Statement(d.stmtBuf[:0], system, raw)
	v := string(d.stmtBuf)
	if d.stmts == nil || len(d.stmts) >= maxStatementCache {
		d.stmts = make(map[string]string, 256)
	}
	d.stmts[key] = v
	return v
}

func newDecoder(c *SpanCollector, name string, spare chan []spanRec) *decoder {
	return &decoder{c: c, name: name, spare: spare, traceIx: map[traceID]int32{},
		frames: newLocalTable(cloneFrame), calls: newLocalTable(cloneCall), routes: newLocalTable(strings.Clone)}
}

// defaultLocalEntries bounds a decoder's tables: past it they start anew
// at the next job, so that inputs with many distinct values (statements
// with literals and no normaliser) cost bounded memory.
const defaultLocalEntries = 1 << 14

// localTable interns the values of one kind that a decoder has seen in
// the jobs of one input. Keys are copies, never job data. sent counts the
// entries already handed to the merge.
type localTable[K comparable] struct {
	index map[K]int32
	list  []K
	sent  int
	clone func(K) K
}

func newLocalTable[K comparable](clone func(K) K) localTable[K] {
	return localTable[K]{index: map[K]int32{}, clone: clone}
}

// intern returns the index of k, adding a copy of it if it is new.
func (t *localTable[K]) intern(k K) int32 {
	i, ok := t.index[k]
	if !ok {
		k = t.clone(k)
		i = int32(len(t.list))
		t.list = append(t.list, k)
		t.index[k] = i
	}
	return i
}

// take returns the entries added since the last take. The merge reads
// them while the decoder appends more: appending never writes them.
func (t *localTable[K]) take() []K {
	news := t.list[t.sent:len(t.list):len(t.list)]
	t.sent = len(t.list)
	return news
}

// restart empties the table. Its array is left to the merge, which may
// still be reading entries of the last batch.
func (t *localTable[K]) restart() {
	clear(t.index)
	t.list, t.sent = nil, 0
}

func cloneFrame(f Frame) Frame {
	f.Function, f.File = strings.Clone(f.Function), strings.Clone(f.File)
	f.System, f.Service, f.Scope = strings.Clone(f.System), strings.Clone(f.Service), strings.Clone(f.Scope)
	return f
}

func cloneCall(k Call) Call {
	k.System, k.Statement, k.Summary = strings.Clone(k.System), strings.Clone(k.Statement), strings.Clone(k.Summary)
	k.Operation, k.Peer = strings.Clone(k.Operation), strings.Clone(k.Peer)
	return k
}

// run decodes one job.
func (d *decoder) run(j *job) *batch {
	// Decoded strings refer to the job's data, whose array is reused
	// once the batch is merged: nothing that refers to it may carry over
	// to the next job (the tables hold copies).
	d.b = &batch{}
	select {
	case d.b.spans = <-d.spare:
	default:
	}
	d.memo, d.redacted = memo{}, redactMemo{}
	clear(d.traceIx)
	if max(len(d.frames.list), len(d.calls.list), len(d.routes.list)) > d.c.localEntries {
		d.frames.restart()
		d.calls.restart()
		d.routes.restart()
		d.b.restart = true
	}
	defer d.finish()
	if j.proto {
		d.protoRecord(j.data, j.offset, j.line)
		return d.b
	}
	if j.doc {
		d.record(j.data, j.line, j.col, true)
		return d.b
	}
	data, line := j.data, j.line
	for len(data) > 0 && d.b.err == nil {
		var l []byte
		if i := bytes.IndexByte(data, '\n'); i >= 0 {
			l, data = data[:i], data[i+1:]
		} else {
			l, data = data, nil
		}
		if n := len(l); n > 0 && l[n-1] == '\r' {
			l = l[:n-1]
		}
		if len(l) > d.c.limits.MaxLineBytes {
			d.b.err = lineLimitError(d.name, line, d.c.limits.MaxLineBytes)
			break
		}
		d.record(l, line, 1, false)
		line++
	}
	return d.b
}

// finish hands the batch the table entries that its jobs added.
func (d *decoder) finish() {
	d.b.frames, d.b.calls, d.b.strs = d.frames.take(), d.calls.take(), d.routes.take()
	d.b.ids = d.ids
}

// record decodes one JSON value: a line, or a document starting at line
// and byte column col. The decoded strings refer to rec.
func (d *decoder) record(rec []byte, line, col int64, doc bool) {
	start := 0
	for start < len(rec) && isSpace(rec[start]) {
		start++
	}
	if start == len(rec) {
		return // blank line
	}
	d.doc = docLines{}
	if doc {
		d.doc = docLines{rec: rec, line: line}
	}
	d.scanFailAt = -1
	if !d.slow && d.scan(rec, start, line) {
		return
	}
	if !doc && bytes.Count(rec, []byte{'{'})+bytes.Count(rec, []byte{'['}) > d.c.limits.MaxDepth {
		// (Nesting is at most the number of brackets.)
		if _, deep := scanJSON(rec[start:], d.c.limits.MaxDepth); deep >= 0 {
			d.b.err = depthError(d.name, rec, line, col, start+deep, d.c.limits.MaxDepth)
			return
		}
	}
	if !utf8.Valid(rec) {
		// The JSON decoder replaces invalid UTF-8 with U+FFFD: a repair,
		// so count it (or refuse it in strict mode).
		at := int64(start)
		for i := 0; i < len(rec); {
			r, n := utf8.DecodeRune(rec[i:])
			if r == utf8.RuneError && n <= 1 {
				at = int64(i)
				break
			}
			i += n
		}
		msg := fmt.Sprintf("invalid UTF-8 at byte %d of the record, replaced by U+FFFD", at+1)
		if d.c.opts.Strict {
			d.b.err = &ParseError{File: d.name, Line: clampLine(line), Err: fmt.Errorf("%w: %s: %s", ErrSpanRepair, WarnInvalidUTF8, msg)}
			return
		}
		d.b.warnings = append(d.b.warnings, Warning{Kind: WarnInvalidUTF8, File: d.name, Line: clampLine(line), Message: msg})
	}
	var err error
	if rec[start] == '[' {
		var reqs []jsonRequest
		if err = unmarshal(rec, &reqs); err == nil {
			err = d.requests(reqs, line)
		}
	} else {
		d.req.reset()
		if err = unmarshal(rec, &d.req); err == nil {
			err = d.requests([]jsonRequest{d.req}, line)
		}
	}
	if err != nil {
		// The decoder may have left data beyond the lengths that reset
		// clears: start afresh.
		d.req = jsonRequest{}
		pe := decodeFailure(d.name, rec, line, col, err, d.scanFailAt)
		if !d.c.opts.KeepGoing {
			d.b.err = pe
			return
		}
		kind := WarnMalformedLine
		if doc {
			kind = WarnMalformedDocument
		}
		d.b.warnings = append(d.b.warnings, Warning{Kind: kind, File: d.name, Line: pe.Line, Column: pe.Offset,
			Message: pe.Err.Error() + " (skipped)"})
	}
}

// unmarshal decodes rec into v with the JSON decoder, the scanner's
// fallback; decoded strings refer to rec. FuzzOTLPJSON and
// FuzzOTLPJSONFastPath hold that no input makes it panic.
func unmarshal(rec []byte, v any) error {
	return json.UnmarshalWithOption(rec, v, json.DecodeNoCopyString())
}

// requests converts the spans of decoded requests and adds them to the
// batch, or returns the reason why the record is malformed. A record is
// taken whole or not at all.
func (d *decoder) requests(reqs []jsonRequest, line int64) error {
	mark := len(d.b.spans)
	markWarn := len(d.b.warnings)
	for i := range reqs {
		for j := range reqs[i].ResourceSpans {
			rs := &reqs[i].ResourceSpans[j]
			service := resourceService(rs.Resource.Attributes)
			for _, scopes := range [2][]jsonScopeSpans{rs.ScopeSpans, rs.InstrumentationLibrarySpans} {
				for k := range scopes {
					scope := scopes[k].Scope.Name
					if scope == "" {
						scope = scopes[k].InstrumentationLibrary.Name
					}
					for m := range scopes[k].Spans {
						if err := d.span(&scopes[k].Spans[m], service, scope, line); err != nil {
							d.b.spans = d.b.spans[:mark]
							d.b.warnings = d.b.warnings[:markWarn]
							return err
						}
						if d.b.err != nil {
							return nil
						}
					}
				}
			}
		}
	}
	return nil
}

// decodeFailure turns a decoding error into a ParseError with the line,
// column and an excerpt of where it happened.
// scanFailAt, where the scanner failed (or -1), places a type error that
// the JSON decoder does not place.
func decodeFailure(name string, rec []byte, line, col int64, err error, scanFailAt int) *ParseError {
	at := -1
	msg := "malformed JSON: " + err.Error()
	var se *json.SyntaxError
	var te *json.UnmarshalTypeError
	var ve *valueError
	switch {
	case errors.As(err, &se):
		at = int(se.Offset) - 1
		msg = "malformed JSON: " + se.Error()
	case errors.As(err, &te):
		field := te.Field
		if field == "" {
			field = "top level"
		}
		msg = fmt.Sprintf("not OTLP/JSON: %s: unexpected JSON %s", field, te.Value)
		if te.Type == reflect.TypeFor[json.Number]() {
			msg = "not OTLP/JSON: invalid integer " + strings.TrimPrefix(te.Value, "string ")
		}
		switch _, quoted, _ := strings.Cut(te.Value, " "); {
		case te.Offset > 0:
			at = valueStart(rec, int(te.Offset))
		case strings.HasPrefix(quoted, `"`):
			// No offset: point at the first use of the value.
			at = bytes.Index(rec, []byte(quoted))
		case te.Field != "":
			// Or at the first use of the field's key.
			at = bytes.Index(rec, []byte(`"`+te.Field[strings.LastIndexByte(te.Field, '.')+1:]+`"`))
		case scanFailAt >= 0 && scanFailAt < len(rec):
			// Or where the scanner met the same wrong type.
			at = scanFailAt
		}
	case errors.As(err, &ve):
		at = bytes.Index(rec, ve.raw)
		msg = "not OTLP/JSON: " + ve.Error()
	}
	pe := &ParseError{File: name, Line: clampLine(line), Err: &decodeError{msg: msg, err: err}}
	if at >= 0 {
		l, c := position(rec, line, col, at)
		pe.Line, pe.Offset = clampLine(l), c
		pe.Snippet = snippet(rec, at)
	} else {
		pe.Snippet = snippet(rec, 0)
	}
	return pe
}

// valueStart returns the index of the first byte of the JSON value that
// ends at rec[end-1] (for an object or array: that starts there).
func valueStart(rec []byte, end int) int {
	end = min(end, len(rec))
	if end <= 0 {
		return 0
	}
	i := end - 1
	switch rec[i] {
	case '{', '[':
		return i
	case '"':
		for j := i - 1; j >= 0; j-- {
			if rec[j] != '"' {
				continue
			}
			bs := 0
			for k := j - 1; k >= 0 && rec[k] == '\\'; k-- {
				bs++
			}
			if bs%2 == 0 {
				return j
			}
		}
		return i
	}
	for i > 0 && isLiteralByte(rec[i-1]) {
		i--
	}
	return i
}

func isLiteralByte(c byte) bool {
	return '0' <= c && c <= '9' || 'a' <= c && c <= 'z' || 'A' <= c && c <= 'Z' || c == '-' || c == '+' || c == '.'
}

// decodeError is a decoding error with a message fit for users.
type decodeError struct {
	msg string
	err error
}

// Error returns the message for users.
func (e *decodeError) Error() string { return e.msg }

// Unwrap returns the decoder's own error.
func (e *decodeError) Unwrap() error { return e.err }

// resourceService returns the resource's service.name, or "".
func resourceService(attrs []jsonKeyValue) string {
	for i := range attrs {
		if attrs[i].Key == "service.name" {
			return attrs[i].Value.text()
		}
	}
	return ""
}

// nanos converts a timestamp: ns since the Unix epoch, 0 when absent.
func nanos(n json.Number) (int64, error) {
	if n == "" {
		return 0, nil
	}
	v, ok := parseInt(string(n))
	if !ok || v < 0 {
		return 0, &valueError{what: "invalid timestamp", raw: []byte(n)}
	}
	return v, nil
}

// span converts one decoded span and adds it to the batch. It returns an
// error when the span is malformed (the record is then dropped), and sets
// d.b.err when Strict forbids skipping a span with invalid IDs.
func (d *decoder) span(sp *jsonSpan, service, scope string, line int64) error {
	if d.doc.rec != nil && sp.at > 0 {
		line = d.doc.lineAt(sp.at - 1)
	}
	start, end, err := spanTimes(sp)
	if err != nil {
		return err
	}
	// Direct calls, not a function value: the arrays must stay on the stack
	// (through an indirect call they escape, three allocations a span).
	var trace, id, parent [16]byte
	var tn, sn, pn int
	describe := describeID
	if sp.wire {
		describe = describeRawID
		tn, sn, pn = rawID(&trace, sp.TraceID), rawID(&id, sp.SpanID), rawID(&parent, sp.ParentSpanID)
	} else {
		tn, sn, pn = parseID(&trace, sp.TraceID), parseID(&id, sp.SpanID), parseID(&parent, sp.ParentSpanID)
	}
	var problem string
	switch {
	case tn != 16 || trace == [16]byte{}:
		problem = "trace ID " + describe(sp.TraceID, tn)
	case sn != 8 || id == [16]byte{}:
		problem = "span ID " + describe(sp.SpanID, sn)
	case pn != 0 && pn != 8:
		problem = "parent span ID " + describe(sp.ParentSpanID, pn)
	}
	if problem != "" {
		msg := fmt.Sprintf("span %q skipped: invalid %s", truncate(sp.Name, 60), problem)
		if !d.c.opts.ShowLiterals {
			msg = redactText(msg)
		}
		if d.c.opts.Strict {
			d.b.err = &ParseError{File: d.name, Line: clampLine(line), Err: fmt.Errorf("%w: %s: %s", ErrSpanRepair, WarnInvalidID, msg)}
			return nil
		}
		d.b.warnings = append(d.b.warnings, Warning{Kind: WarnInvalidID, File: d.name, Line: clampLine(line), Message: msg})
		return nil
	}

	d.attrs = attrSet{}
	for i := range sp.Attributes {
		if k := attrIndex(sp.Attributes[i].Key); k >= 0 && d.attrs[k] == nil {
			d.attrs[k] = &sp.Attributes[i].Value
		}
	}
	frame, call, route := spanDetails(SpanKind(sp.Kind), sp.Name, service, scope, &d.attrs, &d.memo)
	if frame.SpanKind != SpanKind(sp.Kind) {
		msg := fmt.Sprintf("database span %q has no known span kind; it is taken as a CLIENT span", truncate(sp.Name, 60))
		if !d.c.opts.ShowLiterals {
			msg = redactText(msg) // the name may hold a statement
		}
		if d.c.opts.Strict {
			d.b.err = &ParseError{File: d.name, Line: clampLine(line), Err: fmt.Errorf("%w: %s: %s", ErrSpanRepair, WarnUnknownSpanKind, msg)}
			return nil
		}
		d.b.warnings = append(d.b.warnings, Warning{Kind: WarnUnknownSpanKind, File: d.name, Line: clampLine(line), Message: msg})
	}
	if !d.c.opts.ShowLiterals {
		d.redactSpan(sp.Name, &frame, &call, &route)
	}
	if call.Statement != "" && d.c.opts.Statement != nil {
		// Normalise here, in the parallel decoders, so that calls differing
		// only in literals intern to one Call.
		call.Statement = d.statement(frame.System, call.Statement)
	}

	rec := spanRec{
		id: binary.BigEndian.Uint64(id[:8]), start: start, end: end,
		line: int32(min(line, math.MaxInt32)), call: -1, route: -1,
	}
	tid := traceID{binary.BigEndian.Uint64(trace[:8]), binary.BigEndian.Uint64(trace[8:])}
	if n := len(d.b.traces); n > 0 && d.b.traces[n-1] == tid {
		rec.trace = int32(n - 1) // spans of a trace mostly come together
	} else {
		rec.trace = intern(d.traceIx, &d.b.traces, tid)
	}
	if pn == 8 {
		rec.parent = binary.BigEndian.Uint64(parent[:8])
	}
	rec.frame = d.frames.intern(frame)
	if call != (Call{}) {
		rec.call = d.calls.intern(call)
	}
	if route != "" {
		rec.route = d.routes.intern(route)
	}
	d.b.spans = append(d.b.spans, rec)
	return nil
}

// spanTimes returns a span's start and end in ns since the Unix epoch.
func spanTimes(sp *jsonSpan) (start, end int64, err error) {
	if sp.wire {
		for _, t := range [2]uint64{sp.start, sp.end} {
			if t > math.MaxInt64 {
				return 0, 0, &valueError{what: "invalid timestamp", raw: strconv.AppendUint(nil, t, 10)}
			}
		}
		return int64(sp.start), int64(sp.end), nil
	}
	if start, err = nanos(sp.Start); err != nil {
		return 0, 0, err
	}
	end, err = nanos(sp.End)
	return start, end, err
}

// rawID copies a binary trace or span ID (the protobuf encoding's) into
// b and returns its length, or -1 when it is longer than 16 bytes.
func rawID(b *[16]byte, s string) int {
	if len(s) > len(b) {
		return -1
	}
	return copy(b[:], s)
}

// describeRawID says what is wrong with a binary ID that rawID returned n for.
func describeRawID(s string, n int) string {
	if n == 0 {
		return "(missing)"
	}
	return fmt.Sprintf("%s (%d bytes)", truncate(hex.EncodeToString([]byte(s)), 40), len(s))
}

// intern returns the index of k in *list, appending it if index lacks it.
func intern[K comparable](index map[K]int32, list *[]K, k K) int32 {
	i, ok := index[k]
	if !ok {
		i = int32(len(*list))
		*list = append(*list, k)
		index[k] = i
	}
	return i
}

// describeID says what is wrong with an ID that parseID returned n for.
func describeID(s string, n int) string {
	switch {
	case n < 0:
		return fmt.Sprintf("%q (neither hex nor base64 of the right length)", truncate(s, 40))
	case n == 0:
		return "(missing)"
	case n == 8 || n == 16:
		return fmt.Sprintf("%q (%d bytes, all zero or of the wrong length)", truncate(s, 40), n)
	}
	return fmt.Sprintf("%q (%d bytes)", truncate(s, 40), n)
}

// text returns the value as text: strings as they are, numbers and
// booleans formatted, and "" for bytes, arrays, key-value lists, the
// empty value and invalid integers.
func (v *jsonAnyValue) text() string {
	switch {
	case v.IntValue != "":
		if n, ok := parseInt(string(v.IntValue)); ok {
			return strconv.FormatInt(n, 10)
		}
		return ""
	case v.DoubleValue.set:
		return strconv.FormatFloat(v.DoubleValue.v, 'g', -1, 64)
	case v.BoolValue != nil:
		return strconv.FormatBool(*v.BoolValue)
	}
	return v.StringValue
}

// integer returns the value as an integer: an int, an integral double, or
// a string holding a decimal integer.
func (v *jsonAnyValue) integer() (int64, bool) {
	switch {
	case v.IntValue != "":
		return parseInt(string(v.IntValue))
	case v.DoubleValue.set:
		f := v.DoubleValue.v
		if f == math.Trunc(f) && f >= math.MinInt64 && f < math.MaxInt64 {
			return int64(f), true
		}
		return 0, false
	case v.StringValue != "":
		n, err := strconv.ParseInt(strings.TrimSpace(v.StringValue), 10, 64)
		return n, err == nil
	}
	return 0, false
}

// docLines gives the line of a byte of a multi-line record (a document)
// that starts at line; offsets asked for in increasing order cost one pass
// over the record in all.
type docLines struct {
	rec  []byte
	line int64 // line of rec[0]
	at   int   // offset counted up to
	nl   int64 // newlines in rec[:at]
}

func (d *docLines) lineAt(at int) int64 {
	at = max(0, min(at, len(d.rec)))
	if at < d.at {
		d.at, d.nl = 0, 0
	}
	d.nl += int64(countLines(d.rec[d.at:at]))
	d.at = at
	return d.line + d.nl
}
