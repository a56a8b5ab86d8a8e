package main

import (
	"fmt"
	"math/rand/v2"
	"time"
)

// build is one release of the greenhouse service.
type build struct {
	version string
	// loopGrowth is the per-request item count of the catalog listing loop,
	// in percent of the base build's (100 = unchanged).
	loopGrowth int
}

var (
	buildBase      = build{version: "v41", loopGrowth: 100}
	buildCandidate = build{version: "v42", loopGrowth: 135}
)

// route is one HTTP route of the service and how often it is requested.
type route struct {
	method, pattern string
	weight          int
	handler         *fnDef
	build           func(g *requestGen, h *node)
}

// routes are the service's routes; weights are percentages of requests.
var routes = []route{
	{"GET", "/catalog", 30, appCatalogH, (*requestGen).catalog},
	{"GET", "/plants/{id}", 46, appPlantsH, (*requestGen).plant},
	{"POST", "/checkout", 14, appCheckoutH, (*requestGen).checkout},
	{"GET", "/reports/monthly", 10, appReportsH, (*requestGen).monthlyReport},
}

// routeWeights returns the routes' weights, in the order of routes.
func routeWeights() []int {
	w := make([]int, len(routes))
	for i, rt := range routes {
		w[i] = rt.weight
	}
	return w
}

// routeSchedule returns n routes in random order, each appearing in
// proportion to its weight (rounded down, the leftover handed out in turn to
// routes with a fractional share), so that small samples of requests of
// both builds have the same mix.
func routeSchedule(r *rand.Rand, n int) []route {
	total := 0
	for _, rt := range routes {
		total += rt.weight
	}
	counts := make([]int, len(routes))
	given := 0
	for i, rt := range routes {
		counts[i] = n * rt.weight / total
		given += counts[i]
	}
	for i := 0; given < n; i = (i + 1) % len(routes) {
		if n*routes[i].weight%total != 0 {
			counts[i]++
			given++
		}
	}
	var out []route
	for i, c := range counts {
		for range c {
			out = append(out, routes[i])
		}
	}
	r.Shuffle(len(out), func(i, j int) { out[i], out[j] = out[j], out[i] })
	return out
}

// Trace scopes (instrumentation libraries) of the demo traces.
const (
	scopeHTTP = iota
	scopeApp
	scopeDB
	scopeSession
)

var demoScopes = []otlpScope{
	scopeHTTP:    {Name: "go.opentelemetry.io/contrib/instrumentation/net/http/otelhttp", Version: "0.63.0"},
	scopeApp:     {Name: appModule},
	scopeDB:      {Name: appModule + "/internal/dbtrace"},
	scopeSession: {Name: "github.com/mossgate/websession", Version: "1.3.0"},
}

const (
	dbHost      = "db.greenhouse.test"
	carrierHost = "rates.carrier.test"
)

// requestGen builds simulated requests of one build.
type requestGen struct {
	r *rand.Rand
	b build
	// spans says whether to build span data (names, attributes); the
	// profile simulations leave it off.
	spans bool
	tails map[dbShape][2][]tail
}

// request builds one request of route rt: the tree of calls from the
// server's connection goroutine down, with durations but no times yet.
func (g *requestGen) request(rt route) *node {
	path := rt.pattern
	if rt.pattern == "/plants/{id}" && g.spans {
		path = fmt.Sprintf("/plants/%d", between(g.r, 1, 480))
	}
	status := int64(200)
	if rt.method == "POST" {
		status = 201
	}
	root := &node{
		fn:    sessMiddleware,
		via:   serverRoot,
		self:  jitter(g.r, 60*time.Microsecond, 0.3),
		cpuAt: rootCPU,
	}
	root.cpu = root.self
	if g.spans {
		root.span = &spanInfo{
			name: rt.method + " " + rt.pattern, kind: kindServer, scope: scopeHTTP,
			attrs: []keyValue{
				strAttr("http.request.method", rt.method),
				strAttr("http.route", rt.pattern),
				strAttr("url.path", path),
				strAttr("url.scheme", "http"),
				intAttr("http.response.status_code", status),
			},
		}
	}
	g.session(root)
	h := root.call(rt.handler, 52, toHandler)
	h.labeled = true
	h.self = jitter(g.r, 40*time.Microsecond, 0.3)
	h.cpu = h.self
	h.cpuAt = handlerCPU
	h.span = g.funcSpan(rt.handler)
	rt.build(g, h)
	return root
}

// funcSpan is the INTERNAL span of an instrumented application function.
func (g *requestGen) funcSpan(fn *fnDef) *spanInfo {
	if !g.spans {
		return nil
	}
	return &spanInfo{name: shortName(fn.name), kind: kindInternal, scope: scopeApp,
		attrs: []keyValue{strAttr("code.function.name", fn.name)}}
}

// cpuFunc adds a child running fn entirely on CPU for about median.
func (g *requestGen) cpuFunc(parent *node, fn *fnDef, line int64, median time.Duration, at []tail) *node {
	n := parent.call(fn, line, nil)
	n.self = jitter(g.r, median, 0.25)
	n.cpu = n.self
	n.cpuAt = at
	return n
}

// session is the third-party session middleware loading the session row
// before routing: a query with no application frame above it.
func (g *requestGen) session(root *node) {
	load := root.call(sessLoad, 48, nil)
	load.self = jitter(g.r, 30*time.Microsecond, 0.3)
	load.cpu = load.self
	load.cpuAt = sessLoadCPU
	if g.spans {
		load.span = &spanInfo{name: "websession.load", kind: kindInternal, scope: scopeSession,
			attrs: []keyValue{strAttr("code.function.name", sessLoad.name)}}
	}
	get := load.call(sessGet, 88, nil)
	g.query(get, dbCall{
		op: "SELECT", table: "sessions", row: true, line: 44, scanLine: 46,
		format: "SELECT data, expires_at FROM sessions WHERE token = '%s'", args: []any{hexID(g.r, 8)},
		median: 700 * time.Microsecond,
	})
}

// catalog: the category tree (recursive, a query per level), the listing
// loop (a query per variety) and the discount rules (pure CPU).
func (g *requestGen) catalog(h *node) {
	tree := h.call(catTreeBuild, 33, nil)
	tree.self = jitter(g.r, 20*time.Microsecond, 0.3)
	tree.cpu = tree.self
	tree.cpuAt = treeBuildCPU
	levels := between(g.r, 2, 4)
	parent, line := tree, int64(25)
	parentID := between(g.r, 1, 12)
	for lvl := 0; lvl < levels; lvl++ {
		e := parent.call(catTreeExpand, line, nil)
		e.self = jitter(g.r, 25*time.Microsecond, 0.3)
		e.cpu = e.self
		e.cpuAt = expandCPU
		e.span = g.funcSpan(catTreeExpand)
		g.query(e, dbCall{
			op: "SELECT", table: "categories", line: 35, nextLine: 38, scanLine: 39, nextShare: 20,
			format: "SELECT id FROM categories WHERE parent_id = %d", args: []any{parentID},
			median: 1300 * time.Microsecond,
		})
		parentID = between(g.r, 13, 160)
		parent, line = e, 44
	}

	list := h.call(catList, 38, nil)
	list.self = jitter(g.r, 50*time.Microsecond, 0.3)
	list.cpu = list.self
	list.cpuAt = listCPU
	list.span = g.funcSpan(catList)
	items := between(g.r, 20, 30)
	items = (items*g.b.loopGrowth + 50) / 100
	for range items {
		v := list.call(catVarietyByID, 52, nil)
		v.self = jitter(g.r, 15*time.Microsecond, 0.3)
		v.cpu = v.self
		v.cpuAt = varietyCPU
		v.span = g.funcSpan(catVarietyByID)
		g.query(v, dbCall{
			op: "SELECT", table: "varieties", row: true, line: 74, scanLine: 76,
			format: "SELECT id, name, price_cents FROM varieties WHERE id = %d", args: []any{between(g.r, 1, 480)},
			median: 1100 * time.Microsecond,
		})
	}
	g.applyDiscounts(list, 61, 6*time.Millisecond)
	g.cpuFunc(h, appRender, 46, 900*time.Microsecond, renderPageCPU)
}

// plant: one query for the plant, discounts, a page.
func (g *requestGen) plant(h *node) {
	p := h.call(catPlantByID, 61, nil)
	p.self = jitter(g.r, 15*time.Microsecond, 0.3)
	p.cpu = p.self
	p.cpuAt = plantCPU
	p.span = g.funcSpan(catPlantByID)
	g.query(p, dbCall{
		op: "SELECT", table: "varieties", row: true, line: 91, scanLine: 94,
		format: "SELECT id, name, price_cents, stock, light, watering FROM varieties WHERE id = %d", args: []any{between(g.r, 1, 480)},
		median: 1200 * time.Microsecond,
	})
	g.applyDiscounts(h, 66, 2500*time.Microsecond)
	g.cpuFunc(h, appRender, 71, 500*time.Microsecond, renderPageCPU)
}

// checkout: load the cart, quote shipping once per cart line from the
// carrier's API, discounts, store the order.
func (g *requestGen) checkout(h *node) {
	place := h.call(coPlace, 92, nil)
	place.self = jitter(g.r, 30*time.Microsecond, 0.3)
	place.cpu = place.self
	place.cpuAt = placeCPU
	place.span = g.funcSpan(coPlace)
	cartID := between(g.r, 1000, 99999)
	lines := between(g.r, 5, 15)

	load := place.call(coLoadCart, 38, nil)
	load.self = jitter(g.r, 15*time.Microsecond, 0.3)
	load.cpu = load.self
	load.cpuAt = loadCartCPU
	load.span = g.funcSpan(coLoadCart)
	g.query(load, dbCall{
		op: "SELECT", table: "cart_lines", line: 29, nextLine: 33, scanLine: 34, nextShare: 10,
		format: "SELECT variety_id, qty, price_cents FROM cart_lines WHERE cart_id = %d", args: []any{cartID},
		median: 1000 * time.Microsecond,
	})

	q := place.call(coQuoteEach, 41, nil)
	q.self = jitter(g.r, time.Duration(lines)*150*time.Microsecond, 0.2)
	q.cpu = q.self
	q.cpuAt = quoteCPU
	q.span = g.funcSpan(coQuoteEach)
	for range lines {
		g.outbound(q, between(g.r, 1, 480), between(g.r, 1, 6))
	}

	g.applyDiscounts(place, 44, 4*time.Millisecond)

	save := place.call(coSaveOrder, 47, nil)
	save.self = jitter(g.r, 20*time.Microsecond, 0.3)
	save.cpu = save.self
	save.cpuAt = saveOrderCPU
	save.span = g.funcSpan(coSaveOrder)
	g.query(save, dbCall{
		op: "INSERT", table: "orders", exec: true, line: 58,
		format: "INSERT INTO orders (cart_id, total_cents, placed_at) VALUES (%d, %d, now())", args: []any{cartID, between(g.r, 900, 40000)},
		median: 2500 * time.Microsecond,
	})
	g.cpuFunc(h, appWriteJSON, 101, 80*time.Microsecond, writeJSONCPU)
}

// monthlyReport: one heavy aggregate query, then aggregation and a page.
func (g *requestGen) monthlyReport(h *node) {
	b := h.call(repBuild, 115, nil)
	b.self = jitter(g.r, 4*time.Millisecond, 0.25)
	b.cpu = b.self
	b.cpuAt = monthlyCPU
	b.span = g.funcSpan(repBuild)
	month := between(g.r, 1, 5)
	g.query(b, dbCall{
		op: "SELECT", table: "order_lines", line: 66, nextLine: 71, scanLine: 73, nextShare: 65,
		format: "SELECT date_trunc('day', o.placed_at) AS day, v.name, sum(l.qty) AS units, " +
			"sum(l.qty * l.price_cents) AS revenue_cents FROM order_lines l JOIN orders o ON o.id = l.order_id " +
			"JOIN varieties v ON v.id = l.variety_id WHERE o.placed_at >= '2026-%02d-01' AND o.placed_at < '2026-%02d-01' " +
			"GROUP BY day, v.name ORDER BY day, revenue_cents DESC",
		args:   []any{month, month + 1},
		median: 300 * time.Millisecond, sigma: 0.2, cpuPerMille: 10,
	})
	g.cpuFunc(h, appRender, 121, 3*time.Millisecond, renderPageCPU)
}

// applyDiscounts adds the pure CPU discount calculation.
func (g *requestGen) applyDiscounts(parent *node, line int64, median time.Duration) {
	n := g.cpuFunc(parent, priceApply, line, median, applyDiscountsCPU)
	n.span = g.funcSpan(priceApply)
}

// Where the application's functions spend their own time (read-only).
var (
	rootCPU       = []tail{{line: 45, w: 1, frames: fr(httpHeaderClone.at(102), rtMallocgc.at(1096))}}
	handlerCPU    = []tail{{line: 0, w: 1}}
	sessLoadCPU   = []tail{{line: 95, w: 1, frames: fr(sessDecode.at(31), rtMallocgc.at(1096))}}
	treeBuildCPU  = []tail{{line: 24, w: 1}}
	expandCPU     = []tail{{line: 41, w: 1, frames: fr(rtGrowslice.at(272), rtMallocgc.at(1096))}}
	listCPU       = []tail{{line: 50, w: 1, frames: fr(rtGrowslice.at(272), rtMallocgc.at(1096))}}
	varietyCPU    = []tail{{line: 72, w: 1}}
	plantCPU      = []tail{{line: 89, w: 1}}
	placeCPU      = []tail{{line: 36, w: 1}}
	loadCartCPU   = []tail{{line: 27, w: 1}}
	quoteCPU      = append(tailsAt(55, 1, jsonEncodeCPU), tailsAt(63, 1, jsonDecodeCPU)...)
	saveOrderCPU  = []tail{{line: 55, w: 1}}
	writeJSONCPU  = tailsAt(44, 1, jsonEncodeCPU)
	renderPageCPU = tailsAt(33, 1, renderCPU)
	monthlyCPU    = []tail{
		{line: 79, w: 3, frames: fr(rtMapassign.at(287))},
		{line: 81, w: 1, frames: fr(mathRound.at(118))},
	}
	quoteCallWait = []tail{{line: 58, w: 9, frames: httpWait[0]}, {line: 58, w: 1, frames: httpWait[1]}}
	quoteCallCPU  = tailsAt(58, 1, httpCPU)
)

// dbCall describes one database call made by a function.
type dbCall struct {
	op, table   string
	format      string // query text with fmt verbs for its literals
	args        []any  // the literals
	row         bool   // QueryRowContext (otherwise QueryContext or ExecContext)
	exec        bool   // ExecContext
	line        int64  // the caller's line calling database/sql
	nextLine    int64  // the caller's line calling rows.Next, if it iterates
	scanLine    int64  // the caller's line calling Scan, if it scans
	nextShare   int    // percentage of the waiting spent in rows.Next
	median      time.Duration
	sigma       float64 // log-normal shape; 0 means 0.35
	cpuPerMille int     // on-CPU share of the call in ‰; 0 means 40
}

// query adds a database call below the caller n.
func (g *requestGen) query(n *node, c dbCall) {
	q := n.boundary()
	sigma := c.sigma
	if sigma == 0 {
		sigma = 0.35
	}
	q.self = jitter(g.r, c.median, sigma)
	perMille := c.cpuPerMille
	if perMille == 0 {
		perMille = 40
	}
	q.cpu = q.self * time.Duration(perMille) / 1000
	q.wait, q.cpuAt = g.dbTails(dbShape{row: c.row, exec: c.exec, line: c.line, nextLine: c.nextLine, scanLine: c.scanLine, nextShare: c.nextShare})
	if !g.spans {
		return
	}
	q.span = &spanInfo{
		name: c.op + " " + c.table, kind: kindClient, scope: scopeDB,
		attrs: []keyValue{
			strAttr("db.system.name", "postgresql"),
			strAttr("db.namespace", "greenhouse"),
			strAttr("db.operation.name", c.op),
			strAttr("db.collection.name", c.table),
			strAttr("db.query.text", fmt.Sprintf(c.format, c.args...)),
			strAttr("server.address", dbHost),
			intAttr("server.port", 5432),
		},
	}
}

// dbShape is what determines a database call's stacks.
type dbShape struct {
	row, exec                bool
	line, nextLine, scanLine int64
	nextShare                int
}

// dbTails returns where a database call of shape s spends its time,
// waiting and on CPU. Results are cached per shape and shared.
func (g *requestGen) dbTails(s dbShape) (wait, cpu []tail) {
	if t, ok := g.tails[s]; ok {
		return t[0], t[1]
	}
	switch {
	case s.exec:
		wait = tailsAt(s.line, 1, dbExecWait)
		cpu = tailsAt(s.line, 1, dbExecCPU)
	default:
		waits := dbQueryWait(s.row)
		wait = []tail{
			{line: s.line, w: 90 * (100 - s.nextShare), frames: waits[0]},
			{line: s.line, w: 10 * (100 - s.nextShare), frames: waits[1]},
		}
		cpu = tailsAt(s.line, 2, dbQueryCPU(s.row))
		if s.nextLine != 0 {
			wait = append(wait, tailsAt(s.nextLine, 100*s.nextShare, dbNextWait)...)
			cpu = append(cpu, tailsAt(s.nextLine, 2, dbNextCPU)...)
		}
		if s.scanLine != 0 {
			scans := dbScanCPU
			if s.row {
				scans = nil
				for _, f := range dbScanCPU {
					scans = append(scans, chain(fr(sqlRowScan.at(3457)), f))
				}
			}
			cpu = append(cpu, tailsAt(s.scanLine, 1, scans)...)
		}
	}
	if g.tails == nil {
		g.tails = map[dbShape][2][]tail{}
	}
	g.tails[s] = [2][]tail{wait, cpu}
	return wait, cpu
}

// outbound adds one call of net/http.(*Client).Do from the quoting loop,
// asking the carrier for a quote for qty plants of one variety.
func (g *requestGen) outbound(n *node, variety, qty int) {
	c := n.boundary()
	c.self = jitter(g.r, 20*time.Millisecond, 0.3)
	c.cpu = c.self / 100
	c.wait, c.cpuAt = quoteCallWait, quoteCallCPU
	status := int64(200)
	var st *otlpStatus
	if g.r.IntN(100) < 2 {
		status = 503
		st = &otlpStatus{Code: 2}
	}
	if !g.spans {
		return
	}
	url := fmt.Sprintf("https://%s/v1/quotes?variety=%d&qty=%d", carrierHost, variety, qty)
	c.span = &spanInfo{
		name: "POST", kind: kindClient, scope: scopeHTTP, status: st,
		attrs: []keyValue{
			strAttr("http.request.method", "POST"),
			strAttr("url.full", url),
			strAttr("server.address", carrierHost),
			intAttr("server.port", 443),
			intAttr("http.response.status_code", status),
		},
	}
}

// tailsAt makes tails of equal weight w at one line.
func tailsAt(line int64, w int, frames [][]frame) []tail {
	out := make([]tail, len(frames))
	for i, f := range frames {
		out[i] = tail{line: line, w: w, frames: f}
	}
	return out
}

// shortName returns a Go function name without its import path
// ("catalog.(*Repo).VarietyByID"), as a span name.
func shortName(name string) string {
	for i := len(name) - 1; i >= 0; i-- {
		if name[i] == '/' {
			return name[i+1:]
		}
	}
	return name
}
