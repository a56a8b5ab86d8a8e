package main

import (
	"bytes"
	"encoding/json"
	"io"
	"net"
	"net/http"
	"os"
	"path/filepath"
	"runtime/trace"
	"strings"
	"testing"
	"time"
)

// seedPrices is the application's outbound call: its own counter is
// the truth the trace's call count is checked against.
type seedShop struct {
	prices string
	client *http.Client
	calls  int
}

//go:noinline
func (s *seedShop) fetchSeedPrices() error {
	s.calls++
	resp, err := s.client.Get(s.prices)
	if err != nil {
		return err
	}
	io.Copy(io.Discard, resp.Body)
	return resp.Body.Close()
}

func (s *seedShop) seeds(w http.ResponseWriter, r *http.Request) {
	if err := s.fetchSeedPrices(); err != nil {
		http.Error(w, err.Error(), 500)
		return
	}
	io.WriteString(w, "seeds\n")
}

// recordSeedShop records, with Go's runtime/trace, n requests to a
// loopback service whose handler calls another loopback service once.
func recordSeedShop(t *testing.T, n int) (string, *seedShop) {
	t.Helper()
	listen := func(h http.HandlerFunc) string {
		ln, err := net.Listen("tcp", "127.0.0.1:0")
		if err != nil {
			t.Fatal(err)
		}
		srv := &http.Server{Handler: h}
		go srv.Serve(ln)
		t.Cleanup(func() { srv.Close() })
		return "http://" + ln.Addr().String()
	}
	prices := listen(func(w http.ResponseWriter, r *http.Request) {
		time.Sleep(100 * time.Microsecond)
		io.WriteString(w, "12 cents")
	})
	shop := &seedShop{prices: prices + "/prices", client: &http.Client{Transport: &http.Transport{}}}
	base := listen(shop.seeds)
	var buf bytes.Buffer
	if err := trace.Start(&buf); err != nil {
		t.Skipf("execution tracer unavailable: %v", err)
	}
	c := &http.Client{Transport: &http.Transport{}}
	for range n {
		resp, err := c.Get(base + "/seeds")
		if err != nil {
			trace.Stop()
			t.Fatal(err)
		}
		io.Copy(io.Discard, resp.Body)
		resp.Body.Close()
	}
	trace.Stop()
	path := filepath.Join(t.TempDir(), "trace.out")
	if err := os.WriteFile(path, buf.Bytes(), 0o644); err != nil {
		t.Fatal(err)
	}
	return path, shop
}

// TestExecTraceCommands runs every command on a real execution trace.
func TestExecTraceCommands(t *testing.T) {
	if testing.Short() {
		t.Skip("records an execution trace of a loopback service")
	}
	const n = 12
	path, shop := recordSeedShop(t, n)
	code, out, errs := runTest(t, "", "rank", "--format", "json", path)
	if code != exitOK {
		t.Fatalf("rank: exit %d: %s", code, errs)
	}
	var doc struct {
		Totals struct {
			Requests int   `json:"requests"`
			Network  int64 `json:"network"`
		} `json:"totals"`
		RootCauses []struct {
			Function string `json:"function"`
			Calls    int64  `json:"calls"`
		} `json:"rootCauses"`
	}
	if err := json.Unmarshal([]byte(out), &doc); err != nil {
		t.Fatal(err)
	}
	// Requests: the shop's n and the price service's n (it runs in the
	// traced process too).
	if doc.Totals.Requests != 2*n || doc.Totals.Network == 0 {
		t.Errorf("totals %+v, want %d requests and network cost", doc.Totals, 2*n)
	}
	if len(doc.RootCauses) != 1 || !strings.HasSuffix(doc.RootCauses[0].Function, ".fetchSeedPrices") ||
		doc.RootCauses[0].Calls != int64(shop.calls) {
		t.Errorf("root causes %+v, want fetchSeedPrices with the %d calls it counted", doc.RootCauses, shop.calls)
	}
	for _, f := range []string{"text", "markdown", "html", "csv"} {
		if code, out, errs := runTest(t, "", "rank", "--format", f, path); code != exitOK || !strings.Contains(out, "fetchSeedPrices") {
			t.Errorf("rank --format %s: exit %d: %s", f, code, errs)
		}
	}
	if code, out, errs := runTest(t, "", "explain", "fetchSeedPrices", path); code != exitOK || !strings.Contains(out, "calls") {
		t.Errorf("explain: exit %d: %s%s", code, out, errs)
	}
	if code, out, errs := runTest(t, "", "graph", path); code != exitOK || !strings.Contains(out, "fetchSeedPrices") {
		t.Errorf("graph: exit %d: %s", code, errs)
	}
	dir := t.TempDir()
	a, b, m := filepath.Join(dir, "a.json"), filepath.Join(dir, "b.json"), filepath.Join(dir, "m.json")
	for _, s := range []string{a, b} {
		if code, _, errs := runTest(t, "", "rank", "--save", s, path); code != exitOK {
			t.Fatalf("rank --save: exit %d: %s", code, errs)
		}
	}
	// Two snapshots of the same trace hold the same data: merge refuses
	// to add them up.
	if code, _, errs := runTest(t, "", "merge", a, b, "-o", m); code != exitError || !strings.Contains(errs, "twice") {
		t.Errorf("merge of the same data: exit %d: %s", code, errs)
	}
	if code, _, errs := runTest(t, "", "merge", a, "-o", m); code != exitOK {
		t.Errorf("merge: exit %d: %s", code, errs)
	}
	code, out, errs = runTest(t, "", "diff", a, m)
	if code != exitOK || !strings.Contains(out, "per-request") {
		t.Errorf("diff: exit %d: %s%s", code, out, errs)
	}
}

// TestExecTraceLatencyCommands runs the latency views on a real execution
// trace: the JSON matches its schema, each route counts the requests sent
// and its critical paths add up to its latency, the shop's call to the
// price service is on its path, explain --latency lists a request's path,
// and a latency snapshot compares with the trace it was made from.
func TestExecTraceLatencyCommands(t *testing.T) {
	if testing.Short() {
		t.Skip("records an execution trace of a loopback service")
	}
	const n = 12
	path, shop := recordSeedShop(t, n)
	code, out, errs := runTest(t, "", "latency", "--format", "json", "--limit", "0", path)
	if code != exitOK {
		t.Fatalf("latency: exit %d: %s", code, errs)
	}
	validateDocument(t, compileSchemas(t), "latency of an execution trace", out)
	var doc struct {
		Requests int
		Entries  []struct {
			Entry    string
			Requests int
			Causes   []struct {
				Function     string
				Kind         string
				CriticalPath struct {
					MeanPerRequest int64
					Share          float64
				}
			}
		}
	}
	if err := json.Unmarshal([]byte(out), &doc); err != nil {
		t.Fatal(err)
	}
	if doc.Requests != 2*n || len(doc.Entries) != 2 {
		t.Fatalf("%d requests in %d entries, want %d in the shop's and the price service's", doc.Requests, len(doc.Entries), 2*n)
	}
	var called bool
	for _, e := range doc.Entries {
		var share float64
		for _, c := range e.Causes {
			share += c.CriticalPath.Share
			if strings.HasSuffix(c.Function, ".fetchSeedPrices") && c.Kind == "network" && strings.HasSuffix(e.Entry, ".seeds") {
				called = c.CriticalPath.MeanPerRequest >= 100_000 // the price service sleeps 100µs
			}
		}
		if e.Requests != n || share < 0.9999 || share > 1.0001 {
			t.Errorf("%s: %d requests, shares add up to %v; want %d and 1", e.Entry, e.Requests, share, n)
		}
	}
	if !called || shop.calls != n {
		t.Errorf("the call to the price service (%d made) is not on the shop's critical path: %s", shop.calls, out)
	}
	for _, f := range []string{"text", "markdown", "html", "csv"} {
		if code, out, errs := runTest(t, "", "latency", "--format", f, path); code != exitOK || !strings.Contains(out, "fetchSeedPrices") {
			t.Errorf("latency --format %s: exit %d: %s", f, code, errs)
		}
	}
	code, out, errs = runTest(t, "", "explain", "--latency", "--slowest", "1", "seeds", path)
	onPath := false // a line of the path: the call, charged to the shop's function
	for _, line := range strings.Split(out, "\n") {
		onPath = onPath || strings.Contains(line, "[network → ") && strings.Contains(line, "(*seedShop).fetchSeedPrices; at +")
	}
	if code != exitOK || strings.Count(out, "\nrequest ") != 1 || !onPath {
		t.Errorf("explain --latency: exit %d: %s%s", code, out, errs)
	}
	snap := filepath.Join(t.TempDir(), "latency.json")
	if code, _, errs := runTest(t, "", "latency", "--save", snap, path); code != exitOK {
		t.Fatalf("latency --save: exit %d: %s", code, errs)
	}
	code, out, errs = runTest(t, "", "diff", "--latency", "--fail-on", "10%", snap, path)
	if code != exitOK || !strings.Contains(out, "fetchSeedPrices") {
		t.Errorf("diff --latency of a trace against its own snapshot: exit %d: %s%s", code, out, errs)
	}
}
