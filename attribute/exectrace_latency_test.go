package attribute_test

import (
	"bytes"
	"strings"
	"testing"

	"github.com/culprithq/culprit/attribute"
	"github.com/culprithq/culprit/callgraph"
	"github.com/culprithq/culprit/traces"
)

// execLatency reads an execution trace with timing and computes its
// latency view, keeping every request's critical path; it also ranks the
// same trace read as rank reads it.
func execLatency(t *testing.T, data []byte) (*attribute.LatencyResult, *attribute.Result) {
	t.Helper()
	l := traces.NewLoader(traces.Options{Timing: true})
	if err := l.Add("trace.out", bytes.NewReader(data)); err != nil {
		t.Fatal(err)
	}
	src, err := l.Source()
	if err != nil {
		t.Fatal(err)
	}
	cls := attribute.NewClassifier(src, attribute.DefaultRules())
	res, err := attribute.Latency(callgraph.NewTree(src, callgraph.TreeOptions{Keep: cls.Keep}), cls, attribute.LatencyOptions{Slowest: 1 << 20})
	if err != nil {
		t.Fatal(err)
	}
	plain := loadExecTrace(t, data)
	rank := attribute.Attribute(callgraph.NewTree(plain, callgraph.TreeOptions{}), attribute.NewClassifier(plain, attribute.DefaultRules()), attribute.Options{})
	return res, rank
}

// TestExecTraceLatency checks the latency view of a real execution trace
// of the nursery workload (recorded by Go's runtime/trace) against what
// the application knows: its requests per handler, critical paths that
// add up to each request's latency, sequential queries wholly on the
// path, concurrent errgroup workers overlapping, and the goroutines that
// no request waited for (a background loop started by a request, net/http's
// background read of the connection) charged nothing.
func TestExecTraceLatency(t *testing.T) {
	if testing.Short() {
		t.Skip("records an execution trace of a loopback workload")
	}
	data, n, sent := recordNursery(t, 6)
	res, rank := execLatency(t, data)
	if res.Source != traces.ExecTrace {
		t.Errorf("source %v", res.Source)
	}
	entries := map[string]*attribute.LatencyEntry{}
	for _, e := range res.Entries {
		entries[e.Entry[strings.LastIndexByte(e.Entry, '.')+1:]] = e
		for _, c := range e.Causes {
			t.Logf("%s: %-11s %s path %d summed %d", e.Entry, c.Kind, c.Function, c.Path, c.Summed)
		}
	}
	// Requests per handler: those the clients sent (the weather service's
	// are the nursery's calls to it).
	sent["/forecast"] = int(n.weatherCalls.Load())
	for path, entry := range map[string]string{"/catalogue": "catalogue", "/stock": "stock", "/orders": "order", "/forecast": "forecast"} {
		if e := entries[entry]; e == nil || e.Requests != sent[path] {
			t.Errorf("%s: %v requests, %d were sent", entry, e, sent[path])
		}
	}
	if want := rank.Totals.Requests; res.Requests != want {
		t.Errorf("%d requests, rank counts %d", res.Requests, want)
	}

	// Each request's critical path adds up to its latency, and each entry
	// point's causes to the sum of its latencies.
	for _, e := range res.Entries {
		var sum int64
		for _, c := range e.Causes {
			sum += c.Path
			if c.Path > c.Summed {
				t.Errorf("%s %s: %d on the path, above its summed %d", e.Entry, c.Function, c.Path, c.Summed)
			}
		}
		if sum != e.Latency {
			t.Errorf("%s: critical paths add up to %d, the latencies to %d", e.Entry, sum, e.Latency)
		}
		if len(e.Slowest) != e.Requests {
			t.Fatalf("%s: %d critical paths for %d requests", e.Entry, len(e.Slowest), e.Requests)
		}
		for _, rp := range e.Slowest {
			if on := onPath(rp.Root); on != rp.Latency || rp.Latency <= 0 {
				t.Errorf("%s request %s: pieces add up to %d, latency %d", e.Entry, rp.Request, on, rp.Latency)
			}
			if rp.Root.Function != e.Entry || rp.Root.Kind != attribute.KindRunning {
				t.Errorf("%s request %s: root %s (%s), want the entry point, running", e.Entry, rp.Request, rp.Root.Function, rp.Root.Kind)
			}
		}
	}

	// The catalogue runs its five queries one after another on the
	// request's goroutine: all their time is on the path, and it is the
	// wait that rank measures for them (outside pool waits).
	cat := entries["catalogue"]
	for _, fn := range []string{"listVarieties", "priceOf"} {
		c := latencyCause(cat, fn, attribute.KindDatabase)
		r := causeNamed(rank, fn)
		if c == nil || r == nil {
			t.Fatalf("%s: latency %+v, rank %+v", fn, c, r)
		}
		wait := r.Cost
		for _, d := range r.Statements {
			if d.Kind == attribute.KindConnection {
				wait -= d.Cost
			}
		}
		if c.Path != c.Summed || c.Requests != cat.Requests {
			t.Errorf("%s: %d on the path of %d requests, %d summed: sequential queries are all on the path of every request", fn, c.Path, c.Requests, c.Summed)
		}
		// Rank also counts the waits of database/sql's goroutine that
		// watches the query's context, if it ever waits; nothing waits for it.
		if d := float64(c.Path - wait); d > 0.02*float64(wait) || d < -0.02*float64(wait) {
			t.Errorf("%s: %d on the critical path, rank's wait %d: want them within 2%%", fn, c.Path, wait)
		}
	}

	// The stock handler waits for four errgroup workers at once: what is
	// on its path is less than what they spent, and every call on the
	// path is a worker's.
	st := entries["stock"]
	var path, summed int64
	for _, c := range st.Causes {
		switch c.Kind {
		case attribute.KindDatabase, attribute.KindNetwork, attribute.KindConnection:
			if !strings.HasSuffix(c.Function, ".stockAt") && !strings.HasSuffix(c.Function, ".fetchWeather") {
				t.Errorf("stock: call of %s on the path; only the workers call", c.Function)
			}
			path += c.Path
			summed += c.Summed
		}
	}
	if path == 0 || path >= summed {
		t.Errorf("stock: the workers' calls have %d on the path, %d summed: want some, and less than summed", path, summed)
	}
	if w := latencyCause(st, "fetchWeather", attribute.KindNetwork); w == nil || w.Path == 0 {
		t.Errorf("stock: the weather call never on the path: %+v", w)
	}

	// Nothing waited for the background loop, nor for net/http's read of
	// the next request beside the order handler.
	for _, e := range res.Entries {
		for _, c := range e.Causes {
			if strings.Contains(c.Function, "refreshCache") {
				t.Errorf("%s: the background loop is on the path: %+v", e.Entry, c)
			}
		}
	}
	if n.refreshCalls.Load() == 0 {
		t.Error("the background loop never queried: the test proves nothing about it")
	}
	for _, c := range entries["order"].Causes {
		if c.Kind == attribute.KindNetwork {
			t.Errorf("order: network time on the path: %+v", c)
		}
	}
	if c := latencyCause(entries["order"], "insertOrder", attribute.KindDatabase); c == nil || c.Requests != entries["order"].Requests {
		t.Errorf("order: the insert is not on every request's path: %+v", c)
	}
	// The weather service sleeps in its handler: a wait that is no call,
	// the handler's own (application).
	if c := latencyCause(entries["forecast"], "forecast", attribute.KindApplication); c == nil || c.Path < int64(entries["forecast"].Requests)*200_000 {
		t.Errorf("forecast: its 200µs sleeps are not on the path: %+v", c)
	}
}

// onPath sums the time on the path of a critical-path tree.
func onPath(s *attribute.PathSpan) int64 {
	sum := s.OnPath
	for _, c := range s.Children {
		sum += onPath(c)
	}
	return sum
}

func latencyCause(e *attribute.LatencyEntry, suffix string, kind attribute.Kind) *attribute.LatencyCause {
	if e == nil {
		return nil
	}
	for _, c := range e.Causes {
		if c.Kind == kind && strings.HasSuffix(c.Function, "."+suffix) {
			return c
		}
	}
	return nil
}
