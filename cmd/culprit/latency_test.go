package main

import (
	"encoding/json"
	"strconv"
	"strings"
	"testing"
	"unicode/utf8"
)

// TestLatencyCommand runs culprit latency on the demo traces in every
// format and checks the JSON contract: per entry point the latency
// quantiles and the tail, per cause the critical-path and summed time,
// the pieces of each entry adding up to its latency (shares sum to 1).
func TestLatencyCommand(t *testing.T) {
	const in = "demo/greenhouse-v42.traces.jsonl.gz"
	for _, f := range []string{"text", "markdown", "csv", "html"} {
		if code, out, errOut := runTest(t, "", "latency", "--format", f, in); code != exitOK || out == "" {
			t.Errorf("--format %s: exit %d: %s", f, code, errOut)
		}
	}
	code, out, errOut := runTest(t, "", "latency", "--format", "json", "--limit", "0", in)
	if code != exitOK {
		t.Fatalf("exit %d: %s", code, errOut)
	}
	var doc struct {
		Schema   string
		Requests int
		Headline string
		Entries  []struct {
			Entry    string
			Requests int
			Latency  struct{ P50, P95, P99, Mean int64 }
			Tail     struct {
				Quantile  float64
				Threshold int64
				Requests  int
			}
			Causes []struct {
				Function     string
				Kind         string
				CriticalPath struct {
					MeanPerRequest int64
					Share          float64
					TailShare      float64
				}
				SummedTime struct{ MeanPerRequest int64 }
			}
		}
	}
	if err := json.Unmarshal([]byte(out), &doc); err != nil {
		t.Fatal(err)
	}
	if doc.Schema != "culprit.latency/v1" || doc.Requests != 150 || len(doc.Entries) != 4 {
		t.Fatalf("schema %q, %d requests, %d entries; want culprit.latency/v1, 150, 4", doc.Schema, doc.Requests, len(doc.Entries))
	}
	// The demo's monthly report is its slowest route, and its heavy query
	// what its tail waits on.
	if e := doc.Entries[0]; e.Entry != "/reports/monthly" || !strings.Contains(doc.Headline, "reports.(*Monthly).Build") {
		t.Errorf("first entry %q, headline %q", e.Entry, doc.Headline)
	}
	for _, e := range doc.Entries {
		if !(e.Latency.P50 <= e.Latency.P95 && e.Latency.P95 <= e.Latency.P99) || e.Tail.Quantile != 0.95 || e.Tail.Requests < 1 {
			t.Errorf("%s: latency %+v tail %+v", e.Entry, e.Latency, e.Tail)
		}
		var sum float64
		for _, c := range e.Causes {
			sum += c.CriticalPath.Share
			if c.SummedTime.MeanPerRequest < c.CriticalPath.MeanPerRequest {
				t.Errorf("%s %s: summed %d below critical path %d", e.Entry, c.Function, c.SummedTime.MeanPerRequest, c.CriticalPath.MeanPerRequest)
			}
		}
		if sum < 0.9999 || sum > 1.0001 {
			t.Errorf("%s: critical-path shares add up to %v", e.Entry, sum)
		}
	}
}

// TestLatencyOnProfileSaysWhy: a profile gets one line saying why it
// cannot answer, and exit status 1.
func TestLatencyOnProfileSaysWhy(t *testing.T) {
	code, out, errOut := runTest(t, "", "latency", "demo/greenhouse-v42.cpu.pb.gz")
	if code != exitError || out != "" || strings.Count(strings.TrimSpace(errOut), "\n") != 0 || !strings.Contains(errOut, "traces") {
		t.Errorf("exit %d, stdout %q, stderr %q", code, out, errOut)
	}
	if code, _, _ := runTest(t, "", "latency", "--tail", "1.5", "demo/greenhouse-v42.traces.jsonl.gz"); code != exitUsage {
		t.Errorf("--tail 1.5: exit %d, want %d", code, exitUsage)
	}
}

// TestExplainLatency lists the slowest requests' critical paths.
func TestExplainLatency(t *testing.T) {
	code, out, errOut := runTest(t, "", "explain", "--latency", "--slowest", "2", "checkout", "demo/greenhouse-v42.traces.jsonl.gz")
	if code != exitOK {
		t.Fatalf("exit %d: %s", code, errOut)
	}
	if strings.Count(out, "\nrequest ") != 2 || !strings.Contains(out, "network → example.com/greenhouse/checkout.(*Quoter).QuoteEach") {
		t.Errorf("output:\n%s", out)
	}
	if code, _, errOut := runTest(t, "", "explain", "--latency", "nosuchroute", "demo/greenhouse-v42.traces.jsonl.gz"); code != exitError || !strings.Contains(errOut, "/checkout") {
		t.Errorf("no match: exit %d, %s", code, errOut)
	}
}

// TestDiffLatency compares the demo's two builds by latency: the planted
// regression (v42's catalog issues 35% more variety queries) shows as the
// /catalog route's p95 and as VarietyByID's time on the critical path;
// a latency snapshot compares as its traces do, and the gate exits 3.
func TestDiffLatency(t *testing.T) {
	const v41, v42 = "demo/greenhouse-v41.traces.jsonl.gz", "demo/greenhouse-v42.traces.jsonl.gz"
	snap := t.TempDir() + "/v41.latency.json"
	if code, _, errOut := runTest(t, "", "latency", "--save", snap, v41); code != exitOK {
		t.Fatalf("latency --save: exit %d: %s", code, errOut)
	}
	var docs [2]string
	for i, base := range []string{v41, snap} {
		code, out, errOut := runTest(t, "", "diff", "--latency", "--format", "json", "--limit", "0", base, v42)
		if code != exitOK {
			t.Fatalf("diff --latency %s: exit %d: %s", base, code, errOut)
		}
		docs[i] = out
	}
	var doc struct {
		Schema string
		Routes []struct {
			Entry, Verdict string
			P95            struct{ RelativeChange float64 }
		}
		Causes struct {
			Changes []struct{ Function, Verdict, Kind string }
		}
	}
	if err := json.Unmarshal([]byte(docs[0]), &doc); err != nil {
		t.Fatal(err)
	}
	var fromSnap struct {
		Routes json.RawMessage
		Causes struct{ Changes json.RawMessage }
	}
	var fromTraces = fromSnap
	if json.Unmarshal([]byte(docs[0]), &fromTraces) != nil || json.Unmarshal([]byte(docs[1]), &fromSnap) != nil ||
		string(fromTraces.Routes) != string(fromSnap.Routes) || string(fromTraces.Causes.Changes) != string(fromSnap.Causes.Changes) {
		t.Error("diff --latency from a latency snapshot differs from the one from traces")
	}
	verdict := map[string]string{}
	for _, r := range doc.Routes {
		verdict[r.Entry] = r.Verdict
	}
	if doc.Schema != "culprit.latency-diff/v1" || verdict["/catalog"] != "regressed" {
		t.Errorf("schema %q, routes %+v", doc.Schema, doc.Routes)
	}
	var found bool
	for _, ch := range doc.Causes.Changes {
		if strings.Contains(ch.Function, "VarietyByID") && ch.Kind == "database" {
			found = ch.Verdict == "regressed"
		}
		if ch.Verdict == "regressed" && !strings.Contains(ch.Function, "/catalog") {
			t.Errorf("unexpected regression: %+v", ch)
		}
	}
	if !found {
		t.Errorf("VarietyByID's database time on the critical path did not regress: %+v", doc.Causes.Changes)
	}
	if code, _, errOut := runTest(t, "", "diff", "--latency", "--fail-on", "10%", v41, v42); code != exitGate || !strings.Contains(errOut, "/catalog") {
		t.Errorf("--fail-on 10%%: exit %d, %s", code, errOut)
	}
	if code, _, _ := runTest(t, "", "diff", "--latency", "demo/greenhouse-v41.goroutine.1.pb.gz", v42); code != exitError {
		t.Errorf("diff --latency with a profile: exit %d, want %d", code, exitError)
	}
}

// TestLatencyTextFitsWidth: at 80 and 200 columns no line of the latency
// report or of its diff is longer than the width.
func TestLatencyTextFitsWidth(t *testing.T) {
	const v41, v42 = "demo/greenhouse-v41.traces.jsonl.gz", "demo/greenhouse-v42.traces.jsonl.gz"
	for _, width := range []int{80, 200} {
		w := strconv.Itoa(width)
		for _, args := range [][]string{
			{"latency", "--width", w, v42},
			{"diff", "--latency", "--width", w, v41, v42},
		} {
			code, out, errOut := runTest(t, "", args...)
			if code != exitOK {
				t.Fatalf("%v: exit %d: %s", args, code, errOut)
			}
			for _, line := range strings.Split(out, "\n") {
				if n := utf8.RuneCountInString(line); n > width {
					t.Errorf("%v: line of %d runes: %q", args, n, line)
				}
			}
		}
	}
}
