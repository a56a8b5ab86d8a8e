package main

import (
	"fmt"
	"io"
	"math/rand/v2"
	"time"
)

// bigSpansOptions are the flags of the spans command.
type bigSpansOptions struct {
	spans int // total number of spans written
	seed  uint64
}

const (
	bigMinSpans     = 20 // spans per trace
	bigMaxSpans     = 60
	bigInstances    = 4
	bigTraceWindow  = 16
	bigTraceSpacing = 2 * time.Millisecond
)

// bigStatements are query templates of the synthetic service; %d and %s
// take random literals.
var bigStatements = []struct {
	op, table, text string
}{
	{"SELECT", "varieties", "SELECT id, name, price_cents FROM varieties WHERE id = %d"},
	{"SELECT", "categories", "SELECT id FROM categories WHERE parent_id = %d"},
	{"SELECT", "cart_lines", "SELECT variety_id, qty, price_cents FROM cart_lines WHERE cart_id = %d"},
	{"UPDATE", "stock", "UPDATE stock SET qty = qty - %d WHERE variety_id = %d"},
	{"INSERT", "orders", "INSERT INTO orders (cart_id, total_cents, placed_at) VALUES (%d, %d, now())"},
	{"SELECT", "sessions", "SELECT data, expires_at FROM sessions WHERE token = '%s'"},
	{"SELECT", "varieties", "SELECT v.id, v.name FROM varieties v JOIN stock s ON s.variety_id = v.id WHERE s.qty > %d AND v.light IN ('full', 'partial') LIMIT %d"},
	{"DELETE", "cart_lines", "DELETE FROM cart_lines WHERE cart_id = %d AND variety_id = %d"},
}

// bigPeers are the outbound HTTP calls of the synthetic service.
var bigPeers = []struct {
	method, host, path string
}{
	{"POST", carrierHost, "/v1/quotes?variety=%d&qty=%d"},
	{"GET", "images.greenhouse.test", "/thumbs/%d/%d.webp"},
	{"POST", "pay.gateway.test", "/v2/charges?order=%d&attempt=%d"},
	{"POST", "mail.relay.test", "/send?template=%d&batch=%d"},
}

// writeBigSpans streams o.spans spans as OTLP/JSON lines: traces of 20–60
// spans (the last one takes what is left), each spread over 2–3 lines.
// Memory stays bounded by the writer's window of traces in flight.
func writeBigSpans(w io.Writer, o bigSpansOptions) error {
	r := newRand(o.seed, "spans")
	cb := newCodebase(r, 12)
	resources := make([][]keyValue, bigInstances)
	for i := range resources {
		resources[i] = []keyValue{
			strAttr("service.name", "greenhouse-web"),
			strAttr("service.version", buildCandidate.version),
			strAttr("service.instance.id", fmt.Sprintf("web-%d", i+1)),
			strAttr("deployment.environment.name", deploymentStage),
		}
	}
	tw := newTraceWriter(w, r, bigTraceWindow, resources, demoScopes)
	t := time.Date(2026, 6, 3, 12, 0, 0, 0, time.UTC).UnixNano()
	for left := o.spans; left > 0; {
		n := min(left, between(r, bigMinSpans, bigMaxSpans))
		root := bigTrace(r, cb, n)
		t += int64(r.ExpFloat64() * float64(bigTraceSpacing))
		root.layout(t)
		if err := tw.add(emitTrace(r, root, r.IntN(bigInstances))); err != nil {
			return err
		}
		left -= n
	}
	return tw.close()
}

// bigTrace makes a request tree with exactly n spans: a SERVER root, then
// INTERNAL spans of application functions and database and HTTP CLIENT
// spans below them, mostly nested under recent spans so that traces get
// deep.
func bigTrace(r *rand.Rand, cb *codebase, n int) *node {
	h := cb.handlers[r.IntN(len(cb.handlers))]
	root := &node{
		self: jitter(r, 200*time.Microsecond, 0.5),
		span: &spanInfo{name: "GET " + h.route, kind: kindServer, scope: scopeHTTP, attrs: []keyValue{
			strAttr("http.request.method", "GET"),
			strAttr("http.route", h.route),
			strAttr("url.path", h.route),
			strAttr("url.scheme", "http"),
			intAttr("http.response.status_code", 200),
		}},
	}
	parents := []*node{root} // nodes that may get children
	depth := map[*node]int{root: 0}
	for i := 1; i < n; i++ {
		// Prefer the newest parents: deep, realistic nesting.
		k := len(parents) - 1 - min(len(parents)-1, int(r.ExpFloat64()*1.5))
		p := parents[k]
		c := p.boundary()
		switch x := r.IntN(100); {
		case x < 40 && depth[p] < 12:
			f := cb.funcs[r.IntN(len(cb.funcs))]
			c.fn = f.def
			c.self = jitter(r, 150*time.Microsecond, 0.8)
			c.span = &spanInfo{name: shortName(f.def.name), kind: kindInternal, scope: scopeApp,
				attrs: []keyValue{strAttr("code.function.name", f.def.name)}}
			parents = append(parents, c)
			depth[c] = depth[p] + 1
		case x < 85:
			st := bigStatements[r.IntN(len(bigStatements))]
			var text string
			if st.table == "sessions" {
				text = fmt.Sprintf(st.text, hexID(r, 8))
			} else {
				text = fmt.Sprintf(st.text, between(r, 1, 5000), between(r, 1, 500))
			}
			c.self = jitter(r, time.Millisecond, 0.6)
			c.span = &spanInfo{name: st.op + " " + st.table, kind: kindClient, scope: scopeDB, attrs: []keyValue{
				strAttr("db.system.name", "postgresql"),
				strAttr("db.namespace", "greenhouse"),
				strAttr("db.operation.name", st.op),
				strAttr("db.collection.name", st.table),
				strAttr("db.query.text", text),
				strAttr("server.address", dbHost),
				intAttr("server.port", 5432),
			}}
		default:
			pe := bigPeers[r.IntN(len(bigPeers))]
			url := "https://" + pe.host + fmt.Sprintf(pe.path, between(r, 1, 5000), between(r, 1, 9))
			status := int64(200)
			var st *otlpStatus
			if r.IntN(100) < 2 {
				status, st = 503, &otlpStatus{Code: 2}
			}
			c.self = jitter(r, 15*time.Millisecond, 0.5)
			c.span = &spanInfo{name: pe.method, kind: kindClient, scope: scopeHTTP, status: st, attrs: []keyValue{
				strAttr("http.request.method", pe.method),
				strAttr("url.full", url),
				strAttr("server.address", pe.host),
				intAttr("server.port", 443),
				intAttr("http.response.status_code", status),
			}}
		}
	}
	return root
}
