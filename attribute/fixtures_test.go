package attribute

import (
	"fmt"

	"github.com/culprithq/culprit/traces"
)

// Test sources of a small shop service, shared by the charging tests (the
// comparison tests in attribute/compare have their own copy).

// requestStacks returns the stacks of requests first..last of a small shop
// service: every request loads its user and orders, every third calls a
// payment service, every fourth walks a category tree recursively down to
// the database, and the mux makes calls with no application frame.
func requestStacks(first, last int) []fakeStack {
	var out []fakeStack
	for r := first; r <= last; r++ {
		req := map[string][]string{"request_id": {fmt.Sprintf("req-%03d", r)}}
		route := map[string][]string{"request_id": {fmt.Sprintf("req-%03d", r)}, "http.route": {"/orders"}}
		out = append(out,
			fakeStack{frames: []string{fServe, fMux, fHandler, fLoadUser, fQuery, fDriver}, count: int64(1 + r%3), labels: req},
			fakeStack{frames: []string{fServe, fMux, fHandler, fLoadOrders, fQuery, fDriver}, count: int64(2 + r%5), labels: route},
			fakeStack{frames: []string{fServe, fMux, fHandler, fRender}, count: 4, labels: req},
		)
		if r%3 == 0 {
			out = append(out, fakeStack{frames: []string{fServe, fMux, fHandler, fHTTP}, count: int64(1 + r%4), labels: req})
		}
		if r%4 == 0 {
			out = append(out, fakeStack{frames: []string{fServe, fMux, fHandler, fWalk, fWalk, fQuery}, count: int64(1 + r%2), labels: req})
		}
		if r%4 == 1 {
			out = append(out, fakeStack{frames: []string{fServe, fMux, fHandler, fWalk, fWalk, fWalk, fQuery}, count: 1, labels: req})
		}
		if r%5 == 0 {
			out = append(out, fakeStack{frames: []string{fServe, fMux, fHTTP}, count: 1, labels: req})
		}
	}
	return out
}

// spanCall is one outbound call of a test trace, made by an application
// function.
type spanCall struct {
	fn        string
	statement string // a database call when set, else an HTTP call
	dur       int64
}

// spanTrace is one request of a test span source.
type spanTrace struct {
	id    string
	route string
	calls []spanCall
}

// spanSource builds a Spans source as the OTLP reader models traces (a
// server span per request, an internal span per application function, a
// client span per call), since span files cannot be read yet in this tree.
func spanSource(name string, duration int64, trs []spanTrace) *traces.Source {
	src := traces.NewSource(traces.Spans, []traces.ValueType{{Type: "duration", Unit: "nanoseconds"}, {Type: "calls", Unit: "count"}})
	src.DurationNanos = duration
	src.Inputs = []traces.Input{{Name: name, Format: "otlp-json", Bytes: int64(len(trs)), SHA256: fmt.Sprintf("%064x", len(name)*1000+len(trs))}}
	for _, tr := range trs {
		req := src.InternRequest(tr.id)
		server := src.InternFrame(traces.Frame{Function: tr.route, SpanKind: traces.SpanKindServer, Span: true, Service: "shop"})
		total := int64(5_000_000)
		var fns []string
		own := map[string]int64{}
		for _, c := range tr.calls {
			if _, ok := own[c.fn]; !ok {
				fns = append(fns, c.fn)
			}
			own[c.fn] += c.dur
			total += c.dur
		}
		src.Paths.Append(traces.Path{Frames: []traces.FrameID{server}, Values: []int64{total, 1}, Request: req})
		for _, fn := range fns {
			f := src.InternFrame(traces.Frame{Function: fn, SpanKind: traces.SpanKindInternal, Span: true, Service: "shop"})
			src.Paths.Append(traces.Path{Frames: []traces.FrameID{server, f}, Values: []int64{own[fn] + 1_000_000, 1}, Request: req})
		}
		for _, c := range tr.calls {
			f := src.InternFrame(traces.Frame{Function: c.fn, SpanKind: traces.SpanKindInternal, Span: true, Service: "shop"})
			var cf traces.FrameID
			var call traces.CallID
			if c.statement != "" {
				cf = src.InternFrame(traces.Frame{Function: "SELECT shop", SpanKind: traces.SpanKindClient, Protocol: traces.ProtocolDatabase, System: "postgresql", Span: true, Service: "shop"})
				call = src.InternCall(traces.Call{System: "postgresql", Statement: c.statement, Peer: "db:5432"})
			} else {
				cf = src.InternFrame(traces.Frame{Function: "GET", SpanKind: traces.SpanKindClient, Protocol: traces.ProtocolHTTP, System: "http", Span: true, Service: "shop"})
				call = src.InternCall(traces.Call{System: "http", Operation: "GET", Peer: "prices:8080"})
			}
			src.Paths.Append(traces.Path{Frames: []traces.FrameID{server, f, cf}, Values: []int64{c.dur, 1}, Request: req, Call: call})
		}
	}
	return src
}

// shopTraces returns requests first..last of a span-traced shop service.
// items is how many item queries each order load issues (a repeated
// statement from 5 on).
func shopTraces(first, last int, items func(r int) int) []spanTrace {
	var out []spanTrace
	for r := first; r <= last; r++ {
		tr := spanTrace{id: fmt.Sprintf("%032x", r), route: "GET /orders"}
		if r%4 == 0 {
			tr.route = "GET /cart"
		}
		tr.calls = append(tr.calls, spanCall{fn: "shop.loadUser", statement: fmt.Sprintf("SELECT * FROM users WHERE id = %d", r), dur: int64(2_000_000 + 37_000*r)})
		for i := range items(r) {
			tr.calls = append(tr.calls, spanCall{fn: "shop.loadOrders", statement: fmt.Sprintf("SELECT * FROM items WHERE order_id = %d", 10*r+i), dur: int64(800_000 + 11_000*(r+i))})
		}
		if r%3 == 0 {
			tr.calls = append(tr.calls, spanCall{fn: "shop.fetchPrices", dur: int64(15_000_000 + 100_000*r)})
		}
		out = append(out, tr)
	}
	return out
}
