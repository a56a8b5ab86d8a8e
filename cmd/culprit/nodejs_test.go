package main

import (
	"bufio"
	"compress/gzip"
	"encoding/json"
	"os"
	"path/filepath"
	"strings"
	"testing"

	tracepb "go.opentelemetry.io/proto/otlp/trace/v1"
	"google.golang.org/protobuf/encoding/protojson"
)

// The Node.js fixture: two express + pg services of the invented
// greenhouse seed bank, traced by the official OpenTelemetry JS SDK
// (sdk-trace-node with the http, express and pg instrumentations, spans
// serialised by the SDK's own OTLP/JSON serialiser) against a real
// PostgreSQL 15 server, recorded by testdata/nodejs/record.js. truth.json
// holds the services' own counts of the queries and outgoing calls they
// made, per root cause as a reader of their code names it.
const nodeFixture = "../../testdata/nodejs/recorded"

type nodeTruth struct {
	Services map[string]struct {
		Requests   int
		RootCauses map[string]struct{ Database, Network int64 }
	}
}

type rankJSON struct {
	Totals struct {
		Cost, Database, Network int64
		Requests                int
	}
	RootCauses []struct {
		Function   string
		Calls      int64
		Database   int64
		NoAppFrame bool
		Statements []struct {
			Kind, Statement string
			Calls, Cost     int64
		}
	}
	Findings []struct{ Kind, Function, Statement string }
	Warnings []string
	Notes    []string
}

func readNodeTruth(t *testing.T) nodeTruth {
	t.Helper()
	b, err := os.ReadFile(filepath.Join(nodeFixture, "truth.json"))
	if err != nil {
		t.Fatal(err)
	}
	var truth nodeTruth
	if err := json.Unmarshal(b, &truth); err != nil {
		t.Fatal(err)
	}
	return truth
}

func rankNode(t *testing.T, args ...string) rankJSON {
	t.Helper()
	args = append([]string{"rank", "--format", "json", "--limit", "0"}, args...)
	code, out, errOut := runTest(t, "", args...)
	if code != exitOK {
		t.Fatalf("culprit %s: exit %d: %s", strings.Join(args, " "), code, errOut)
	}
	var doc rankJSON
	if err := json.Unmarshal([]byte(out), &doc); err != nil {
		t.Fatal(err)
	}
	return doc
}

// TestNodeJSFixture reads the JS SDK's traces with no rules file and no
// --app, as a new user would, and checks the call count of every root
// cause against the services' own counts: pool checkouts
// (pg-pool.connect, pg.connect) are connection waits, not calls; the
// express instrumentation's "request handler" and "middleware - …" spans
// are not root causes; the downstream service (packet-printer, called by
// seedbank) is analysed only when named; and the real SDK's output reads
// with no warnings under --strict.
func TestNodeJSFixture(t *testing.T) {
	truth := readNodeTruth(t)
	for _, tc := range []struct {
		service string
		args    []string
	}{
		// The directory also holds truth.json, which is not OTLP.
		// (By default every service that receives requests from outside
		// is analysed: packet-printer answered one health check.)
		{"seedbank", []string{"--strict", nodeFixture}},
		{"packet-printer", []string{"--strict", "--service", "packet-printer", nodeFixture}},
		// --app applies to spans: naming the application's tracer scope
		// changes nothing here.
		{"seedbank", []string{"--strict", "--app", "greenhouse-seedbank", nodeFixture}},
	} {
		t.Run(tc.service, func(t *testing.T) {
			doc := rankNode(t, tc.args...)
			if len(doc.Warnings) > 0 {
				t.Errorf("warnings %q, want none", doc.Warnings)
			}
			want := truth.Services[tc.service].RootCauses
			got := map[string]int64{}
			connections := 0
			for _, c := range doc.RootCauses {
				got[c.Function] = c.Calls
				var queries int64
				for _, st := range c.Statements {
					switch st.Kind {
					case "connection":
						connections++
						if st.Calls != 0 || st.Cost <= 0 || !strings.Contains(st.Statement, "connect") {
							t.Errorf("%s: connection wait %+v, want 0 calls and some cost", c.Function, st)
						}
					case "database":
						queries += st.Calls
					}
				}
				if w, ok := want[c.Function]; ok && queries != w.Database {
					t.Errorf("%s: %d database calls in its statements, want %d", c.Function, queries, w.Database)
				}
				if strings.Contains(c.Function, "request handler") || strings.Contains(c.Function, "middleware") {
					t.Errorf("root cause %q is a span of the express instrumentation", c.Function)
				}
			}
			wantCalls := map[string]int64{}
			for name, w := range want {
				wantCalls[name] = w.Database + w.Network
			}
			if !equalCounts(got, wantCalls) {
				t.Errorf("calls per root cause:\n got  %v\n want %v (the application's own counts)", got, wantCalls)
			}
			if connections == 0 {
				t.Error("no connection waits: the pool of 2 connections made requests wait")
			}
			for _, f := range doc.Findings {
				if strings.Contains(f.Statement, "connect") {
					t.Errorf("finding on a connection wait: %+v", f)
				}
			}
			// The totals are the analysed service's own requests: the sum
			// of its root SERVER spans, read with the official OTLP types.
			named := tc.service
			if named == "seedbank" {
				named = ""
			}
			cost, requests := serverRootTotals(t, named)
			if doc.Totals.Cost != cost || doc.Totals.Requests != requests {
				t.Errorf("totals: cost %d over %d requests, want %d over %d (the service's root spans)",
					doc.Totals.Cost, doc.Totals.Requests, cost, requests)
			}
		})
	}

	// The N+1 loop of GET /collections is found in the application's own
	// span, countSeeds: 8 collections, one count query each.
	doc := rankNode(t, nodeFixture)
	found := false
	for _, f := range doc.Findings {
		if f.Kind == "repeated-statement" && f.Function == "countSeeds" {
			found = true
		}
	}
	if !found {
		t.Errorf("no repeated-statement finding on countSeeds: %+v", doc.Findings)
	}
	notes := strings.Join(doc.Notes, "\n")
	for _, want := range []string{"packet-printer", "truth.json"} {
		if !strings.Contains(notes, want) {
			t.Errorf("notes %q do not mention %s", doc.Notes, want)
		}
	}
}

func equalCounts(a, b map[string]int64) bool {
	if len(a) != len(b) {
		return false
	}
	for k, v := range a {
		if w, ok := b[k]; !ok || w != v {
			return false
		}
	}
	return true
}

// serverRootTotals decodes the fixture with the official OTLP protobuf
// types (protojson) and returns the summed duration and number of the
// spans without a parent (of every service), or of the named service's
// SERVER spans and spans without a parent.
func serverRootTotals(t *testing.T, service string) (int64, int) {
	t.Helper()
	fh, err := os.Open(filepath.Join(nodeFixture, "seedbank.traces.jsonl.gz"))
	if err != nil {
		t.Fatal(err)
	}
	defer fh.Close()
	zr, err := gzip.NewReader(fh)
	if err != nil {
		t.Fatal(err)
	}
	sc := bufio.NewScanner(zr)
	sc.Buffer(nil, 16<<20)
	var cost int64
	traces := map[string]bool{}
	for sc.Scan() {
		var td tracepb.TracesData
		if err := (protojson.UnmarshalOptions{DiscardUnknown: true}).Unmarshal(sc.Bytes(), &td); err != nil {
			t.Fatal(err)
		}
		for _, rs := range td.ResourceSpans {
			name := ""
			for _, a := range rs.GetResource().GetAttributes() {
				if a.Key == "service.name" {
					name = a.Value.GetStringValue()
				}
			}
			if service != "" && name != service {
				continue
			}
			for _, ss := range rs.ScopeSpans {
				for _, sp := range ss.Spans {
					// Hex IDs read as base64 give the wrong bytes, but an
					// absent parent stays absent.
					if len(sp.ParentSpanId) == 0 || service != "" && sp.Kind == tracepb.Span_SPAN_KIND_SERVER {
						cost += int64(sp.EndTimeUnixNano - sp.StartTimeUnixNano)
						traces[string(sp.TraceId)] = true
					}
				}
			}
		}
	}
	if err := sc.Err(); err != nil {
		t.Fatal(err)
	}
	return cost, len(traces)
}
