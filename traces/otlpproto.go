package traces

import (
	"fmt"
	"math"
	"strconv"
	"unicode/utf8"

	json "github.com/goccy/go-json"
	"google.golang.org/protobuf/encoding/protowire"
)

// This file reads the binary protobuf encoding of OTLP trace export
// requests (ExportTraceServiceRequest, or TracesData: both are field 1,
// repeated ResourceSpans) straight into the jsonRequest values that the
// OTLP/JSON readers fill, so that both encodings go through one
// conversion of spans (decoder.requests) and give the same Source.
//
// It accepts exactly what proto.Unmarshal into the official generated
// types (go.opentelemetry.io/proto/otlp) accepts, with the same meaning
// (FuzzOTLPProto holds it to that):
//   - a field of a known number but another wire type than its
//     declaration's is an unknown field, skipped, as are unknown fields;
//   - a message field that appears twice is merged (its repeated fields
//     appended, its scalars replaced by the later value); of AnyValue's
//     oneof, the member set last wins;
//   - every string field must be valid UTF-8 (proto3), also in the parts
//     culprit does not read (events, links, status, entity references);
//   - field numbers are 1 to 2^29-1; messages nest at most
//     protowire.DefaultRecursionLimit deep.
//
// Strings refer to the record's bytes (as the JSON readers' do, see
// bytesString); integer attribute values are formatted into the
// decoder's arena. IDs are kept as their raw bytes (jsonSpan.wire).

// protoDepth is how deep messages may nest, as in proto.Unmarshal.
const protoDepth = protowire.DefaultRecursionLimit

// wireReader reads one binary record. On the first problem it records
// where (at, from the record's start) and why, and every method returns
// false from then on.
type wireReader struct {
	rec   []byte // the whole record, for offsets
	depth int
	at    int
	why   string
	text  *[]byte  // the decoder's arena
	bools *[2]bool // the decoder's false and true, for boolValue
}

// protoField is one decoded field.
type protoField struct {
	num protowire.Number
	typ protowire.Type
	x   uint64 // varint, fixed32 and fixed64 values
	v   []byte // length-delimited values
}

// protoRecord decodes one binary export request, whose first byte is at
// offset in the input, and converts its spans. record is the request's
// number in the input (from 1): warnings about its spans give it as
// their line.
func (d *decoder) protoRecord(rec []byte, offset, record int64) {
	d.wire = extend(d.wire[:0])
	req := &d.wire[0]
	req.reset()
	d.bools = [2]bool{false, true}
	d.doc = docLines{} // no line positions in binary records
	r := &d.wreader
	*r = wireReader{rec: rec, depth: protoDepth, text: &d.text, bools: &d.bools}
	var err error
	if !r.request(req, rec) {
		err = &ParseError{File: d.name, Offset: offset + int64(r.at),
			Err: fmt.Errorf("%w: not an OTLP protobuf trace request: %s", ErrFormat, r.why)}
	} else if verr := d.requests(d.wire, record); verr != nil {
		err = &ParseError{File: d.name, Offset: offset, Err: fmt.Errorf("not OTLP: %w", verr)}
	}
	r.rec = nil
	if err == nil {
		return
	}
	*req = jsonRequest{} // drop references to rec
	if !d.c.opts.KeepGoing {
		d.b.err = err
		return
	}
	pe := err.(*ParseError)
	d.b.warnings = append(d.b.warnings, Warning{Kind: WarnMalformedRecord, File: d.name,
		Message: fmt.Sprintf("byte %d: %v (skipped)", pe.Offset, pe.Err)})
}

// WarnMalformedRecord is a binary record (an OTLP protobuf request) that
// did not decode and was skipped because Options.KeepGoing is set.
const WarnMalformedRecord = "malformed-record"

// fail records a problem at b[i] (b is a part of r.rec) and returns false.
func (r *wireReader) fail(b []byte, i int, why string) bool {
	if r.why == "" {
		r.at = len(r.rec) - len(b) + i
		r.why = why
	}
	return false
}

// next reads the field at b[*i] into f and advances *i past it.
func (r *wireReader) next(b []byte, i *int, f *protoField) bool {
	at := *i
	var num protowire.Number
	var typ protowire.Type
	n := 1
	if c := b[at]; c < 0x80 && c >= 8 {
		num, typ = protowire.Number(c>>3), protowire.Type(c&7) // the usual one-byte tag
	} else if num, typ, n = protowire.ConsumeTag(b[at:]); n < 0 {
		return r.fail(b, at, "bad field tag: "+wireProblem(n))
	}
	if num > protowire.MaxValidNumber {
		return r.fail(b, at, "invalid field number")
	}
	f.num, f.typ = num, typ
	j := at + n
	var m int
	switch typ {
	case protowire.VarintType:
		f.x, m = protowire.ConsumeVarint(b[j:])
	case protowire.Fixed32Type:
		var x uint32
		x, m = protowire.ConsumeFixed32(b[j:])
		f.x = uint64(x)
	case protowire.Fixed64Type:
		f.x, m = protowire.ConsumeFixed64(b[j:])
	case protowire.BytesType:
		if j < len(b) && b[j] < 0x80 && j+1+int(b[j]) <= len(b) {
			f.v, m = b[j+1:j+1+int(b[j])], 1+int(b[j]) // a short value
		} else {
			f.v, m = protowire.ConsumeBytes(b[j:])
		}
	default:
		m = protowire.ConsumeFieldValue(num, typ, b[j:])
	}
	if m < 0 {
		return r.fail(b, at, fmt.Sprintf("field %d: %s", num, wireProblem(m)))
	}
	*i = j + m
	return true
}

// enter and leave bound the nesting of messages.
func (r *wireReader) enter(b []byte) bool {
	if r.depth--; r.depth < 0 {
		return r.fail(b, 0, "messages nested too deeply")
	}
	return true
}

func (r *wireReader) leave() { r.depth++ }

// str returns a string field's value, checking that it is UTF-8.
func (r *wireReader) str(f *protoField, what string) (string, bool) {
	if !utf8.Valid(f.v) {
		return "", r.fail(f.v, 0, what+": invalid UTF-8")
	}
	return bytesString(f.v), true
}

// message reads the fields of the message b, calling field for each; a
// field of an unknown number, or of a known one with another wire type,
// is skipped by field returning true.
func (r *wireReader) message(b []byte, field func(f protoField) bool) bool {
	if !r.enter(b) {
		return false
	}
	for i := 0; i < len(b); {
		var f protoField
		if !r.next(b, &i, &f) || !field(f) {
			return false
		}
	}
	r.leave()
	return true
}

// request reads an ExportTraceServiceRequest or TracesData.
func (r *wireReader) request(req *jsonRequest, b []byte) bool {
	return r.message(b, func(f protoField) bool {
		if f.num == 1 && f.typ == protowire.BytesType {
			req.ResourceSpans = extend(req.ResourceSpans)
			rs := &req.ResourceSpans[len(req.ResourceSpans)-1]
			*rs = jsonResourceSpans{Resource: jsonResource{Attributes: rs.Resource.Attributes[:0]}, ScopeSpans: rs.ScopeSpans[:0]}
			return r.resourceSpans(rs, f.v)
		}
		return true
	})
}

// resourceSpans reads a ResourceSpans: resource = 1, scope_spans = 2,
// schema_url = 3.
func (r *wireReader) resourceSpans(rs *jsonResourceSpans, b []byte) bool {
	return r.message(b, func(f protoField) bool {
		if f.typ != protowire.BytesType {
			return true
		}
		switch f.num {
		case 1:
			return r.resource(&rs.Resource, f.v)
		case 2:
			rs.ScopeSpans = extend(rs.ScopeSpans)
			sc := &rs.ScopeSpans[len(rs.ScopeSpans)-1]
			*sc = jsonScopeSpans{Spans: sc.Spans[:0]}
			return r.scopeSpans(sc, f.v)
		case 3:
			_, ok := r.str(&f, "schema_url")
			return ok
		}
		return true
	})
}

// resource reads a Resource: attributes = 1 (service.name kept),
// entity_refs = 3.
func (r *wireReader) resource(res *jsonResource, b []byte) bool {
	return r.message(b, func(f protoField) bool {
		if f.typ != protowire.BytesType {
			return true
		}
		switch f.num {
		case 1:
			return r.keyValue(&res.Attributes, isServiceName, f.v)
		case 3:
			return r.strings(f.v, "entity reference")
		}
		return true
	})
}

// strings checks a message whose length-delimited fields 1 to 4 are all
// strings (EntityRef: schema_url, type, id_keys, description_keys).
func (r *wireReader) strings(b []byte, what string) bool {
	return r.message(b, func(f protoField) bool {
		if f.typ == protowire.BytesType && f.num >= 1 && f.num <= 4 {
			_, ok := r.str(&f, what)
			return ok
		}
		return true
	})
}

// scopeSpans reads a ScopeSpans: scope = 1, spans = 2, schema_url = 3.
func (r *wireReader) scopeSpans(sc *jsonScopeSpans, b []byte) bool {
	return r.message(b, func(f protoField) bool {
		if f.typ != protowire.BytesType {
			return true
		}
		switch f.num {
		case 1:
			return r.scope(&sc.Scope, f.v)
		case 2:
			sc.Spans = extend(sc.Spans)
			sp := &sc.Spans[len(sc.Spans)-1]
			*sp = jsonSpan{Attributes: sp.Attributes[:0], wire: true}
			return r.span(sp, f.v)
		case 3:
			_, ok := r.str(&f, "schema_url")
			return ok
		}
		return true
	})
}

// scope reads an InstrumentationScope: name = 1 (kept), version = 2,
// attributes = 3. Given twice, the later name replaces the earlier.
func (r *wireReader) scope(sc *jsonScope, b []byte) bool {
	return r.message(b, func(f protoField) bool {
		if f.typ != protowire.BytesType {
			return true
		}
		switch f.num {
		case 1:
			name, ok := r.str(&f, "scope name")
			sc.Name = name
			return ok
		case 2:
			_, ok := r.str(&f, "scope version")
			return ok
		case 3:
			return r.keyValue(nil, nil, f.v)
		}
		return true
	})
}

// span reads a Span (field numbers in the switch).
func (r *wireReader) span(sp *jsonSpan, b []byte) bool {
	if !r.enter(b) {
		return false
	}
	for i := 0; i < len(b); {
		var f protoField
		if !r.next(b, &i, &f) || !r.spanField(sp, f) {
			return false
		}
	}
	r.leave()
	return true
}

// spanField reads one field of a Span (a direct call: spans are many).
func (r *wireReader) spanField(sp *jsonSpan, f protoField) bool {
	var ok bool
	switch f.typ {
	case protowire.BytesType:
		switch f.num {
		case 1:
			sp.TraceID = bytesString(f.v)
		case 2:
			sp.SpanID = bytesString(f.v)
		case 4:
			sp.ParentSpanID = bytesString(f.v)
		case 3:
			_, ok = r.str(&f, "trace_state")
			return ok
		case 5:
			sp.Name, ok = r.str(&f, "span name")
			return ok
		case 9:
			return r.keyValue(&sp.Attributes, isSpanAttribute, f.v)
		case 11:
			return r.event(f.v)
		case 13:
			return r.link(f.v)
		case 15:
			return r.status(f.v)
		}
	case protowire.VarintType:
		if f.num == 6 {
			// An enum is an int32; values outside the known kinds are
			// unspecified, as for OTLP/JSON.
			if k := int32(f.x); k >= 0 && k <= int32(SpanKindConsumer) {
				sp.Kind = jsonKind(k)
			} else {
				sp.Kind = 0
			}
		}
	case protowire.Fixed64Type:
		switch f.num {
		case 7:
			sp.start = f.x
		case 8:
			sp.end = f.x
		}
	}
	return true
}

// event checks a Span.Event: name = 2, attributes = 3.
func (r *wireReader) event(b []byte) bool {
	return r.message(b, func(f protoField) bool {
		if f.typ != protowire.BytesType {
			return true
		}
		switch f.num {
		case 2:
			_, ok := r.str(&f, "event name")
			return ok
		case 3:
			return r.keyValue(nil, nil, f.v)
		}
		return true
	})
}

// link checks a Span.Link: trace_state = 3, attributes = 4.
func (r *wireReader) link(b []byte) bool {
	return r.message(b, func(f protoField) bool {
		if f.typ != protowire.BytesType {
			return true
		}
		switch f.num {
		case 3:
			_, ok := r.str(&f, "link trace_state")
			return ok
		case 4:
			return r.keyValue(nil, nil, f.v)
		}
		return true
	})
}

// status checks a Status: message = 2.
func (r *wireReader) status(b []byte) bool {
	return r.message(b, func(f protoField) bool {
		if f.typ == protowire.BytesType && f.num == 2 {
			_, ok := r.str(&f, "status message")
			return ok
		}
		return true
	})
}

// keyValue reads a KeyValue (key = 1, value = 2) and appends it to list
// when keep accepts its key; with a nil list it only checks it.
func (r *wireReader) keyValue(list *[]jsonKeyValue, keep func(string) bool, b []byte) bool {
	if !r.enter(b) {
		return false
	}
	var kv jsonKeyValue
	for i := 0; i < len(b); {
		var f protoField
		if !r.next(b, &i, &f) {
			return false
		}
		if f.typ != protowire.BytesType {
			continue
		}
		var ok bool
		switch f.num {
		case 1:
			kv.Key, ok = r.str(&f, "attribute key")
		case 2:
			ok = r.anyValue(&kv.Value, f.v)
		default:
			ok = true
		}
		if !ok {
			return false
		}
	}
	r.leave()
	if list != nil && keep(kv.Key) {
		*list = append(*list, kv)
	}
	return true
}

// wireArray and wireKvlist stand for an array or key-value list value,
// whose contents nothing reads (they are checked, not kept).
var (
	wireArray  jsonArray
	wireKvlist jsonKvlist
)

// anyValue reads an AnyValue into v, which may already hold one (a
// message field given twice is merged: the oneof member set last wins).
func (r *wireReader) anyValue(v *jsonAnyValue, b []byte) bool {
	if !r.enter(b) {
		return false
	}
	for i := 0; i < len(b); {
		var f protoField
		if !r.next(b, &i, &f) || !r.anyValueField(v, f) {
			return false
		}
	}
	r.leave()
	return true
}

// anyValueField reads one field of an AnyValue.
func (r *wireReader) anyValueField(v *jsonAnyValue, f protoField) bool {
	switch {
	case f.num == 1 && f.typ == protowire.BytesType:
		s, ok := r.str(&f, "string value")
		*v = jsonAnyValue{StringValue: s}
		return ok
	case f.num == 2 && f.typ == protowire.VarintType:
		*v = jsonAnyValue{BoolValue: &r.bools[min(f.x, 1)]}
	case f.num == 3 && f.typ == protowire.VarintType:
		*v = jsonAnyValue{IntValue: r.integer(int64(f.x))}
	case f.num == 4 && f.typ == protowire.Fixed64Type:
		*v = jsonAnyValue{DoubleValue: jsonDouble{v: math.Float64frombits(f.x), set: true}}
	case f.num == 5 && f.typ == protowire.BytesType:
		if v.ArrayValue == nil {
			*v = jsonAnyValue{ArrayValue: &wireArray}
		}
		return r.message(f.v, func(g protoField) bool {
			if g.num == 1 && g.typ == protowire.BytesType {
				var x jsonAnyValue
				return r.anyValue(&x, g.v)
			}
			return true
		})
	case f.num == 6 && f.typ == protowire.BytesType:
		if v.KvlistValue == nil {
			*v = jsonAnyValue{KvlistValue: &wireKvlist}
		}
		return r.message(f.v, func(g protoField) bool {
			if g.num == 1 && g.typ == protowire.BytesType {
				return r.keyValue(nil, nil, g.v)
			}
			return true
		})
	case f.num == 7 && f.typ == protowire.BytesType:
		*v = jsonAnyValue{BytesValue: jsonBytes{n: len(f.v), set: true}}
	case f.num == 8 && f.typ == protowire.VarintType:
		*v = jsonAnyValue{} // string_value_strindex: profiles only
	}
	return true
}

// integer formats n into the arena.
func (r *wireReader) integer(n int64) json.Number {
	t := *r.text
	if cap(t)-len(t) < 20 {
		t = make([]byte, 0, textChunk)
	}
	start := len(t)
	t = strconv.AppendInt(t, n, 10)
	*r.text = t
	return json.Number(bytesString(t[start:]))
}
