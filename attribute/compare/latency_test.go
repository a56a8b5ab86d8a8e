package compare

import (
	"bytes"
	"fmt"
	"math/rand/v2"
	"reflect"
	"strings"
	"testing"

	"github.com/culprithq/culprit/attribute/internal/testinput"

	"github.com/culprithq/culprit/attribute"
)

// plantsBuild makes n requests of GET /plants/{id} like plantsRequest,
// with jitter: the stock query lasts stock ms (±10%), the others vary too.
func plantsBuild(n int, stock float64, seed uint64) string {
	rng := rand.New(rand.NewPCG(seed, 3))
	j := func(x float64) int64 { return int64(x * (0.9 + 0.2*rng.Float64()) * 1000) } // µs
	var b strings.Builder
	for i := range n {
		st, ph, cr := j(stock), j(30), j(10)
		q := int64(10_000)
		end := q + max(st, ph)
		callEnd := end + 2000 + cr
		appEnd := callEnd + 3000
		b.WriteString(otlpLineMicros("greenhouse", fmt.Sprintf("%x%04x", seed, i), []tspan{
			{ID: "1", Name: "GET /plants/{id}", Kind: testinput.KindServer, Start: 0, End: appEnd + 5000,
				Attrs: map[string]string{"http.route": "/plants/{id}", "http.request.method": "GET"}},
			{ID: "2", Parent: "1", Name: "Get", Kind: testinput.KindInternal, Start: 5000, End: appEnd,
				Attrs: map[string]string{"code.namespace": "example.com/greenhouse/catalog.(*Service)", "code.function": "Get"}},
			testinput.DBSpan("3", "2", q, q+st, "SELECT * FROM stock WHERE plant = 1"),
			testinput.DBSpan("4", "2", q, q+ph, "SELECT * FROM photos WHERE plant = 1"),
			{ID: "6", Parent: "2", Name: "POST", Kind: testinput.KindClient, Start: end + 2000, End: callEnd,
				Attrs: map[string]string{"http.request.method": "POST", "server.address": "rates.carrier.test"}},
		}))
	}
	return b.String()
}

// otlpLineMicros is otlpLine with span times in µs.
func otlpLineMicros(svc, traceID string, spans []tspan) string {
	for i := range spans {
		spans[i].Start, spans[i].End = spans[i].Start*1000, spans[i].End*1000
	}
	return testinput.Line(svc, traceID, spans)
}

func latencySnapshotOf(t *testing.T, jsonl string) *LatencySnapshot {
	t.Helper()
	tree, cls := loadSpans(t, jsonl, true)
	res, err := attribute.Latency(tree, cls, attribute.LatencyOptions{Vectors: true})
	if err != nil {
		t.Fatal(err)
	}
	s, err := NewLatencySnapshot(res)
	if err != nil {
		t.Fatal(err)
	}
	return s
}

// TestCompareLatencyRegression: the candidate's stock query takes 60 ms
// instead of 40 (the photos query, 30 ms, runs beside it): the route's
// p95 and the database time on the critical path regress; the
// application's own time and the carrier call do not.
func TestCompareLatencyRegression(t *testing.T) {
	base := latencySnapshotOf(t, plantsBuild(60, 40, 1))
	cand := latencySnapshotOf(t, plantsBuild(60, 60, 2))
	c := CompareLatency(base, cand, CompareOptions{Seed: 1})
	if len(c.Routes) != 1 || c.Routes[0].Verdict != OutcomeRegressed {
		t.Fatalf("routes: %+v", c.Routes)
	}
	r := c.Routes[0]
	if *r.P95.RelLo <= 0.05 || *r.P95.RelativeChange < 0.2 || *r.P95.RelativeChange > 0.5 {
		t.Errorf("p95 change %v [%v, %v]", *r.P95.RelativeChange, *r.P95.RelLo, *r.P95.RelHi)
	}
	verdicts := map[attribute.Kind]Outcome{}
	for _, ch := range c.Causes.Changes {
		verdicts[ch.Kind] = ch.Verdict
		if !strings.Contains(ch.Function, "in /plants/{id}") {
			t.Errorf("change %q does not name its entry point", ch.Function)
		}
	}
	if verdicts[attribute.KindDatabase] != OutcomeRegressed {
		t.Errorf("database verdict %s, want regressed: %+v", verdicts[attribute.KindDatabase], c.Causes.Changes)
	}
	if v := verdicts[attribute.KindNetwork]; v == OutcomeRegressed || v == OutcomeImproved {
		t.Errorf("network verdict %s, want no significant change", v)
	}
	if len(c.Gate()) < 2 {
		t.Errorf("gate: %+v, want the route and the database cause", c.Gate())
	}
}

// TestCompareLatencySameBuild: two samples of the same build (different
// seeds) — no verdict may say regressed or improved.
func TestCompareLatencySameBuild(t *testing.T) {
	base := latencySnapshotOf(t, plantsBuild(60, 40, 11))
	cand := latencySnapshotOf(t, plantsBuild(60, 40, 12))
	c := CompareLatency(base, cand, CompareOptions{Seed: 1})
	for _, r := range c.Routes {
		if r.Verdict == OutcomeRegressed || r.Verdict == OutcomeImproved {
			t.Errorf("route %s: %s", r.Entry, r.Verdict)
		}
	}
	if g := c.Gate(); len(g) != 0 {
		t.Errorf("gate tripped on the same build: %+v", g)
	}
}

// TestLatencySnapshotRoundTrip: a written and read snapshot compares
// exactly as the one in memory.
func TestLatencySnapshotRoundTrip(t *testing.T) {
	base := latencySnapshotOf(t, plantsBuild(30, 40, 21))
	cand := latencySnapshotOf(t, plantsBuild(30, 50, 22))
	var buf bytes.Buffer
	if err := base.Write(&buf); err != nil {
		t.Fatal(err)
	}
	read, err := ReadLatencySnapshot("base.json", &buf)
	if err != nil {
		t.Fatal(err)
	}
	a, b := CompareLatency(base, cand, CompareOptions{Seed: 5}), CompareLatency(read, cand, CompareOptions{Seed: 5})
	a.Causes.Base.Inputs, b.Causes.Base.Inputs = nil, nil
	if !reflect.DeepEqual(a.Routes, b.Routes) || !reflect.DeepEqual(a.Causes.Changes, b.Causes.Changes) {
		t.Errorf("comparison differs after a round trip")
	}
	if _, err := ReadLatencySnapshot("x.json", strings.NewReader(`{"schema":"culprit.snapshot/v1"}`)); err == nil || !strings.Contains(err.Error(), "latency --save") {
		t.Errorf("wrong schema: %v", err)
	}
}
