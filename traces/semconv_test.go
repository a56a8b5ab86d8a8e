package traces

import "testing"

// Database span names that acquire or open a connection: node-postgres's
// instrumentation (pg-pool.connect, pg.connect, as recorded in
// testdata/nodejs), and, recalled from memory, the common pgx tracer
// (pool.acquire, connect) and database/sql wrappers (sql.connector.connect).
func TestConnectionNames(t *testing.T) {
	for name, want := range map[string]bool{
		"pg-pool.connect":          true,
		"pg.connect":               true,
		"pool.acquire":             true,
		"connect":                  true,
		"sql.connector.connect":    true,
		"mysql.getConnection":      true, // words compare without case
		"pg.query:SELECT seedbank": false,
		"SELECT":                   false,
		"disconnect":               false,
		"reconnection-storm":       false,
		"":                         false,
	} {
		if got := isConnectionName(name); got != want {
			t.Errorf("isConnectionName(%q) = %v, want %v", name, got, want)
		}
	}
}

// A connection wait is database time with no call: its path carries 0
// calls, and a span with a statement is never one.
func TestConnectionWaitPaths(t *testing.T) {
	pg := func(id, name string, start int64, attrs ...attr) tspan {
		attrs = append(attrs, str("db.system.name", "postgresql"), str("server.address", "db"))
		return tspan{trace: tr1, id: id, parent: sA, name: name, kind: 3, start: start, end: start + 10, attrs: attrs}
	}
	data := lines(line(tres{"api", []tspan{
		{trace: tr1, id: sA, name: "root", kind: 2, start: t0, end: t0 + sec},
		pg(sB, "pg-pool.connect", t0+1),
		pg(sC, "pg.query:SELECT", t0+20, str("db.query.text", "SELECT 1")),
		pg(sD, "connect", t0+40, str("db.operation.name", "connect"))}}))
	src := mustCollect(t, Options{Strict: true}, input{"pool.jsonl", data})
	want := map[string]int64{"root": 1, "pg-pool.connect": 0, "pg.query:SELECT": 1, "connect": 0}
	for i := range src.Paths.Len() {
		p := src.Paths.At(i)
		name := src.Frames[p.Frames[len(p.Frames)-1]].Function
		if p.Values[1] != want[name] {
			t.Errorf("%s: %d calls, want %d", name, p.Values[1], want[name])
		}
		if c := src.Calls[p.Call]; c.Connection != (want[name] == 0) {
			t.Errorf("%s: call %+v", name, c)
		}
	}
}
