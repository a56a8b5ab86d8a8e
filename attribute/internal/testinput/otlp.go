package testinput

import (
	"fmt"
	"slices"
	"strings"
)

// Span is a span of a hand-written OTLP/JSON test trace.
type Span struct {
	ID, Parent string // span IDs (16 hex digits are padded from these)
	Name       string
	Kind       int // OTLP SpanKind
	Start, End int64
	Attrs      map[string]string
}

// OTLP span kinds.
const (
	KindInternal = 1
	KindServer   = 2
	KindClient   = 3
)

// Line renders the spans of one trace (traceID) of service svc, times in
// nanoseconds after a fixed epoch, as one OTLP/JSON ExportTraceServiceRequest
// line, as the OTLP/JSON encoding specifies it (hex IDs, nanosecond times as
// decimal strings).
func Line(svc, traceID string, spans []Span) string {
	var b strings.Builder
	fmt.Fprintf(&b, `{"resourceSpans":[{"resource":{"attributes":[{"key":"service.name","value":{"stringValue":%q}}]},"scopeSpans":[{"scope":{"name":"greenhouse"},"spans":[`, svc)
	for i, s := range spans {
		if i > 0 {
			b.WriteByte(',')
		}
		fmt.Fprintf(&b, `{"traceId":%q,"spanId":%q,"name":%q,"kind":%d,"startTimeUnixNano":"%d","endTimeUnixNano":"%d"`,
			fmt.Sprintf("%032s", traceID), fmt.Sprintf("%016s", s.ID), s.Name, s.Kind,
			1_700_000_000_000_000_000+s.Start, 1_700_000_000_000_000_000+s.End)
		if s.Parent != "" {
			fmt.Fprintf(&b, `,"parentSpanId":%q`, fmt.Sprintf("%016s", s.Parent))
		}
		b.WriteString(`,"attributes":[`)
		keys := make([]string, 0, len(s.Attrs))
		for k := range s.Attrs {
			keys = append(keys, k)
		}
		slices.Sort(keys)
		for j, k := range keys {
			if j > 0 {
				b.WriteByte(',')
			}
			fmt.Fprintf(&b, `{"key":%q,"value":{"stringValue":%q}}`, k, s.Attrs[k])
		}
		b.WriteString(`]}`)
	}
	b.WriteString("]}]}]}\n")
	return b.String()
}

// DBSpan is a PostgreSQL client span running query.
func DBSpan(id, parent string, start, end int64, query string) Span {
	return Span{ID: id, Parent: parent, Name: "SELECT", Kind: KindClient, Start: start, End: end,
		Attrs: map[string]string{"db.system.name": "postgresql", "db.query.text": query}}
}
