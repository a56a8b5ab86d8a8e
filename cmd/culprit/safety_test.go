package main

import (
	"encoding/json"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"
)

// Personal data planted in a test input: an e-mail address, a card-like
// number and a password in URL user information (invented values).
var planted = []string{"alice.liddell@example.org", "liddell", "4111111111111111", "s3cr3t-pw"}

// plantedSpans is one OTLP/JSON request (encoding per the OTLP
// specification's JSON mapping) in which every span field that can reach
// a root cause, statement, peer, call or label holds the planted
// literals: span names of every kind, database statements, summaries and
// operation names with no query text, URLs with user information, query
// strings and path values, peers, RPC and messaging operations and
// destinations, and the IDs of a span that is skipped with a warning.
// Service names, code function names and route templates name code and
// configuration, not data, and are shown as they are.
func plantedSpans() string {
	const email, card, pw = "alice.liddell@example.org", "4111111111111111", "s3cr3t-pw"
	type kv = map[string]any
	str := func(k, v string) kv { return kv{"key": k, "value": kv{"stringValue": v}} }
	num := func(k string, v int) kv { return kv{"key": k, "value": kv{"intValue": fmt.Sprint(v)}} }
	trace := "5b8efff798038103d269b633813fc60c"
	t0 := int64(1_780_000_000_000_000_000)
	n := 0
	span := func(id, parent, name string, kind int, start, end int64, attrs ...kv) kv {
		n++
		s := kv{"traceId": trace, "spanId": id, "name": name, "kind": kind,
			"startTimeUnixNano": fmt.Sprint(t0 + start), "endTimeUnixNano": fmt.Sprint(t0 + end), "attributes": attrs}
		if parent != "" {
			s["parentSpanId"] = parent
		}
		return s
	}
	url := "https://bob:" + pw + "@api.example.net/v1/cards/" + card + "?email=" + strings.ReplaceAll(email, "@", "%40") + "#" + card
	spans := []kv{
		span("a000000000000001", "", "GET /customers/"+email+"?card="+card, 2, 0, 100e6,
			str("http.request.method", "GET"), str("url.path", "/customers/"+email)),
		span("a000000000000002", "a000000000000001", "notify "+email+" about card "+card, 1, 1e6, 99e6),
		span("a000000000000003", "a000000000000002", "SELECT * FROM customers WHERE email = '"+email+"' AND card = "+card, 3, 2e6, 20e6,
			str("db.system.name", "postgresql"), str("server.address", email), num("server.port", 5432)),
		span("a000000000000004", "a000000000000002", "UPDATE cards", 3, 21e6, 30e6,
			str("db.system.name", "postgresql"), str("db.operation.name", "UPDATE cards SET owner = '"+email+"' WHERE n = "+card),
			str("db.query.summary", "UPDATE cards "+card+" "+email), str("net.peer.name", "u@db.example.net")),
		span("a000000000000005", "a000000000000002", "SELECT 1", 3, 31e6, 40e6,
			str("db.system", "mysql"), str("db.statement", "SELECT name FROM users WHERE email = \""+email+"\" AND card = "+card)),
		span("a000000000000006", "a000000000000002", "GET "+url, 3, 41e6, 60e6,
			str("http.request.method", "GET"), str("url.full", url)),
		span("a000000000000007", "a000000000000002", "POST", 3, 61e6, 70e6,
			str("http.method", "POST"), str("http.url", url)),
		span("a000000000000008", "a000000000000002", "send "+card, 4, 71e6, 80e6,
			str("messaging.system", "kafka"), str("messaging.operation.name", "send "+email),
			str("messaging.destination.name", email), str("peer.service", "mail@"+email)),
		span("a000000000000009", "a000000000000002", "cards/"+card, 3, 81e6, 90e6,
			str("rpc.system", "grpc"), str("rpc.service", "cards"), str("rpc.method", card+email)),
		span("a00000000000000a", "a000000000000001", email, 5, 91e6, 95e6,
			str("messaging.system", "kafka"), str("messaging.destination.name", email)),
	}
	bad := span("a00000000000000b", "a000000000000001", "bad IDs "+email, 3, 96e6, 97e6)
	bad["traceId"] = email + card
	spans = append(spans, bad)
	doc := kv{"resourceSpans": []kv{{
		"resource":   kv{"attributes": []kv{str("service.name", "greenhouse-web")}},
		"scopeSpans": []kv{{"scope": kv{"name": "example.com/greenhouse"}, "spans": spans}},
	}}}
	out, err := json.Marshal(doc)
	if err != nil {
		panic(err)
	}
	return string(out) + "\n"
}

// A personal-data literal planted in every span field leaks through no
// output: every rank format, explain, graph (and the SVG Graphviz makes of
// it), the snapshot, warnings included. --show-literals shows it, so the
// check can fail.
func TestPlantedLiteralsNeverLeak(t *testing.T) {
	dir := t.TempDir()
	in := filepath.Join(dir, "planted.jsonl")
	if err := os.WriteFile(in, []byte(plantedSpans()), 0o644); err != nil {
		t.Fatal(err)
	}
	outputs := map[string]string{}
	run := func(name string, args ...string) string {
		code, out, errOut := runTest(t, "", args...)
		if code != exitOK {
			t.Fatalf("%s: exit %d: %s", name, code, errOut)
		}
		outputs[name] = out + errOut
		return out
	}
	for _, f := range []string{"text", "markdown", "json", "csv", "html"} {
		run("rank "+f, "rank", in, "--limit", "0", "--format", f, "--keep-going")
	}
	for _, f := range []string{"text", "json"} {
		run("explain "+f, "explain", ".", in, "--format", f, "--keep-going")
	}
	snap := filepath.Join(dir, "snap.json")
	run("rank --save", "rank", in, "--save", snap, "--keep-going")
	data, err := os.ReadFile(snap)
	if err != nil {
		t.Fatal(err)
	}
	outputs["snapshot"] = string(data)
	graph := run("graph", "graph", in, "--min-share", "0", "--keep-going")
	if _, err := exec.LookPath("dot"); err == nil {
		outputs["graph svg"] = string(dotSVG(t, graph))
	}
	for name, out := range outputs {
		for _, lit := range planted {
			if strings.Contains(out, lit) {
				t.Errorf("%s shows the planted literal %q", name, lit)
			}
		}
	}
	if !strings.Contains(outputs["rank csv"], "api.example.net") || !strings.Contains(outputs["rank csv"], "cards") {
		t.Errorf("redaction removed what names the call:\n%s", outputs["rank csv"])
	}
	_, out, _ := runTest(t, "", "rank", in, "--limit", "0", "--format", "csv", "--keep-going", "--show-literals")
	if !strings.Contains(out, planted[0]) {
		t.Error("--show-literals does not show the literal")
	}
}

// dotSVG renders a DOT document with Graphviz (dot -Tsvg).
func dotSVG(t *testing.T, doc string) []byte {
	t.Helper()
	cmd := exec.Command("dot", "-Tsvg")
	cmd.Stdin = strings.NewReader(doc)
	var stderr strings.Builder
	cmd.Stderr = &stderr
	svg, err := cmd.Output()
	if err != nil {
		t.Fatalf("dot -Tsvg: %v\n%s", err, stderr.String())
	}
	return svg
}
