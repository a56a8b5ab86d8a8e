package attribute_test

import (
	"bufio"
	"bytes"
	"context"
	"database/sql"
	"database/sql/driver"
	"errors"
	"fmt"
	"io"
	"net"
	"net/http"
	"os"
	"runtime/trace"
	"strconv"
	"strings"
	"sync"
	"sync/atomic"
	"testing"
	"time"

	"github.com/culprithq/culprit/attribute"
	"github.com/culprithq/culprit/callgraph"
	"github.com/culprithq/culprit/traces"
	xtrace "golang.org/x/exp/trace"
	"golang.org/x/sync/errgroup"
	"google.golang.org/grpc"
	"google.golang.org/grpc/credentials/insecure"
	"google.golang.org/protobuf/types/known/emptypb"
)

// The workload of the execution-trace tests: a plant nursery's HTTP
// service on the loopback that queries a real SQLite database over a
// loopback wire (one line out, one line back per query, as a network
// database driver does) and calls a weather service over HTTP. Every
// application function counts its own calls: the truth the reader's
// counts are checked against.

// dbServer serves SQLite over TCP: each request line is a statement and
// its arguments separated by tabs; the reply is one line of rows.
type dbServer struct {
	ln net.Listener
	db *sql.DB
}

func startDBServer(t testing.TB) *dbServer {
	db, err := sql.Open("sqlite", ":memory:")
	if err != nil {
		t.Fatal(err)
	}
	db.SetMaxOpenConns(1)
	for _, q := range []string{
		"CREATE TABLE varieties (id INTEGER PRIMARY KEY, name TEXT, price INTEGER, stock INTEGER)",
		"CREATE TABLE orders (id INTEGER PRIMARY KEY, variety INTEGER, qty INTEGER)",
	} {
		if _, err := db.Exec(q); err != nil {
			t.Fatal(err)
		}
	}
	for i := 1; i <= 20; i++ {
		if _, err := db.Exec("INSERT INTO varieties VALUES (?, ?, ?, ?)", i, fmt.Sprintf("fern %d", i), 100*i, 3*i); err != nil {
			t.Fatal(err)
		}
	}
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	s := &dbServer{ln: ln, db: db}
	go s.serve()
	t.Cleanup(func() { ln.Close(); db.Close() })
	return s
}

func (s *dbServer) serve() {
	for {
		c, err := s.ln.Accept()
		if err != nil {
			return
		}
		go s.conn(c)
	}
}

func (s *dbServer) conn(c net.Conn) {
	defer c.Close()
	r := bufio.NewReader(c)
	for {
		line, err := r.ReadString('\n')
		if err != nil {
			return
		}
		parts := strings.Split(strings.TrimSuffix(line, "\n"), "\t")
		args := make([]any, len(parts)-1)
		for i, p := range parts[1:] {
			args[i] = p
		}
		var out strings.Builder
		rows, err := s.db.Query(parts[0], args...)
		if err == nil {
			cols, _ := rows.Columns()
			vals := make([]any, len(cols))
			ptrs := make([]any, len(cols))
			for i := range vals {
				ptrs[i] = &vals[i]
			}
			for rows.Next() {
				if err := rows.Scan(ptrs...); err != nil {
					break
				}
				for i, v := range vals {
					if i > 0 {
						out.WriteByte(',')
					}
					fmt.Fprint(&out, v)
				}
				out.WriteByte(';')
			}
			rows.Close()
		}
		if err != nil {
			out.Reset()
			out.WriteString("!" + strings.ReplaceAll(err.Error(), "\n", " "))
		}
		out.WriteByte('\n')
		if _, err := io.WriteString(c, out.String()); err != nil {
			return
		}
	}
}

// wireDriver is a database/sql driver for dbServer: one write and one
// read per statement, like a network database's driver.
type wireDriver struct{ addr string }

func (d wireDriver) Open(string) (driver.Conn, error) {
	c, err := net.Dial("tcp", d.addr)
	if err != nil {
		return nil, err
	}
	return &wireConn{c: c, r: bufio.NewReader(c)}, nil
}

type wireConn struct {
	c net.Conn
	r *bufio.Reader
}

func (c *wireConn) Prepare(string) (driver.Stmt, error) { return nil, errors.New("not supported") }
func (c *wireConn) Close() error                        { return c.c.Close() }
func (c *wireConn) Begin() (driver.Tx, error)           { return nil, errors.New("not supported") }

// roundTrip sends one statement and reads its reply; in pieces, it
// writes the statement and its arguments apart (two socket writes, one
// round trip, as drivers that send protocol messages one by one do).
func (c *wireConn) roundTrip(query string, args []driver.NamedValue, pieces bool) ([][]string, error) {
	var b strings.Builder
	b.WriteString(query)
	if pieces {
		if _, err := io.WriteString(c.c, b.String()); err != nil {
			return nil, err
		}
		b.Reset()
	}
	for _, a := range args {
		fmt.Fprintf(&b, "\t%v", a.Value)
	}
	b.WriteByte('\n')
	if _, err := io.WriteString(c.c, b.String()); err != nil {
		return nil, err
	}
	line, err := c.r.ReadString('\n')
	if err != nil {
		return nil, err
	}
	line = strings.TrimSuffix(line, "\n")
	if strings.HasPrefix(line, "!") {
		return nil, errors.New(line[1:])
	}
	var rows [][]string
	for _, r := range strings.Split(line, ";") {
		if r != "" {
			rows = append(rows, strings.Split(r, ","))
		}
	}
	return rows, nil
}

func (c *wireConn) QueryContext(_ context.Context, q string, args []driver.NamedValue) (driver.Rows, error) {
	rows, err := c.roundTrip(q, args, false)
	if err != nil {
		return nil, err
	}
	return &wireRows{rows: rows}, nil
}

func (c *wireConn) ExecContext(_ context.Context, q string, args []driver.NamedValue) (driver.Result, error) {
	if _, err := c.roundTrip(q, args, true); err != nil {
		return nil, err
	}
	return driver.RowsAffected(1), nil
}

type wireRows struct {
	rows [][]string
	i    int
}

func (r *wireRows) Columns() []string {
	if len(r.rows) == 0 {
		return []string{"v"}
	}
	cols := make([]string, len(r.rows[0]))
	for i := range cols {
		cols[i] = "c" + strconv.Itoa(i)
	}
	return cols
}
func (r *wireRows) Close() error { return nil }
func (r *wireRows) Next(dest []driver.Value) error {
	if r.i >= len(r.rows) {
		return io.EOF
	}
	for i := range dest {
		dest[i] = r.rows[r.i][i]
	}
	r.i++
	return nil
}

// nursery is the application under test, with its own call counters.
type nursery struct {
	db      *sql.DB
	client  *http.Client
	weather string

	listCalls, priceCalls, stockCalls, weatherCalls, orderCalls, refreshCalls atomic.Int64
	refreshOnce                                                               sync.Once
	stop                                                                      chan struct{}
	mux                                                                       *http.ServeMux
	refreshDone                                                               chan struct{}
	entered, gate                                                             chan struct{}
}

//go:noinline
func (n *nursery) listVarieties(ctx context.Context) ([]int, error) {
	n.listCalls.Add(1)
	rows, err := n.db.QueryContext(ctx, "SELECT id FROM varieties WHERE id <= ?", 4)
	if err != nil {
		return nil, err
	}
	defer rows.Close()
	var ids []int
	for rows.Next() {
		var id int
		if err := rows.Scan(&id); err != nil {
			return nil, err
		}
		ids = append(ids, id)
	}
	return ids, rows.Err()
}

//go:noinline
func (n *nursery) priceOf(ctx context.Context, id int) (int, error) {
	n.priceCalls.Add(1)
	var p int
	err := n.db.QueryRowContext(ctx, "SELECT price FROM varieties WHERE id = ?", id).Scan(&p)
	return p, err
}

//go:noinline
func (n *nursery) stockAt(ctx context.Context, id int) (int, error) {
	n.stockCalls.Add(1)
	var s int
	err := n.db.QueryRowContext(ctx, "SELECT stock FROM varieties WHERE id = ?", id).Scan(&s)
	return s, err
}

//go:noinline
func (n *nursery) fetchWeather(ctx context.Context) (string, error) {
	n.weatherCalls.Add(1)
	req, err := http.NewRequestWithContext(ctx, http.MethodGet, n.weather, nil)
	if err != nil {
		return "", err
	}
	resp, err := n.client.Do(req)
	if err != nil {
		return "", err
	}
	defer resp.Body.Close()
	b, err := io.ReadAll(resp.Body)
	return string(b), err
}

//go:noinline
func (n *nursery) insertOrder(ctx context.Context, id, qty int) error {
	n.orderCalls.Add(1)
	_, err := n.db.ExecContext(ctx, "INSERT INTO orders (variety, qty) VALUES (?, ?)", id, qty)
	return err
}

// refreshCache is a background loop that the first stock request starts:
// its queries belong to no request.
//
//go:noinline
func (n *nursery) refreshCache() {
	defer close(n.refreshDone)
	for {
		select {
		case <-n.stop:
			return
		case <-time.After(2 * time.Millisecond):
		}
		n.refreshCalls.Add(1)
		var c int
		_ = n.db.QueryRow("SELECT count(*) FROM varieties").Scan(&c)
	}
}

// catalogue: one list query and a price query per variety (N+1).
func (n *nursery) catalogue(w http.ResponseWriter, r *http.Request) {
	ids, err := n.listVarieties(r.Context())
	if err != nil {
		http.Error(w, err.Error(), 500)
		return
	}
	total := 0
	for _, id := range ids {
		p, err := n.priceOf(r.Context(), id)
		if err != nil {
			http.Error(w, err.Error(), 500)
			return
		}
		total += p
	}
	fmt.Fprintf(w, "%d varieties, %d cents\n", len(ids), total)
}

// stock: three stock queries in errgroup workers and one weather call.
func (n *nursery) stock(w http.ResponseWriter, r *http.Request) {
	n.refreshOnce.Do(func() { go n.refreshCache() })
	g, ctx := errgroup.WithContext(r.Context())
	var sum atomic.Int64
	for id := 1; id <= 3; id++ {
		g.Go(func() error {
			s, err := n.stockAt(ctx, id)
			sum.Add(int64(s))
			return err
		})
	}
	var forecast string
	g.Go(func() error {
		var err error
		forecast, err = n.fetchWeather(ctx)
		return err
	})
	if err := g.Wait(); err != nil {
		http.Error(w, err.Error(), 500)
		return
	}
	fmt.Fprintf(w, "stock %d, %s\n", sum.Load(), forecast)
}

// slow waits at the gate, then asks one price.
func (n *nursery) slow(w http.ResponseWriter, r *http.Request) {
	n.entered <- struct{}{}
	<-n.gate
	if _, err := n.priceOf(r.Context(), 1); err != nil {
		http.Error(w, err.Error(), 500)
	}
}

// order: a POST with a body, one insert.
func (n *nursery) order(w http.ResponseWriter, r *http.Request) {
	body, err := io.ReadAll(r.Body)
	if err != nil {
		http.Error(w, err.Error(), 400)
		return
	}
	id, _ := strconv.Atoi(strings.TrimSpace(string(body)))
	// The response starts before the insert: a socket write of the
	// server right before the driver's, which is still a call.
	w.WriteHeader(http.StatusOK)
	w.(http.Flusher).Flush()
	if err := n.insertOrder(r.Context(), id, 2); err != nil {
		http.Error(w, err.Error(), 500)
		return
	}
	io.WriteString(w, "ok\n")
}

// startNursery starts the database, the weather service and the
// application on the loopback, and returns the application and its URL.
func startNursery(t testing.TB) (*nursery, string) {
	dbs := startDBServer(t)
	connector := &wireConnector{d: wireDriver{addr: dbs.ln.Addr().String()}}
	db := sql.OpenDB(connector)
	db.SetMaxOpenConns(2)
	db.SetMaxIdleConns(2)
	t.Cleanup(func() { db.Close() })

	// The weather service runs in the traced process too: its requests
	// are requests of the trace.
	weather := &http.Server{Handler: http.HandlerFunc(forecast)}
	wln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	go weather.Serve(wln)
	t.Cleanup(func() { weather.Close() })

	n := &nursery{db: db, client: &http.Client{Transport: &http.Transport{MaxIdleConnsPerHost: 8}},
		weather: "http://" + wln.Addr().String() + "/forecast", stop: make(chan struct{}), refreshDone: make(chan struct{}),
		entered: make(chan struct{}), gate: make(chan struct{})}
	mux := http.NewServeMux()
	mux.HandleFunc("GET /catalogue", n.catalogue)
	mux.HandleFunc("GET /stock", n.stock)
	mux.HandleFunc("POST /orders", n.order)
	mux.HandleFunc("GET /slow", n.slow)
	app := &http.Server{Handler: mux}
	aln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	go app.Serve(aln)
	t.Cleanup(func() { app.Close() })
	n.mux = mux
	return n, "http://" + aln.Addr().String()
}

// recordNursery runs the workload under runtime/trace (Go's own
// execution tracer, the reference producer of the format) and returns
// the trace, the application and the requests sent per handler.
func recordNursery(t testing.TB, rounds int) ([]byte, *nursery, map[string]int) {
	n, base := startNursery(t)
	var buf bytes.Buffer
	if err := trace.Start(&buf); err != nil {
		t.Skipf("execution tracer unavailable: %v", err)
	}
	sent := map[string]int{}
	var mu sync.Mutex
	do := func(c *http.Client, method, path, body string) {
		req, _ := http.NewRequest(method, base+path, strings.NewReader(body))
		resp, err := c.Do(req)
		if err != nil {
			t.Error(err)
			return
		}
		io.Copy(io.Discard, resp.Body)
		resp.Body.Close()
		if resp.StatusCode != 200 {
			t.Errorf("%s %s: %s", method, path, resp.Status)
		}
		mu.Lock()
		sent[path]++
		mu.Unlock()
	}
	// Sequential requests on one keep-alive connection, then four clients
	// at once (concurrent requests, and pool waits: two connections).
	seq := &http.Client{Transport: &http.Transport{MaxIdleConnsPerHost: 1}}
	for i := 0; i < rounds; i++ {
		do(seq, "GET", "/catalogue", "")
		do(seq, "GET", "/stock", "")
		do(seq, "POST", "/orders", strconv.Itoa(i%20+1))
	}
	var wg sync.WaitGroup
	for c := 0; c < 4; c++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			cl := &http.Client{Transport: &http.Transport{MaxIdleConnsPerHost: 1}}
			for i := 0; i < rounds; i++ {
				do(cl, "GET", "/catalogue", "")
				do(cl, "GET", "/stock", "")
				do(cl, "POST", "/orders", strconv.Itoa(i%20+1))
			}
		}()
	}
	wg.Wait()
	// Let the background loop query a few times more before the trace ends.
	time.Sleep(10 * time.Millisecond)
	trace.Stop()
	close(n.stop)
	<-n.refreshDone
	return buf.Bytes(), n, sent
}

// forecast is the weather service's handler.
func forecast(w http.ResponseWriter, r *http.Request) {
	time.Sleep(200 * time.Microsecond)
	io.WriteString(w, "sunny")
}

type wireConnector struct{ d wireDriver }

func (c *wireConnector) Connect(context.Context) (driver.Conn, error) { return c.d.Open("") }
func (c *wireConnector) Driver() driver.Driver                        { return c.d }

func loadExecTrace(t testing.TB, data []byte) *traces.Source {
	l := traces.NewLoader(traces.Options{})
	if err := l.Add("trace.out", bytes.NewReader(data)); err != nil {
		t.Fatal(err)
	}
	src, err := l.Source()
	if err != nil {
		t.Fatal(err)
	}
	return src
}

// TestExecTraceNursery checks the attribution of a real execution trace
// recorded by Go's runtime/trace against the application's own counters:
// calls per root cause exactly, calls per request, requests per entry
// point, errgroup workers charged to their request, and the background
// loop started inside a request charged to nothing.
func TestExecTraceNursery(t *testing.T) {
	if testing.Short() {
		t.Skip("records an execution trace of a loopback workload")
	}
	const rounds = 8
	data, n, sent := recordNursery(t, rounds)
	t.Logf("trace %d bytes, %d requests sent, background queries %d", len(data), sent["/catalogue"]+sent["/stock"]+sent["/orders"], n.refreshCalls.Load())
	src := loadExecTrace(t, data)
	if src.Kind != traces.ExecTrace {
		t.Fatalf("kind %v", src.Kind)
	}
	for _, w := range src.Warnings.Strings() {
		t.Log("warning:", w)
	}
	res := attribute.Attribute(callgraph.NewTree(src, callgraph.TreeOptions{}), attribute.NewClassifier(src, attribute.DefaultRules()), attribute.Options{})
	if res.Sampled {
		t.Error("an execution trace is a record, not a sample")
	}
	const pkg = "github.com/culprithq/culprit/attribute_test.(*nursery)."
	want := []struct {
		fn      string
		counter *atomic.Int64
		perReq  float64
		entry   string
	}{
		{"listVarieties", &n.listCalls, 1, "catalogue"},
		{"priceOf", &n.priceCalls, 4, "catalogue"},
		{"stockAt", &n.stockCalls, 3, "stock"},
		{"fetchWeather", &n.weatherCalls, 1, "stock"},
		{"insertOrder", &n.orderCalls, 1, "order"},
	}
	byName := map[string]*attribute.Cause{}
	for _, c := range res.Causes {
		byName[c.Function] = c
		t.Logf("cause %s cost %d calls %d requests %d", c.Function, c.Cost, c.Calls, c.Requests)
	}
	for _, w := range want {
		c := byName[pkg+w.fn]
		if c == nil {
			t.Errorf("%s is not a root cause", w.fn)
			continue
		}
		if c.Calls != w.counter.Load() {
			t.Errorf("%s: %d calls, the application counted %d", w.fn, c.Calls, w.counter.Load())
		}
		if c.CallsPerRequest == nil || c.CallsPerRequest.Median != w.perReq || c.CallsPerRequest.Max != w.perReq {
			t.Errorf("%s: calls per request %+v, want %v in every request", w.fn, c.CallsPerRequest, w.perReq)
		}
		if len(c.EntryPoints) != 1 || !strings.HasSuffix(c.EntryPoints[0].Entry, "."+w.entry) {
			t.Errorf("%s: entry points %+v, want only %s", w.fn, c.EntryPoints, w.entry)
		}
	}
	for _, c := range res.Causes {
		if strings.Contains(c.Function, "refreshCache") {
			t.Errorf("the background loop was charged: %+v", c)
		}
	}
	if n.refreshCalls.Load() == 0 {
		t.Error("the background loop never queried: the test proves nothing about it")
	}
	entries := map[string]int{}
	for _, e := range res.Entries {
		entries[e.Entry[strings.LastIndexByte(e.Entry, '.')+1:]] = e.Requests
	}
	sent["/forecast"] = int(n.weatherCalls.Load())
	t.Logf("entries %v", entries)
	for path, entry := range map[string]string{"/catalogue": "catalogue", "/stock": "stock", "/orders": "order", "/forecast": "forecast"} {
		if entries[entry] != sent[path] {
			t.Errorf("entry %s: %d requests, %d were sent (entries %v)", entry, entries[entry], sent[path], entries)
		}
	}
	if all := sent["/catalogue"] + sent["/stock"] + sent["/orders"] + sent["/forecast"]; res.Totals.Requests != all {
		t.Errorf("%d requests, %d were sent", res.Totals.Requests, all)
	}
	// Keep-alive: the sequential client's connection served its 3×rounds
	// requests one after another on one goroutine.
	perConn := map[string]int{}
	for _, key := range src.Requests[1:] {
		perConn[key[:strings.LastIndexByte(key, '.')]]++
	}
	most := 0
	for _, k := range perConn {
		most = max(most, k)
	}
	if most < 3*rounds {
		t.Errorf("no connection goroutine served %d requests in a row: %v", 3*rounds, perConn)
	}
	// Pool waits (two connections for up to seven goroutines) are their
	// own detail, with no calls.
	var poolWait int64
	for _, c := range res.Causes {
		for _, d := range c.Statements {
			if d.Kind == attribute.KindConnection {
				poolWait += d.Cost
				if d.Calls != 0 {
					t.Errorf("%s: a connection wait counted %d calls", c.Function, d.Calls)
				}
			}
		}
	}
	if poolWait == 0 {
		t.Error("no connection wait, though seven goroutines share two connections")
	}
	// The errgroup workers wait together: their share of the wall clock
	// is less than their summed wait; the shares never exceed the waits.
	wall := attribute.Attribute(callgraph.NewTree(src, callgraph.TreeOptions{}), attribute.NewClassifier(src, attribute.DefaultRules()), attribute.Options{Value: "wall"})
	for _, c := range wall.Causes {
		if w := byName[c.Function]; w != nil && c.Cost > w.Cost {
			t.Errorf("%s: wall-clock share %d above its summed wait %d", c.Function, c.Cost, w.Cost)
		}
	}
	if c, w := causeNamed(wall, "stockAt"), byName[pkg+"stockAt"]; c == nil || w == nil || c.Cost >= w.Cost {
		t.Errorf("stockAt: wall-clock share %+v not below the summed wait of three concurrent workers", c)
	}
}

// TestExecTraceCutRequests records a trace that starts while one request
// waits inside its handler and stops while another does: both are cut
// by the trace window and left out, with a warning; the requests in
// between, on one keep-alive connection, are counted whole.
func TestExecTraceCutRequests(t *testing.T) {
	if testing.Short() {
		t.Skip("records an execution trace of a loopback workload")
	}
	n, base := startNursery(t)
	get := func(c *http.Client, path string, done chan<- struct{}) {
		resp, err := c.Get(base + path)
		if err == nil {
			io.Copy(io.Discard, resp.Body)
			resp.Body.Close()
		} else {
			t.Error(err)
		}
		if done != nil {
			close(done)
		}
	}
	aDone, bDone := make(chan struct{}), make(chan struct{})
	go get(&http.Client{Transport: &http.Transport{}}, "/slow", aDone)
	<-n.entered
	var buf bytes.Buffer
	if err := trace.Start(&buf); err != nil {
		t.Skipf("execution tracer unavailable: %v", err)
	}
	n.gate <- struct{}{}
	<-aDone
	keep := &http.Client{Transport: &http.Transport{MaxIdleConnsPerHost: 1}}
	for range 3 {
		get(keep, "/catalogue", nil)
	}
	go get(&http.Client{Transport: &http.Transport{}}, "/slow", bDone)
	<-n.entered
	trace.Stop()
	n.gate <- struct{}{}
	<-bDone

	src := loadExecTrace(t, buf.Bytes())
	res := attribute.Attribute(callgraph.NewTree(src, callgraph.TreeOptions{}), attribute.NewClassifier(src, attribute.DefaultRules()), attribute.Options{})
	if res.Totals.Requests != 3 {
		t.Errorf("%d requests, want the 3 whole ones", res.Totals.Requests)
	}
	for _, e := range res.Entries {
		if strings.HasSuffix(e.Entry, ".slow") {
			t.Errorf("a cut request was counted: %+v", e)
		}
	}
	// One keep-alive connection: its goroutine served all three.
	conns := map[string]int{}
	for _, key := range src.Requests[1:] {
		conns[key[:strings.LastIndexByte(key, '.')]]++
	}
	if len(conns) != 1 {
		t.Errorf("requests on %d connection goroutines, want 1 (keep-alive): %v", len(conns), src.Requests)
	}
	if c := causeNamed(res, "priceOf"); c == nil || c.Calls != 12 {
		t.Errorf("priceOf: %+v, want 12 calls (4 in each whole request)", c)
	}
	warned := false
	for _, w := range src.Warnings.Strings() {
		warned = warned || strings.Contains(w, "2 requests cut by the trace window")
	}
	if !warned {
		t.Errorf("no warning about the 2 cut requests: %v", src.Warnings.Strings())
	}
}

func causeNamed(res *attribute.Result, suffix string) *attribute.Cause {
	for _, c := range res.Causes {
		if strings.HasSuffix(c.Function, "."+suffix) {
			return c
		}
	}
	return nil
}

var benchTrace struct {
	once sync.Once
	data []byte
}

// BenchmarkExecTrace ranks an execution trace of the nursery workload
// (recorded once by runtime/trace) beside the floor: the library's own
// ReadEvent loop over the same bytes. The target is rank at most 1.3×
// the loop (README, "Go execution traces"). The trace is about 1.5 MB;
// CULPRIT_BENCH_TRACE_MB=100 records one of about that many megabytes
// (a minute of recording), and CULPRIT_BENCH_TRACE=FILE reads one.
func BenchmarkExecTrace(b *testing.B) {
	benchTrace.once.Do(func() {
		if f := os.Getenv("CULPRIT_BENCH_TRACE"); f != "" {
			data, err := os.ReadFile(f)
			if err != nil {
				b.Fatal(err)
			}
			benchTrace.data = data
			return
		}
		rounds := 150
		if mb, err := strconv.Atoi(os.Getenv("CULPRIT_BENCH_TRACE_MB")); err == nil && mb > 0 {
			rounds = 100 * mb // about 10 KB a round
		}
		benchTrace.data, _, _ = recordNursery(b, rounds)
	})
	data := benchTrace.data
	b.Logf("trace of %d bytes", len(data))
	b.Run("ReadEvent", func(b *testing.B) {
		b.SetBytes(int64(len(data)))
		for b.Loop() {
			r, err := xtrace.NewReader(bytes.NewReader(data))
			if err != nil {
				b.Fatal(err)
			}
			for {
				if _, err := r.ReadEvent(); err != nil {
					if err != io.EOF {
						b.Fatal(err)
					}
					break
				}
			}
		}
	})
	b.Run("Load", func(b *testing.B) {
		for b.Loop() {
			l := traces.NewLoader(traces.Options{SkipDigest: true})
			if err := l.Add("trace.out", bytes.NewReader(data)); err != nil {
				b.Fatal(err)
			}
			if _, err := l.Source(); err != nil {
				b.Fatal(err)
			}
		}
	})
	b.Run("Rank", func(b *testing.B) {
		b.SetBytes(int64(len(data)))
		for b.Loop() {
			l := traces.NewLoader(traces.Options{SkipDigest: true})
			if err := l.Add("trace.out", bytes.NewReader(data)); err != nil {
				b.Fatal(err)
			}
			src, err := l.Source()
			if err != nil {
				b.Fatal(err)
			}
			attribute.Attribute(callgraph.NewTree(src, callgraph.TreeOptions{}), attribute.NewClassifier(src, attribute.DefaultRules()), attribute.Options{})
		}
	})
}

// TestExecTraceLongWait records a request that waits longer than a
// generation of the trace (the runtime starts one about every second and
// restates every goroutine's status in it): the wait is read whole.
func TestExecTraceLongWait(t *testing.T) {
	if testing.Short() {
		t.Skip("records a 1.3 s execution trace")
	}
	n, base := startNursery(t)
	var buf bytes.Buffer
	if err := trace.Start(&buf); err != nil {
		t.Skipf("execution tracer unavailable: %v", err)
	}
	done := make(chan struct{})
	go func() {
		defer close(done)
		resp, err := http.Get(base + "/slow")
		if err != nil {
			t.Error(err)
			return
		}
		io.Copy(io.Discard, resp.Body)
		resp.Body.Close()
	}()
	<-n.entered
	time.Sleep(1200 * time.Millisecond)
	n.gate <- struct{}{}
	<-done
	trace.Stop()

	src := loadExecTrace(t, buf.Bytes())
	res := attribute.Attribute(callgraph.NewTree(src, callgraph.TreeOptions{}), attribute.NewClassifier(src, attribute.DefaultRules()), attribute.Options{})
	if res.Totals.Requests != 1 {
		t.Fatalf("%d requests, want 1", res.Totals.Requests)
	}
	// The wait at the gate is the request's own (no boundary: other cost).
	if res.Totals.Other < int64(1200*time.Millisecond) {
		t.Errorf("other cost %v, want the 1.2 s wait at the gate", time.Duration(res.Totals.Other))
	}
	if c := causeNamed(res, "priceOf"); c == nil || c.Calls != 1 {
		t.Errorf("priceOf: %+v, want 1 call", c)
	}
}

// TestExecTraceGRPC reads gRPC calls served by grpc-go (its own server
// and client, over the loopback) as requests: one per call, each with the
// database call its handler makes.
func TestExecTraceGRPC(t *testing.T) {
	if testing.Short() {
		t.Skip("records an execution trace of a loopback workload")
	}
	n, _ := startNursery(t)
	srv := grpc.NewServer()
	srv.RegisterService(&grpc.ServiceDesc{
		ServiceName: "nursery.Seeds",
		HandlerType: (*any)(nil),
		Methods: []grpc.MethodDesc{{MethodName: "Price", Handler: func(_ any, ctx context.Context, dec func(any) error, _ grpc.UnaryServerInterceptor) (any, error) {
			if err := dec(new(emptypb.Empty)); err != nil {
				return nil, err
			}
			_, err := n.priceOf(ctx, 2)
			return new(emptypb.Empty), err
		}}},
	}, n)
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	go srv.Serve(ln)
	t.Cleanup(srv.Stop)
	conn, err := grpc.NewClient(ln.Addr().String(), grpc.WithTransportCredentials(insecure.NewCredentials()))
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { conn.Close() })
	call := func() {
		if err := conn.Invoke(context.Background(), "/nursery.Seeds/Price", new(emptypb.Empty), new(emptypb.Empty)); err != nil {
			t.Fatal(err)
		}
	}
	call() // connect before the trace
	var buf bytes.Buffer
	if err := trace.Start(&buf); err != nil {
		t.Skipf("execution tracer unavailable: %v", err)
	}
	before := n.priceCalls.Load()
	for range 5 {
		call()
	}
	trace.Stop()

	src := loadExecTrace(t, buf.Bytes())
	res := attribute.Attribute(callgraph.NewTree(src, callgraph.TreeOptions{}), attribute.NewClassifier(src, attribute.DefaultRules()), attribute.Options{})
	if res.Totals.Requests != 5 {
		t.Errorf("%d requests, want the 5 calls", res.Totals.Requests)
	}
	if c := causeNamed(res, "priceOf"); c == nil || c.Calls != n.priceCalls.Load()-before {
		t.Errorf("priceOf: %+v, want the %d calls it counted", c, n.priceCalls.Load()-before)
	}
}
