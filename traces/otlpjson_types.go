package traces

import (
	"bytes"
	"encoding/base64"
	"encoding/hex"
	"errors"
	"math"
	"strconv"

	json "github.com/goccy/go-json"
)

// The types below mirror the parts of OTLP's trace.proto that culprit
// reads, in their JSON form; the decoder skips every other field. IDs are
// kept as strings and 64-bit integers as json.Number (which accepts both
// a number and a string holding one) and converted after decoding: with
// DecodeNoCopyString neither allocates.

// jsonRequest is a TracesData or ExportTraceServiceRequest.
type jsonRequest struct {
	ResourceSpans []jsonResourceSpans `json:"resourceSpans"`
}

// jsonResourceSpans is the spans of one resource (one service instance).
type jsonResourceSpans struct {
	Resource   jsonResource     `json:"resource"`
	ScopeSpans []jsonScopeSpans `json:"scopeSpans"`
	// InstrumentationLibrarySpans is the level's name before OTLP 0.15.
	InstrumentationLibrarySpans []jsonScopeSpans `json:"instrumentationLibrarySpans"`
}

// jsonResource is a resource: only its attributes are read.
type jsonResource struct {
	Attributes []jsonKeyValue `json:"attributes"`
}

// jsonScopeSpans is the spans of one instrumentation scope.
type jsonScopeSpans struct {
	Scope jsonScope `json:"scope"`
	// InstrumentationLibrary is the scope's name before OTLP 0.15.
	InstrumentationLibrary jsonScope  `json:"instrumentationLibrary"`
	Spans                  []jsonSpan `json:"spans"`
}

// jsonScope is an instrumentation scope: only its name is read.
type jsonScope struct {
	Name string `json:"name"`
}

// jsonSpan is a span: events, links, status and flags are not read.
type jsonSpan struct {
	TraceID      string         `json:"traceId"`
	SpanID       string         `json:"spanId"`
	ParentSpanID string         `json:"parentSpanId"`
	Name         string         `json:"name"`
	Kind         jsonKind       `json:"kind"`
	Start        json.Number    `json:"startTimeUnixNano"`
	End          json.Number    `json:"endTimeUnixNano"`
	Attributes   []jsonKeyValue `json:"attributes"`
	// wire says the span was read from the protobuf encoding
	// (otlpproto.go): the IDs hold raw bytes and the times are start and
	// end rather than Start and End.
	wire       bool
	start, end uint64
	// at is the byte offset + 1 of the span in its record, 0 if unknown:
	// the scanner sets it, the JSON decoder leaves it.
	at int
}

// jsonKeyValue is one attribute.
type jsonKeyValue struct {
	Key   string       `json:"key"`
	Value jsonAnyValue `json:"value"`
}

// jsonAnyValue is OTLP's AnyValue: at most one field is set; none set is
// the empty value.
type jsonAnyValue struct {
	StringValue string      `json:"stringValue"`
	IntValue    json.Number `json:"intValue"`
	BoolValue   *bool       `json:"boolValue"`
	DoubleValue jsonDouble  `json:"doubleValue"`
	ArrayValue  *jsonArray  `json:"arrayValue"`
	KvlistValue *jsonKvlist `json:"kvlistValue"`
	BytesValue  jsonBytes   `json:"bytesValue"`
}

// reset empties r for the next record, keeping the capacity of its
// slices. The decoder merges into what a value holds (as encoding/json
// does), so every element that held data is cleared.
func (r *jsonRequest) reset() {
	for i := range r.ResourceSpans {
		rs := &r.ResourceSpans[i]
		*rs = jsonResourceSpans{
			Resource:                    jsonResource{Attributes: resetKeyValues(rs.Resource.Attributes)},
			ScopeSpans:                  resetScopes(rs.ScopeSpans),
			InstrumentationLibrarySpans: resetScopes(rs.InstrumentationLibrarySpans),
		}
	}
	r.ResourceSpans = r.ResourceSpans[:0]
}

func resetScopes(ss []jsonScopeSpans) []jsonScopeSpans {
	for i := range ss {
		spans := ss[i].Spans
		for j := range spans {
			spans[j] = jsonSpan{Attributes: resetKeyValues(spans[j].Attributes)}
		}
		ss[i] = jsonScopeSpans{Spans: spans[:0]}
	}
	return ss[:0]
}

func resetKeyValues(kvs []jsonKeyValue) []jsonKeyValue {
	clear(kvs)
	return kvs[:0]
}

// jsonArray is an AnyValue's arrayValue.
type jsonArray struct {
	Values []jsonAnyValue `json:"values"`
}

// jsonKvlist is an AnyValue's kvlistValue.
type jsonKvlist struct {
	Values []jsonKeyValue `json:"values"`
}

// valueError reports a JSON value of the right JSON type whose content is
// invalid; raw (the value as written) lets the caller find its position.
type valueError struct {
	what string
	raw  []byte
}

// Error says what is invalid and quotes the value.
func (e *valueError) Error() string {
	return e.what + " " + truncate(string(e.raw), 40)
}

func truncate(s string, n int) string {
	if len(s) <= n {
		return s
	}
	return s[:n] + "…"
}

// jsonString returns the content of the JSON string raw, unescaped.
func jsonString(raw []byte, what string) ([]byte, error) {
	if len(raw) < 2 || raw[0] != '"' || raw[len(raw)-1] != '"' {
		return nil, &valueError{what: what + " must be a JSON string, not", raw: bytes.Clone(raw)}
	}
	s := raw[1 : len(raw)-1]
	if bytes.IndexByte(s, '\\') < 0 {
		return s, nil
	}
	var u string
	if err := json.Unmarshal(raw, &u); err != nil {
		return nil, &valueError{what: "invalid " + what, raw: bytes.Clone(raw)}
	}
	return []byte(u), nil
}

// parseID decodes a trace or span ID into b and returns its length in
// bytes: 0 for an empty string, -1 when it is neither hex (as OTLP/JSON
// requires) nor base64 (as generic protobuf JSON writes bytes) of 8 or 16
// bytes. A string of 32 or 16 hex digits is hex: as base64 it would give
// 24 or 12 bytes.
func parseID(b *[16]byte, s string) int {
	if s == "" {
		return 0
	}
	if len(s) == 32 || len(s) == 16 {
		if _, err := hex.Decode(b[:], []byte(s)); err == nil {
			return len(s) / 2
		}
	}
	if n, ok := decodeBase64(b[:], []byte(s)); ok && (n == 16 || n == 8) {
		return n
	}
	return -1
}

// decodeBase64 decodes standard or URL-safe base64, padded or not, into
// dst (at most len(dst) bytes) and returns the decoded length.
func decodeBase64(dst, s []byte) (int, bool) {
	s = bytes.TrimRight(s, "=")
	enc := base64.RawStdEncoding
	if bytes.ContainsAny(s, "-_") {
		enc = base64.RawURLEncoding
	}
	if enc.DecodedLen(len(s)) > len(dst) {
		return 0, false
	}
	n, err := enc.Strict().Decode(dst, s)
	return n, err == nil
}

// parseInt parses a JSON number (or the content of a JSON string) as an
// int64; proto3 JSON also allows an integral number in exponent form.
func parseInt(s string) (int64, bool) {
	if len(s) <= 19 {
		// Fast path for plain digits (timestamps, ports): 19 of them
		// cannot overflow a uint64, and one more check keeps it an int64.
		var v uint64
		i := 0
		for ; i < len(s) && '0' <= s[i] && s[i] <= '9'; i++ {
			v = v*10 + uint64(s[i]-'0')
		}
		if i == len(s) && i > 0 && v <= math.MaxInt64 {
			return int64(v), true
		}
	}
	if v, err := strconv.ParseInt(s, 10, 64); err == nil {
		return v, true
	}
	if !isNumberText(s) {
		return 0, false
	}
	f, err := strconv.ParseFloat(s, 64)
	if err != nil || f != math.Trunc(f) || f < math.MinInt64 || f >= math.MaxInt64 {
		return 0, false
	}
	return int64(f), true
}

// isNumberText reports whether s uses only the characters of a JSON number.
func isNumberText(s string) bool {
	if s == "" {
		return false
	}
	for i := 0; i < len(s); i++ {
		c := s[i]
		if !('0' <= c && c <= '9' || c == '-' || c == '+' || c == '.' || c == 'e' || c == 'E') {
			return false
		}
	}
	return true
}

// jsonDouble is a double written as a JSON number or, as proto3 JSON
// allows, a string: "NaN", "Infinity", "-Infinity" or a number.
type jsonDouble struct {
	v   float64
	set bool
}

// UnmarshalJSON decodes a JSON number or string holding a double.
func (x *jsonDouble) UnmarshalJSON(raw []byte) error {
	*x = jsonDouble{}
	if string(raw) == "null" {
		return nil
	}
	s := raw
	if len(raw) > 0 && raw[0] == '"' {
		var err error
		if s, err = jsonString(raw, "a double"); err != nil {
			return err
		}
		switch string(s) {
		case "NaN":
			x.v, x.set = math.NaN(), true
			return nil
		case "Infinity":
			x.v, x.set = math.Inf(1), true
			return nil
		case "-Infinity":
			x.v, x.set = math.Inf(-1), true
			return nil
		}
	}
	if !isNumberText(string(s)) {
		return &valueError{what: "invalid double", raw: bytes.Clone(raw)}
	}
	v, err := strconv.ParseFloat(string(s), 64)
	if err != nil && !errors.Is(err, strconv.ErrRange) {
		return &valueError{what: "invalid double", raw: bytes.Clone(raw)}
	}
	x.v, x.set = v, true
	return nil
}

// jsonBytes is a bytes value: base64, standard or URL-safe, padded or not.
// Only its length is kept.
type jsonBytes struct {
	n   int
	set bool
}

// UnmarshalJSON decodes a JSON string holding base64.
func (x *jsonBytes) UnmarshalJSON(raw []byte) error {
	*x = jsonBytes{}
	if string(raw) == "null" {
		return nil
	}
	s, err := jsonString(raw, "bytes")
	if err != nil {
		return err
	}
	buf := make([]byte, base64.RawStdEncoding.DecodedLen(len(s)))
	n, ok := decodeBase64(buf, s)
	if !ok {
		return &valueError{what: "invalid base64", raw: bytes.Clone(raw)}
	}
	x.n, x.set = n, true
	return nil
}

// jsonKind is a span kind: an integer as OTLP/JSON requires, or leniently
// an enum name such as "SPAN_KIND_SERVER". Unknown values are unspecified.
type jsonKind SpanKind

// UnmarshalJSON decodes a JSON number or string holding a span kind.
func (k *jsonKind) UnmarshalJSON(raw []byte) error {
	if len(raw) == 1 && '0' <= raw[0] && raw[0] <= '0'+byte(SpanKindConsumer) {
		*k = jsonKind(raw[0] - '0') // the usual case, without parsing
		return nil
	}
	*k = 0
	if string(raw) == "null" {
		return nil
	}
	if len(raw) > 0 && raw[0] == '"' {
		s, err := jsonString(raw, "a span kind")
		if err != nil {
			return err
		}
		switch string(s) {
		case "SPAN_KIND_INTERNAL":
			*k = jsonKind(SpanKindInternal)
		case "SPAN_KIND_SERVER":
			*k = jsonKind(SpanKindServer)
		case "SPAN_KIND_CLIENT":
			*k = jsonKind(SpanKindClient)
		case "SPAN_KIND_PRODUCER":
			*k = jsonKind(SpanKindProducer)
		case "SPAN_KIND_CONSUMER":
			*k = jsonKind(SpanKindConsumer)
		default:
			if v, ok := parseInt(string(s)); ok && v >= 0 && v <= int64(SpanKindConsumer) {
				*k = jsonKind(v)
			}
		}
		return nil
	}
	v, ok := parseInt(string(raw))
	if !ok {
		return &valueError{what: "invalid span kind", raw: bytes.Clone(raw)}
	}
	if v >= 0 && v <= int64(SpanKindConsumer) {
		*k = jsonKind(v)
	}
	return nil
}
