package main

import (
	"bufio"
	"cmp"
	"fmt"
	"io"
	"math/rand/v2"
	"slices"
	"strconv"

	json "github.com/goccy/go-json"
)

// OTLP/JSON document types, written per the OTLP JSON encoding: lowerCamelCase
// keys, hex trace and span IDs, 64-bit integers as decimal strings, enums as
// integers, attribute lists as arrays of key/value objects.

type otlpTracesData struct {
	ResourceSpans []otlpResourceSpans `json:"resourceSpans"`
}

type otlpResourceSpans struct {
	Resource   otlpResource     `json:"resource"`
	ScopeSpans []otlpScopeSpans `json:"scopeSpans"`
}

type otlpResource struct {
	Attributes []keyValue `json:"attributes"`
}

type otlpScopeSpans struct {
	Scope otlpScope  `json:"scope"`
	Spans []otlpSpan `json:"spans"`
}

type otlpScope struct {
	Name    string `json:"name"`
	Version string `json:"version,omitempty"`
}

type otlpSpan struct {
	TraceID      string      `json:"traceId"`
	SpanID       string      `json:"spanId"`
	ParentSpanID string      `json:"parentSpanId,omitempty"`
	Flags        uint32      `json:"flags,omitempty"`
	Name         string      `json:"name"`
	Kind         int         `json:"kind"`
	Start        string      `json:"startTimeUnixNano"`
	End          string      `json:"endTimeUnixNano"`
	Attributes   []keyValue  `json:"attributes,omitempty"`
	Status       *otlpStatus `json:"status,omitempty"`
}

type otlpStatus struct {
	Message string `json:"message,omitempty"`
	Code    int    `json:"code"`
}

type keyValue struct {
	Key   string   `json:"key"`
	Value anyValue `json:"value"`
}

// anyValue holds exactly one of its fields.
type anyValue struct {
	StringValue *string `json:"stringValue,omitempty"`
	IntValue    *string `json:"intValue,omitempty"`
}

func strAttr(k, v string) keyValue { return keyValue{Key: k, Value: anyValue{StringValue: &v}} }

func intAttr(k string, v int64) keyValue {
	s := strconv.FormatInt(v, 10)
	return keyValue{Key: k, Value: anyValue{IntValue: &s}}
}

// spanFlags is written on every span: the W3C "sampled" bit plus the bit
// saying whether the parent is remote is known (0x100), parent local.
// Recalled from memory of what the OpenTelemetry Go SDK writes; readers
// must not depend on it.
const spanFlags = 0x101

// pendingSpan is one finished span waiting to be written.
type pendingSpan struct {
	resource int
	scope    int
	end      int64 // span end, ns since the Unix epoch
	span     otlpSpan
}

// pendingTrace is a trace whose spans are being written over several lines.
type pendingTrace struct {
	chunks [][]pendingSpan
}

// traceWriter writes OTLP/JSON lines. Each trace's spans are cut into 2–3
// chunks in the order they end (as a batching exporter sends them: children
// before their parents, the root last), and the chunks of a few traces in
// flight are interleaved, sometimes two per line. Memory is bounded by the
// window of traces in flight.
type traceWriter struct {
	w         *bufio.Writer
	enc       *json.Encoder
	r         *rand.Rand
	window    int
	resources [][]keyValue
	scopes    []otlpScope
	pending   []*pendingTrace
	lines     int // lines written so far
}

func newTraceWriter(w io.Writer, r *rand.Rand, window int, resources [][]keyValue, scopes []otlpScope) *traceWriter {
	bw := bufio.NewWriterSize(w, 1<<20)
	enc := json.NewEncoder(bw)
	enc.SetEscapeHTML(false)
	return &traceWriter{w: bw, enc: enc, r: r, window: window, resources: resources, scopes: scopes}
}

// add queues one trace's spans and writes lines while more than the window
// of traces is in flight.
func (tw *traceWriter) add(spans []pendingSpan) error {
	if len(spans) == 0 {
		return nil
	}
	slices.SortStableFunc(spans, func(a, b pendingSpan) int { return cmp.Compare(a.end, b.end) })
	k := min(len(spans), between(tw.r, 2, 3))
	// Cut points: k-1 distinct positions in [1, len).
	cuts := []int{0}
	for len(cuts) < k {
		c := 1 + tw.r.IntN(len(spans)-1)
		if !slices.Contains(cuts, c) {
			cuts = append(cuts, c)
		}
	}
	slices.Sort(cuts)
	cuts = append(cuts, len(spans))
	pt := &pendingTrace{}
	for i := 0; i+1 < len(cuts); i++ {
		pt.chunks = append(pt.chunks, spans[cuts[i]:cuts[i+1]])
	}
	tw.pending = append(tw.pending, pt)
	for len(tw.pending) > tw.window {
		if err := tw.writeLine(); err != nil {
			return err
		}
	}
	return nil
}

// writeLine writes the next chunk of a random trace in flight, with 30%
// probability joined by the next chunk of another one.
func (tw *traceWriter) writeLine() error {
	var line []pendingSpan
	take := func(i int) {
		pt := tw.pending[i]
		line = append(line, pt.chunks[0]...)
		pt.chunks = pt.chunks[1:]
	}
	i := tw.r.IntN(len(tw.pending))
	take(i)
	if len(tw.pending) > 1 && tw.r.IntN(10) < 3 {
		j := tw.r.IntN(len(tw.pending) - 1)
		if j >= i {
			j++
		}
		take(j)
	}
	tw.pending = slices.DeleteFunc(tw.pending, func(pt *pendingTrace) bool { return len(pt.chunks) == 0 })

	// Group by resource, then scope, in order of first appearance.
	var doc otlpTracesData
	var docResources []int // resource index of each doc.ResourceSpans entry
	for _, ps := range line {
		ri := slices.Index(docResources, ps.resource)
		if ri < 0 {
			doc.ResourceSpans = append(doc.ResourceSpans, otlpResourceSpans{Resource: otlpResource{Attributes: tw.resources[ps.resource]}})
			docResources = append(docResources, ps.resource)
			ri = len(doc.ResourceSpans) - 1
		}
		rs := &doc.ResourceSpans[ri]
		si := slices.IndexFunc(rs.ScopeSpans, func(ss otlpScopeSpans) bool { return ss.Scope == tw.scopes[ps.scope] })
		if si < 0 {
			rs.ScopeSpans = append(rs.ScopeSpans, otlpScopeSpans{Scope: tw.scopes[ps.scope]})
			si = len(rs.ScopeSpans) - 1
		}
		rs.ScopeSpans[si].Spans = append(rs.ScopeSpans[si].Spans, ps.span)
	}
	if err := tw.enc.Encode(doc); err != nil {
		return fmt.Errorf("encoding line %d: %w", tw.lines+1, err)
	}
	tw.lines++
	return nil
}

// close writes everything still pending and flushes.
func (tw *traceWriter) close() error {
	for len(tw.pending) > 0 {
		if err := tw.writeLine(); err != nil {
			return err
		}
	}
	return tw.w.Flush()
}

// emitTrace converts a laid-out request tree into spans of one trace: one
// span per node that records one, parented to the nearest ancestor that
// does.
func emitTrace(r *rand.Rand, root *node, resource int) []pendingSpan {
	traceID := hexID(r, 16)
	ids := map[*node]string{}
	var out []pendingSpan
	root.walk(func(n *node) {
		if n.span == nil {
			return
		}
		id := hexID(r, 8)
		ids[n] = id
		s := otlpSpan{
			TraceID:    traceID,
			SpanID:     id,
			Flags:      spanFlags,
			Name:       n.span.name,
			Kind:       n.span.kind,
			Start:      strconv.FormatInt(n.start, 10),
			End:        strconv.FormatInt(n.end, 10),
			Attributes: n.span.attrs,
			Status:     n.span.status,
		}
		if p := n.spanParent(); p != nil {
			s.ParentSpanID = ids[p]
		}
		out = append(out, pendingSpan{resource: resource, scope: n.span.scope, end: n.end, span: s})
	})
	return out
}
