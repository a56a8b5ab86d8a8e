package testinput

import (
	"fmt"

	"github.com/culprithq/culprit/traces"
)

// SpanCall is one outbound call of a test trace, made by an application
// function.
type SpanCall struct {
	Fn        string
	Statement string // a database call when set, else an HTTP call
	Dur       int64
}

// SpanTrace is one request of a test span source.
type SpanTrace struct {
	ID    string
	Route string
	Calls []SpanCall
}

// SpanSource builds a Spans source as the OTLP reader models traces (a
// server span per request, an internal span per application function, a
// client span per call), since span files cannot be read yet in this tree.
func SpanSource(name string, duration int64, trs []SpanTrace) *traces.Source {
	src := traces.NewSource(traces.Spans, []traces.ValueType{{Type: "duration", Unit: "nanoseconds"}, {Type: "calls", Unit: "count"}})
	src.DurationNanos = duration
	src.Inputs = []traces.Input{{Name: name, Format: "otlp-json", Bytes: int64(len(trs)), SHA256: fmt.Sprintf("%064x", len(name)*1000+len(trs))}}
	for _, tr := range trs {
		req := src.InternRequest(tr.ID)
		server := src.InternFrame(traces.Frame{Function: tr.Route, SpanKind: traces.SpanKindServer, Span: true, Service: "shop"})
		total := int64(5_000_000)
		var fns []string
		own := map[string]int64{}
		for _, c := range tr.Calls {
			if _, ok := own[c.Fn]; !ok {
				fns = append(fns, c.Fn)
			}
			own[c.Fn] += c.Dur
			total += c.Dur
		}
		src.Paths.Append(traces.Path{Frames: []traces.FrameID{server}, Values: []int64{total, 1}, Request: req})
		for _, fn := range fns {
			f := src.InternFrame(traces.Frame{Function: fn, SpanKind: traces.SpanKindInternal, Span: true, Service: "shop"})
			src.Paths.Append(traces.Path{Frames: []traces.FrameID{server, f}, Values: []int64{own[fn] + 1_000_000, 1}, Request: req})
		}
		for _, c := range tr.Calls {
			f := src.InternFrame(traces.Frame{Function: c.Fn, SpanKind: traces.SpanKindInternal, Span: true, Service: "shop"})
			var cf traces.FrameID
			var call traces.CallID
			if c.Statement != "" {
				cf = src.InternFrame(traces.Frame{Function: "SELECT shop", SpanKind: traces.SpanKindClient, Protocol: traces.ProtocolDatabase, System: "postgresql", Span: true, Service: "shop"})
				call = src.InternCall(traces.Call{System: "postgresql", Statement: c.Statement, Peer: "db:5432"})
			} else {
				cf = src.InternFrame(traces.Frame{Function: "GET", SpanKind: traces.SpanKindClient, Protocol: traces.ProtocolHTTP, System: "http", Span: true, Service: "shop"})
				call = src.InternCall(traces.Call{System: "http", Operation: "GET", Peer: "prices:8080"})
			}
			src.Paths.Append(traces.Path{Frames: []traces.FrameID{server, f, cf}, Values: []int64{c.Dur, 1}, Request: req, Call: call})
		}
	}
	return src
}

// ShopTraces returns requests first..last of a span-traced shop service.
// items is how many item queries each order load issues (a repeated
// statement from 5 on).
func ShopTraces(first, last int, items func(r int) int) []SpanTrace {
	var out []SpanTrace
	for r := first; r <= last; r++ {
		tr := SpanTrace{ID: fmt.Sprintf("%032x", r), Route: "GET /orders"}
		if r%4 == 0 {
			tr.Route = "GET /cart"
		}
		tr.Calls = append(tr.Calls, SpanCall{Fn: "shop.loadUser", Statement: fmt.Sprintf("SELECT * FROM users WHERE id = %d", r), Dur: int64(2_000_000 + 37_000*r)})
		for i := range items(r) {
			tr.Calls = append(tr.Calls, SpanCall{Fn: "shop.loadOrders", Statement: fmt.Sprintf("SELECT * FROM items WHERE order_id = %d", 10*r+i), Dur: int64(800_000 + 11_000*(r+i))})
		}
		if r%3 == 0 {
			tr.Calls = append(tr.Calls, SpanCall{Fn: "shop.fetchPrices", Dur: int64(15_000_000 + 100_000*r)})
		}
		out = append(out, tr)
	}
	return out
}
