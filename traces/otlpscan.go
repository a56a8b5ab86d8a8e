package traces

import (
	"bytes"
	"encoding/binary"
	"math/bits"
	"strings"
	"unicode/utf16"
	"unicode/utf8"
	"unsafe"

	json "github.com/goccy/go-json"
)

// This file is the fast path of the OTLP/JSON decoder: a hand-written
// scanner that reads a record in one pass and fills the same jsonRequest
// values as the JSON decoder, without reflection and without allocating
// per span. It accepts only what it knows the JSON decoder reads the same
// way, and gives up on anything else: a syntax error, a value of another
// type than the field's, invalid UTF-8, nesting beyond the limit, a null
// span, a repeated key, or a key that is escaped, not ASCII, or a field's
// name but for its case (the JSON decoder, as encoding/json, matches keys
// by case folding). The record is then decoded again by the JSON decoder,
// which makes the errors and warnings: they do not depend on the path.
//
// Of the attributes, the scanner keeps only those that the conversion of
// spans reads (attrIndex, service.name), without the contents of arrays
// and key-value lists, which nothing reads; it checks the others as the
// JSON decoder does.
//
// Strings without escapes refer to the record, as the JSON decoder's do
// with DecodeNoCopyString; escaped ones are unescaped into an arena.

// maxScanDepth bounds the scanner's recursion: deeper records (when
// Limits.MaxDepth allows them) go to the JSON decoder.
const maxScanDepth = 1024

// textChunk is the size of the arena's chunks of unescaped text (bytes).
const textChunk = 16 << 10

// scanner reads one record. Every method reads a value starting at b[i]
// (whitespace before it already skipped) and leaves i after it; on a
// failure it sets failed and moves i to the end, so that every loop ends.
type scanner struct {
	b        []byte
	i        int
	depth    int // brackets open at i
	maxDepth int
	plain    bool // b is plain (see isPlain)
	failed   bool
	failAt   int      // i when it failed
	text     *[]byte  // the decoder's arena of unescaped strings
	bools    *[2]bool // the decoder's false and true, for boolValue
	names    *fieldNames
}

// fieldNames are the names of the fields of the objects that the scanner
// reads, at the indexes by which it tells them.
type fieldNames struct {
	resourceSpans, scopeSpans, span, keyValue, anyValue []string
}

func newFieldNames() *fieldNames {
	return &fieldNames{
		resourceSpans: []string{"resource", "scopeSpans", "instrumentationLibrarySpans"},
		scopeSpans:    []string{"spans", "scope", "instrumentationLibrary"},
		span: []string{"traceId", "spanId", "parentSpanId", "name", "kind",
			"startTimeUnixNano", "endTimeUnixNano", "attributes"},
		keyValue: []string{"key", "value"},
		anyValue: []string{"stringValue", "intValue", "boolValue", "doubleValue", "arrayValue", "kvlistValue", "bytesValue"},
	}
}

// scan decodes rec (whose first non-space byte is rec[start]) on the fast
// path and converts its spans. It reports false, having added nothing to
// the batch, when the record is not for the fast path.
func (d *decoder) scan(rec []byte, start int, line int64) bool {
	reqs, ok := d.read(rec, start)
	// On an error (an invalid timestamp) requests dropped the record's
	// spans and warnings; the JSON decoder's path meets the same spans
	// (adding no frames or calls but those already added) and reports it.
	return ok && d.requests(reqs, line) == nil
}

// read reads rec from rec[start] on into d.scanned, and reports whether
// the scanner accepted it.
func (d *decoder) read(rec []byte, start int) ([]jsonRequest, bool) {
	if d.names == nil {
		d.names = newFieldNames()
	}
	d.bools = [2]bool{false, true}
	s := &d.scanner // (not a local: elements would make it escape)
	*s = scanner{b: rec, i: start, maxDepth: min(d.c.limits.MaxDepth, maxScanDepth), plain: isPlain(rec),
		text: &d.text, bools: &d.bools, names: d.names}
	reqs := d.scanned[:0]
	switch s.peek() {
	case '{':
		reqs = extend(reqs)
		s.request(&reqs[0])
	case '[':
		elements(s, &reqs, (*scanner).request)
	default:
		return nil, false
	}
	d.scanned = reqs
	s.space()
	ok := !s.failed && s.i == len(rec)
	d.scanFailAt = -1
	if s.failed {
		d.scanFailAt = s.failAt
	}
	s.b = nil
	return reqs, ok
}

// extend returns s lengthened by one element, reusing spare capacity: the
// new element keeps what it held, for the caller to reset.
func extend[T any](s []T) []T {
	if len(s) < cap(s) {
		return s[:len(s)+1]
	}
	var zero T
	return append(s, zero)
}

// request reads a TracesData or ExportTraceServiceRequest.
func (s *scanner) request(r *jsonRequest) {
	r.ResourceSpans = r.ResourceSpans[:0]
	for o := s.object(); s.only(&o, "resourceSpans"); {
		elements(s, &r.ResourceSpans, (*scanner).resourceSpans)
	}
}

// resourceSpans reads the spans of one resource.
func (s *scanner) resourceSpans(rs *jsonResourceSpans) {
	*rs = jsonResourceSpans{
		Resource:                    jsonResource{Attributes: rs.Resource.Attributes[:0]},
		ScopeSpans:                  rs.ScopeSpans[:0],
		InstrumentationLibrarySpans: rs.InstrumentationLibrarySpans[:0],
	}
	for o := s.object(); s.field(&o, s.names.resourceSpans); {
		switch o.k {
		case 0:
			s.resource(&rs.Resource)
		case 1:
			elements(s, &rs.ScopeSpans, (*scanner).scope)
		case 2:
			elements(s, &rs.InstrumentationLibrarySpans, (*scanner).scope)
		default:
			s.skip()
		}
	}
}

// resource reads a resource, keeping its service.name attributes.
func (s *scanner) resource(r *jsonResource) {
	if s.null() {
		return
	}
	for o := s.object(); s.only(&o, "attributes"); {
		s.keyValues(&r.Attributes, isServiceName)
	}
}

func isServiceName(key string) bool { return key == "service.name" }

func isSpanAttribute(key string) bool { return attrIndex(key) >= 0 }

// scope reads the spans of one instrumentation scope and its name.
func (s *scanner) scope(sc *jsonScopeSpans) {
	*sc = jsonScopeSpans{Spans: sc.Spans[:0]}
	for o := s.object(); s.field(&o, s.names.scopeSpans); {
		switch o.k {
		case 0:
			elements(s, &sc.Spans, (*scanner).span)
		case 1:
			sc.Scope.Name = s.scopeName()
		case 2:
			sc.InstrumentationLibrary.Name = s.scopeName()
		default:
			s.skip()
		}
	}
}

// scopeName reads an instrumentation scope, or null, and returns its name.
func (s *scanner) scopeName() string {
	if s.null() {
		return ""
	}
	name := ""
	for o := s.object(); s.only(&o, "name"); {
		name = s.str(true)
	}
	return name
}

// elements reads an array, or null, appending an element to list for
// each of its elements and reading it with read (which resets it).
func elements[T any](s *scanner, list *[]T, read func(*scanner, *T)) {
	if s.null() {
		return
	}
	s.open('[')
	for n := 0; s.element(&n); {
		*list = extend(*list)
		read(s, &(*list)[len(*list)-1])
	}
}

// span reads one span.
func (s *scanner) span(sp *jsonSpan) {
	*sp = jsonSpan{Attributes: sp.Attributes[:0]}
	o := s.object()
	sp.at = s.i // just past the span's '{'
	for s.field(&o, s.names.span) {
		switch o.k {
		case 0:
			sp.TraceID = s.str(true)
		case 1:
			sp.SpanID = s.str(true)
		case 2:
			sp.ParentSpanID = s.str(true)
		case 3:
			sp.Name = s.str(true)
		case 4:
			if raw := s.raw(); raw == nil || sp.Kind.UnmarshalJSON(raw) != nil {
				s.fail()
			}
		case 5:
			sp.Start = s.number()
		case 6:
			sp.End = s.number()
		case 7:
			s.keyValues(&sp.Attributes, isSpanAttribute)
		default:
			s.skip()
		}
	}
}

// keyValues reads an array of attributes, appending to list those whose
// key keep accepts; with a nil list it only checks them.
func (s *scanner) keyValues(list *[]jsonKeyValue, keep func(key string) bool) {
	if s.null() {
		return
	}
	s.open('[')
	for m := 0; s.element(&m); {
		s.keyValue(list, keep)
	}
}

// keyValue reads one attribute (null is one with no key, which no one
// keeps).
func (s *scanner) keyValue(list *[]jsonKeyValue, keep func(key string) bool) {
	if s.null() || s.compactKeyValue(list, keep) {
		return
	}
	var spare jsonKeyValue
	kv := &spare
	if list != nil {
		// Read into the list's next element; drop it if not wanted.
		*list = extend(*list)
		kv = &(*list)[len(*list)-1]
		*kv = jsonKeyValue{}
	}
	wanted := list != nil // until the key is known
	for o := s.object(); s.field(&o, s.names.keyValue); {
		switch o.k {
		case 0:
			kv.Key = s.str(true)
			wanted = wanted && keep(kv.Key)
		case 1:
			s.anyValue(&kv.Value, wanted)
		default:
			s.skip()
		}
	}
	if list != nil && !(wanted && keep(kv.Key)) {
		*list = (*list)[:len(*list)-1]
	}
}

// compactKeyValue reads an attribute of a plain record written as most
// writers write them, without whitespace, with a string or an integer in
// a string: {"key":"K","value":{"stringValue":"V"}} or with "intValue".
// It reports false, having read nothing, for any other. (It makes what
// keyValue makes, in a fraction of the time.)
func (s *scanner) compactKeyValue(list *[]jsonKeyValue, keep func(key string) bool) bool {
	b := s.b
	if !s.plain || s.depth+2 > s.maxDepth {
		return false
	}
	k := after(b, s.i, `{"key":"`)
	kEnd := quoteAt(b, k)
	v := after(b, kEnd, `","value":{"`)
	isInt := false
	if w := after(b, v, `stringValue":"`); w >= 0 {
		v = w
	} else {
		v, isInt = after(b, v, `intValue":"`), true
	}
	vEnd := quoteAt(b, v)
	end := after(b, vEnd, `"}}`)
	if end < 0 || isInt && numberEnd(b[v:vEnd], 0) != vEnd-v {
		return false
	}
	s.i = end
	if key := bytesString(b[k:kEnd]); list != nil && keep(key) {
		kv := jsonKeyValue{Key: key}
		if isInt {
			kv.Value.IntValue = json.Number(bytesString(b[v:vEnd]))
		} else {
			kv.Value.StringValue = bytesString(b[v:vEnd])
		}
		*list = append(*list, kv)
	}
	return true
}

// after returns the index after p if b[i:] starts with p, else -1 (as
// for i < 0).
func after(b []byte, i int, p string) int {
	if i < 0 || len(b)-i < len(p) || string(b[i:i+len(p)]) != p {
		return -1
	}
	return i + len(p)
}

// quoteAt returns the index of the first quote from b[i] on, or -1 (as
// for i < 0).
func quoteAt(b []byte, i int) int {
	if i < 0 {
		return -1
	}
	if n := bytes.IndexByte(b[i:], '"'); n >= 0 {
		return i + n
	}
	return -1
}

// anyValue reads an AnyValue into the zero value v. Unless keep is set,
// its strings are checked but not unescaped.
func (s *scanner) anyValue(v *jsonAnyValue, keep bool) {
	if s.null() {
		return
	}
	for o := s.object(); s.field(&o, s.names.anyValue); {
		switch o.k {
		case 0:
			v.StringValue = s.str(keep)
		case 1:
			v.IntValue = s.number()
		case 2:
			v.BoolValue = s.boolean()
		case 3:
			if raw := s.raw(); raw == nil || v.DoubleValue.UnmarshalJSON(raw) != nil {
				s.fail()
			}
		case 4:
			s.values(true)
		case 5:
			s.values(false)
		case 6:
			if raw := s.raw(); raw == nil || v.BytesValue.UnmarshalJSON(raw) != nil {
				s.fail()
			}
		default:
			s.skip()
		}
	}
}

// values checks an arrayValue (of AnyValues) or a kvlistValue (of
// attributes): an object whose field "values" is an array.
func (s *scanner) values(array bool) {
	if s.null() {
		return
	}
	for o := s.object(); s.only(&o, "values"); {
		if s.null() {
			continue
		}
		s.open('[')
		for m := 0; s.element(&m); {
			if array {
				var v jsonAnyValue
				s.anyValue(&v, false)
			} else {
				s.keyValue(nil, nil)
			}
		}
	}
}

// only moves to the value of the next member of the object o whose key is
// name, skipping the others, as field does; it returns false at the end.
func (s *scanner) only(o *object, name string) bool {
	names := [1]string{name}
	for s.field(o, names[:]) {
		if o.k == 0 {
			return true
		}
		s.skip()
	}
	return false
}

// object is the state of reading an object: how many members were read,
// the fields met (a bit per index in names), the index of the name
// expected next (writers put the fields in the same order every time),
// and the index of the current member's field (-1 for none).
type object struct {
	n    int
	seen uint32
	hint int
	k    int
}

// object reads the '{' of an object.
func (s *scanner) object() object {
	s.open('{')
	return object{}
}

// field moves to the value of the next member of the object o and sets
// o.k to the index in names of the field its key names, or -1 for a key
// that names none (whose value the caller skips). It returns false at the
// closing '}' (which it reads) or on a failure. It fails for a field met
// before in the object, and for a key that the JSON decoder might match
// otherwise: escaped, not ASCII, or a name but for its case.
func (s *scanner) field(o *object, names []string) bool {
	if s.i < len(s.b) && s.b[s.i] == '}' {
		s.i++
		s.depth--
		return false
	}
	if o.k = s.expected(o, names); o.k >= 0 {
		return true
	}
	if !s.next(&o.n, '}') {
		return false
	}
	k := s.name(o.hint, names)
	switch {
	case k < 0:
		s.otherKey(names)
	case o.seen&(1<<k) != 0:
		s.fail()
	default:
		o.seen |= 1 << k
		o.hint = k + 1
	}
	s.colon()
	o.k = k
	return !s.failed
}

// expected reads the next member's key and the colon after it if they
// are written as usual: the next field of the writer's order, without
// whitespace. It returns the field's index, or -1 having read nothing.
func (s *scanner) expected(o *object, names []string) int {
	b, i, k := s.b, s.i, o.hint
	if k >= len(names) || o.seen&(1<<k) != 0 || s.failed {
		return -1
	}
	if o.n > 0 {
		if i >= len(b) || b[i] != ',' {
			return -1
		}
		i++
	}
	name := names[k]
	end := i + 1 + len(name)
	if end+1 >= len(b) || b[i] != '"' || b[end] != '"' || b[end+1] != ':' || string(b[i+1:end]) != name {
		return -1
	}
	o.n++
	o.seen |= 1 << k
	o.hint = k + 1
	s.i = end + 2
	s.space()
	return k
}

// name reads a key that is one of names as it is and returns its index,
// trying names from index hint on; it returns -1, having read nothing, if
// the key is none of them.
func (s *scanner) name(hint int, names []string) int {
	b, i := s.b, s.i+1
	if s.peek() != '"' {
		return -1
	}
	k := hint
	for range names {
		if k >= len(names) {
			k = 0
		}
		end := i + len(names[k])
		if end < len(b) && b[end] == '"' && string(b[i:end]) == names[k] {
			s.i = end + 1
			return k
		}
		k++
	}
	return -1
}

// otherKey reads a key that is none of names. It fails for a key that
// the JSON decoder might take for one of them.
func (s *scanner) otherKey(names []string) {
	key, esc := s.quoted()
	if esc {
		s.fail()
		return
	}
	for _, c := range key {
		if c >= utf8.RuneSelf {
			s.fail()
			return
		}
	}
	for _, name := range names {
		if len(name) == len(key) && strings.EqualFold(name, bytesString(key)) {
			s.fail()
			return
		}
	}
}

// colon reads the colon after a key, and the whitespace around it.
func (s *scanner) colon() {
	s.space()
	if s.peek() != ':' {
		s.fail()
		return
	}
	s.i++
	s.space()
}

// fail gives up on the record.
func (s *scanner) fail() {
	if !s.failed {
		s.failAt = s.i
	}
	s.failed = true
	s.i = len(s.b)
}

// peek returns the byte at i, or 0 at the end.
func (s *scanner) peek() byte {
	if s.i < len(s.b) {
		return s.b[s.i]
	}
	return 0
}

// space skips whitespace.
func (s *scanner) space() {
	for s.i < len(s.b) && s.b[s.i] <= ' ' && isSpace(s.b[s.i]) {
		s.i++
	}
}

// open reads the bracket c that opens an object or array.
func (s *scanner) open(c byte) {
	if s.peek() != c {
		s.fail()
		return
	}
	s.i++
	s.depth++
	if s.depth > s.maxDepth {
		s.fail()
	}
}

// member moves to the value of the next member of an object whose '{'
// and n members were read, whatever its key. At the closing '}' (which it
// reads) or on a failure it returns false.
func (s *scanner) member(n *int) bool {
	if !s.next(n, '}') {
		return false
	}
	s.quoted()
	s.colon()
	return !s.failed
}

// element moves to the next element of the array whose '[' and n
// elements were read. At the closing ']' (which it reads) or on a failure
// it returns false.
func (s *scanner) element(n *int) bool {
	return s.next(n, ']')
}

// next reads what separates the n-th item of an object or array from the
// next (nothing, or a comma, and whitespace) and reports whether there is
// one; it reads the closing bracket end instead if there is none.
func (s *scanner) next(n *int, end byte) bool {
	s.space()
	if s.failed {
		return false
	}
	if s.peek() == end {
		s.i++
		s.depth--
		return false
	}
	if *n > 0 {
		if s.peek() != ',' {
			s.fail()
			return false
		}
		s.i++
		s.space()
		if s.peek() == end {
			s.fail() // a trailing comma
			return false
		}
	}
	*n++
	return true
}

// null reads a null and reports whether there was one.
func (s *scanner) null() bool {
	if s.i+4 <= len(s.b) && string(s.b[s.i:s.i+4]) == "null" {
		s.i += 4
		return true
	}
	return false
}

// skip reads any value.
func (s *scanner) skip() {
	switch c := s.peek(); c {
	case '"':
		s.quoted()
	case '{':
		s.open('{')
		for n := 0; s.member(&n); {
			s.skip()
		}
	case '[':
		s.open('[')
		for n := 0; s.element(&n); {
			s.skip()
		}
	case 't':
		s.literal("true")
	case 'f':
		s.literal("false")
	case 'n':
		s.literal("null")
	default:
		s.numberText()
	}
}

// raw reads any value and returns it as written (nil on a failure).
func (s *scanner) raw() []byte {
	start := s.i
	s.skip()
	if s.failed {
		return nil
	}
	return s.b[start:s.i]
}

// literal reads the word w (true, false or null).
func (s *scanner) literal(w string) {
	if s.i+len(w) > len(s.b) || string(s.b[s.i:s.i+len(w)]) != w {
		s.fail()
		return
	}
	s.i += len(w)
}

// boolean reads a boolValue: true, false or null (nil).
func (s *scanner) boolean() *bool {
	switch s.peek() {
	case 't':
		s.literal("true")
		return &s.bools[1]
	case 'f':
		s.literal("false")
		return &s.bools[0]
	}
	s.literal("null")
	return nil
}

// str reads a string field: a string or null (""). An escaped string is
// unescaped if keep is set, and "" otherwise.
func (s *scanner) str(keep bool) string {
	if s.peek() != '"' {
		s.literal("null")
		return ""
	}
	raw, esc := s.quoted()
	switch {
	case s.failed:
		return ""
	case !esc:
		return bytesString(raw)
	case !keep:
		return ""
	}
	return s.unescape(raw)
}

// number reads a json.Number field: a number, a string holding one (not
// escaped), or null (""), as the JSON decoder takes it (RFC 8259 numbers).
func (s *scanner) number() json.Number {
	switch s.peek() {
	case 'n':
		s.literal("null")
		return ""
	case '"':
		raw, esc := s.quoted()
		if esc || numberEnd(raw, 0) != len(raw) {
			s.fail()
			return ""
		}
		return json.Number(bytesString(raw))
	}
	return json.Number(bytesString(s.numberText()))
}

// numberText reads a number and returns it as written.
func (s *scanner) numberText() []byte {
	end := numberEnd(s.b, s.i)
	if end < 0 {
		s.fail()
		return nil
	}
	start := s.i
	s.i = end
	return s.b[start:end]
}

// numberEnd returns the end of the JSON number (RFC 8259, section 6) that
// starts at b[i], or -1 if none does.
func numberEnd(b []byte, i int) int {
	if i < len(b) && b[i] == '-' {
		i++
	}
	switch {
	case i == len(b):
		return -1
	case b[i] == '0':
		i++
	case '1' <= b[i] && b[i] <= '9':
		i = digitsEnd(b, i+1)
	default:
		return -1
	}
	if i < len(b) && b[i] == '.' {
		j := digitsEnd(b, i+1)
		if j == i+1 {
			return -1
		}
		i = j
	}
	if i < len(b) && (b[i] == 'e' || b[i] == 'E') {
		i++
		if i < len(b) && (b[i] == '+' || b[i] == '-') {
			i++
		}
		j := digitsEnd(b, i)
		if j == i {
			return -1
		}
		i = j
	}
	return i
}

// digitsEnd returns the index of the first byte from b[i] on that is not
// a decimal digit.
func digitsEnd(b []byte, i int) int {
	for i < len(b) && '0' <= b[i] && b[i] <= '9' {
		i++
	}
	return i
}

// quoted reads a string and returns its content as written, and whether
// it has escapes. It fails on control characters, invalid escapes and
// invalid UTF-8, which the JSON decoder refuses or repairs.
func (s *scanner) quoted() (raw []byte, esc bool) {
	b := s.b
	if s.peek() != '"' {
		s.fail()
		return nil, false
	}
	start := s.i + 1
	if s.plain {
		if n := bytes.IndexByte(b[start:], '"'); n >= 0 {
			s.i = start + n + 1
			return b[start : start+n], false
		}
	}
	for i := start; i < len(b); {
		i = plainEnd(b, i)
		if i == len(b) {
			break
		}
		switch c := b[i]; {
		case c == '"':
			s.i = i + 1
			return b[start:i], esc
		case c == '\\':
			n := escapeLen(b[i:])
			if n == 0 {
				s.fail()
				return nil, false
			}
			esc = true
			i += n
		case c < 0x20:
			s.fail()
			return nil, false
		default:
			r, n := utf8.DecodeRune(b[i:])
			if r == utf8.RuneError && n <= 1 {
				s.fail()
				return nil, false
			}
			i += n
		}
	}
	s.fail() // not terminated
	return nil, false
}

// isPlain reports whether b holds only printable ASCII (and DEL) but
// backslashes: then its strings end at the next quote and need no checks.
func isPlain(b []byte) bool {
	if bytes.IndexByte(b, '\\') >= 0 {
		return false
	}
	const ones, highs = 0x0101010101010101, 0x8080808080808080
	// A byte below 0x20 borrows, and sets the high bit; a byte of 0x80
	// or more has it (see plainEnd).
	var acc uint64
	i := 0
	for ; i+32 <= len(b); i += 32 {
		w0, w1 := binary.LittleEndian.Uint64(b[i:]), binary.LittleEndian.Uint64(b[i+8:])
		w2, w3 := binary.LittleEndian.Uint64(b[i+16:]), binary.LittleEndian.Uint64(b[i+24:])
		acc |= (w0 - ones*0x20) | w0 | (w1 - ones*0x20) | w1 | (w2 - ones*0x20) | w2 | (w3 - ones*0x20) | w3
	}
	for ; i < len(b); i++ {
		acc |= uint64(b[i]-0x20) | uint64(b[i])
	}
	return acc&highs == 0
}

// plainEnd returns the index of the first byte from b[i] on that may not
// stand in a string as it is: a quote, a backslash, a control character
// or a byte of a multi-byte character; len(b) if there is none. It looks
// at eight bytes at a time while it can (bit tricks from "Bit Twiddling
// Hacks", Sean Eron Anderson: haszero and hasless).
func plainEnd(b []byte, i int) int {
	const ones, highs = 0x0101010101010101, 0x8080808080808080
	for ; i+8 <= len(b); i += 8 {
		w := binary.LittleEndian.Uint64(b[i:])
		q := w ^ (ones * '"')
		bs := w ^ (ones * '\\')
		special := ((q-ones)&^q | (bs-ones)&^bs | (w - ones*0x20) | w) & highs
		if special != 0 {
			// Borrows only run towards later bytes: the first flagged
			// byte is a special one.
			return i + bits.TrailingZeros64(special)/8
		}
	}
	for ; i < len(b); i++ {
		if c := b[i]; c == '"' || c == '\\' || c < 0x20 || c >= utf8.RuneSelf {
			return i
		}
	}
	return i
}

// escapeLen returns the length of the escape sequence that b starts with,
// or 0 if it is invalid.
func escapeLen(b []byte) int {
	if len(b) < 2 {
		return 0
	}
	switch b[1] {
	case '"', '\\', '/', 'b', 'f', 'n', 'r', 't':
		return 2
	case 'u':
		if _, ok := hex4(b[2:]); ok {
			return 6
		}
	}
	return 0
}

// hex4 decodes the four hex digits that b starts with.
func hex4(b []byte) (rune, bool) {
	if len(b) < 4 {
		return 0, false
	}
	var r rune
	for _, c := range b[:4] {
		switch {
		case '0' <= c && c <= '9':
			c -= '0'
		case 'a' <= c && c <= 'f':
			c -= 'a' - 10
		case 'A' <= c && c <= 'F':
			c -= 'A' - 10
		default:
			return 0, false
		}
		r = r<<4 | rune(c)
	}
	return r, true
}

// unescape returns the content of a string with (valid) escapes,
// unescaped into the arena. A surrogate that is not half of a pair
// becomes U+FFFD, as in the JSON decoder and encoding/json.
func (s *scanner) unescape(raw []byte) string {
	t := *s.text
	if cap(t)-len(t) < len(raw) {
		// Unescaped text is never longer: the arena is not moved while
		// it is written. Full chunks stay alive while strings use them.
		t = make([]byte, 0, max(textChunk, len(raw)))
	}
	start := len(t)
	for i := 0; i < len(raw); {
		c := raw[i]
		if c != '\\' {
			t = append(t, c)
			i++
			continue
		}
		if raw[i+1] != 'u' {
			t = append(t, unescapeByte(raw[i+1]))
			i += 2
			continue
		}
		r, _ := hex4(raw[i+2:])
		i += 6
		if utf16.IsSurrogate(r) && i+6 <= len(raw) && raw[i] == '\\' && raw[i+1] == 'u' {
			if lo, _ := hex4(raw[i+2:]); utf16.DecodeRune(r, lo) != utf8.RuneError {
				r = utf16.DecodeRune(r, lo)
				i += 6
			}
		}
		t = utf8.AppendRune(t, r)
	}
	*s.text = t
	return bytesString(t[start:])
}

// unescapeByte returns the byte that the escape \c stands for.
func unescapeByte(c byte) byte {
	switch c {
	case 'b':
		return '\b'
	case 'f':
		return '\f'
	case 'n':
		return '\n'
	case 'r':
		return '\r'
	case 't':
		return '\t'
	}
	return c // '"', '\\', '/'
}

// bytesString returns b as a string without copying it. The caller keeps
// b alive and unchanged as long as the string is used: the record's bytes
// until its batch is merged (as the JSON decoder's strings with
// DecodeNoCopyString), or the arena's, which are written once.
func bytesString(b []byte) string {
	if len(b) == 0 {
		return ""
	}
	return unsafe.String(unsafe.SliceData(b), len(b))
}
