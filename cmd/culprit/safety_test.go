package main

import (
	"encoding/json"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strconv"
	"strings"
	"testing"

	"github.com/google/pprof/profile"
	"golang.org/x/net/html"
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
// destinations, code function names, routes, and the IDs of a span that
// is skipped with a warning. File paths locate code and are kept.
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
		span("a00000000000000d", "", "GET /cards/"+card, 2, 0, 10e6,
			str("http.request.method", "GET"), str("http.route", "/cards/"+card+"/"+email)),
		span("a000000000000002", "a000000000000001", "notify "+email+" about card "+card, 1, 1e6, 99e6),
		span("a00000000000000c", "a000000000000002", "render", 1, 1e6, 2e6,
			str("code.function.name", "example.com/greenhouse/mail.Send."+email), str("code.file.path", "/src/greenhouse/mail.go")),
		span("a000000000000003", "a000000000000002", "SELECT * FROM customers WHERE email = '"+email+"' AND card = "+card, 3, 2e6, 20e6,
			str("db.system.name", "postgresql"), str("server.address", email), num("server.port", 5432)),
		span("a000000000000004", "a000000000000002", "UPDATE cards", 3, 21e6, 30e6,
			str("db.system.name", "postgresql"), str("db.operation.name", "UPDATE cards SET owner = '"+email+"' WHERE n = "+card),
			str("db.query.summary", "UPDATE cards "+card+" "+email), str("net.peer.name", "u@db.example.net")),
		span("a000000000000005", "a000000000000002", "SELECT 1", 3, 31e6, 40e6,
			str("db.system", "mysql"), str("db.statement", "SELECT name FROM users WHERE email = \""+email+"\" AND card = "+card),
			str("server.address", card)),
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
	// A second request, named by its route, with a call of its own.
	second := span("a00000000000000e", "a00000000000000d", "SELECT cards", 3, 1e6, 9e6,
		str("db.system.name", "postgresql"), str("db.query.text", "SELECT * FROM cards WHERE n = "+card))
	spans = append(spans, second)
	for _, s := range []kv{spans[1], second} {
		s["traceId"] = "6c9ecc7e1b0a4f3d8e2a5b7c9d1f3e5a"
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
// output: every rank, diff and latency format, explain, graph (and the SVG
// Graphviz makes of it), the snapshot, warnings included. --show-literals shows it, so the
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
		run("diff "+f, "diff", in, in, "--limit", "0", "--format", f, "--keep-going")
		run("latency "+f, "latency", in, "--format", f, "--keep-going")
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

// hostileProfile is greenhouseProfile with application functions named to
// attack each output: a DOT HTML-like ID with a script URL, an HTML event
// handler, a bidirectional override, a URL and an e-mail address, and a
// name of 30,000 characters.
func hostileProfile() []byte {
	p := greenhouseProfile()
	names := []string{
		`example.com/greenhouse/<x> [URL="javascript:alert(1)"]; <y>`,
		`example.com/greenhouse/orders.<img src=x onerror=alert(2)> "q" \N`,
		"example.com/greenhouse/catalog.Total\u202e 0001 \u2066gnp.exe\u2069\u200b\ufeff",
		"example.com/greenhouse/see.https://attacker.invalid/x.www.attacker.invalid.alice@example.org",
		"example.com/greenhouse/" + strings.Repeat("x", 30000),
	}
	p.Function[1].Name, p.Function[1].SystemName = names[0], names[0]
	p.Function[3].Name, p.Function[3].SystemName = names[1], names[1]
	for i, name := range names[2:] {
		id := uint64(10 + i)
		f := &profile.Function{ID: id, Name: name, SystemName: name, Filename: "/src/greenhouse/h.go"}
		l := &profile.Location{ID: id, Address: 0x402000 + id*16, Line: []profile.Line{{Function: f, Line: 1}}}
		p.Function, p.Location = append(p.Function, f), append(p.Location, l)
		p.Sample = append(p.Sample, &profile.Sample{Location: []*profile.Location{p.Location[2], l, p.Location[0]},
			Value: []int64{int64(3 + i), int64(3+i) * 10_000_000}})
	}
	return rawProfile(p)
}

// isHidden reports the characters that must not reach a reader raw: the
// bidirectional controls and invisible characters of the safety issue.
func isHidden(r rune) bool {
	return r >= 0x202a && r <= 0x202e || r >= 0x2066 && r <= 0x2069 || r >= 0x200b && r <= 0x200f || r == 0xfeff
}

// Hostile function names through every rank, diff and explain format,
// and through graph and Graphviz's SVG of it: no output holds a raw
// bidirectional or invisible character, the HTML pages run only their
// own script, and the SVG holds no link, script URL or event handler.
func TestHostileNamesEveryFormat(t *testing.T) {
	dir := t.TempDir()
	in := filepath.Join(dir, "hostile.pprof")
	if err := os.WriteFile(in, hostileProfile(), 0o644); err != nil {
		t.Fatal(err)
	}
	outputs := map[string]string{}
	run := func(name string, args ...string) string {
		code, out, errOut := runTest(t, "", args...)
		if code != exitOK && code != 3 {
			t.Fatalf("%s: exit %d: %s", name, code, errOut)
		}
		outputs[name] = out + errOut
		return out
	}
	for _, f := range []string{"text", "markdown", "json", "csv", "html"} {
		run("rank "+f, "rank", in, "--limit", "0", "--format", f, "--app", "example.com/")
		run("diff "+f, "diff", in, in, "--limit", "0", "--format", f, "--app", "example.com/")
	}
	for _, f := range []string{"text", "json"} {
		run("explain "+f, "explain", ".", in, "--format", f, "--app", "example.com/")
	}
	graph := run("graph", "graph", in, "--min-share", "0", "--app", "example.com/")
	if !strings.Contains(graph, "javascript") || !strings.Contains(graph, `\\u202e`) {
		t.Fatalf("the hostile names are not in the graph:\n%.2000s", graph)
	}
	for name, out := range outputs {
		if i := strings.IndexFunc(out, isHidden); i >= 0 {
			t.Errorf("%s holds a raw invisible character at byte %d", name, i)
		}
	}
	for _, name := range []string{"rank html", "diff html"} {
		checkMarkup(t, name, outputs[name], 1)
	}
	if _, err := exec.LookPath("dot"); err != nil {
		t.Skip("Graphviz dot not installed")
	}
	svg := string(dotSVG(t, graph))
	if strings.IndexFunc(svg, isHidden) >= 0 {
		t.Error("the SVG holds a raw invisible character")
	}
	if !strings.Contains(svg, "gnp.exe") {
		t.Error("the SVG lost the names")
	}
	checkMarkup(t, "graph svg", svg, 0)
}

// checkMarkup parses an HTML or SVG document with golang.org/x/net/html
// (the HTML5 parsing algorithm) and fails on event-handler attributes,
// javascript: URLs, links, and more <script> elements than scripts. A
// name may still show "javascript:" as text or in a title, which is
// inert.
func checkMarkup(t *testing.T, name, doc string, scripts int) {
	t.Helper()
	root, err := html.Parse(strings.NewReader(doc))
	if err != nil {
		t.Fatalf("%s: %v", name, err)
	}
	var walk func(n *html.Node)
	walk = func(n *html.Node) {
		if n.Type == html.ElementNode {
			switch n.Data {
			case "script":
				scripts--
			case "a", "iframe", "object", "embed", "foreignobject":
				t.Errorf("%s has a <%s> element", name, n.Data)
			}
			for _, a := range n.Attr {
				key := strings.ToLower(a.Key)
				url := key == "href" || key == "src" || key == "action" || key == "formaction" || key == "data" || strings.HasSuffix(key, ":href")
				if strings.HasPrefix(key, "on") || url && strings.Contains(strings.ToLower(a.Val), "javascript:") {
					t.Errorf("%s: <%s %s=%q>", name, n.Data, a.Key, a.Val)
				}
			}
		}
		for c := n.FirstChild; c != nil; c = c.NextSibling {
			walk(c)
		}
	}
	walk(root)
	if scripts < 0 {
		t.Errorf("%s has %d more <script> elements than its own", name, -scripts)
	}
}

// dot crashed on the demo CPU profile: its edge weights were nanoseconds,
// past the integers Graphviz ranks with. Graphviz renders the graph of
// the demo profile and traces; every weight is 1–100, and entry points
// are houses in both (a trace's entry is an application span).
func TestGraphvizRendersDemoGraphs(t *testing.T) {
	for _, in := range []string{"demo/greenhouse-v42.cpu.pb.gz", "demo/greenhouse-v42.traces.jsonl.gz"} {
		t.Run(filepath.Base(in), func(t *testing.T) {
			code, out, errOut := runTest(t, "", "graph", in)
			if code != exitOK {
				t.Fatalf("exit %d: %s", code, errOut)
			}
			for _, m := range regexp.MustCompile(`weight="([0-9]+)"`).FindAllStringSubmatch(out, -1) {
				if w, _ := strconv.Atoi(m[1]); w < 1 || w > 100 {
					t.Errorf("weight %s", m[1])
				}
			}
			entry := regexp.MustCompile(`(?s)label="(GET /reports/monthly|net/http\.\(\*conn\)\.serve)\\n[^"]*"[^\]]*shape="house"`)
			if !entry.MatchString(out) {
				t.Errorf("the entry point is not drawn as a house:\n%.1500s", out)
			}
			if !regexp.MustCompile(`label="[0-9.]+(ms|s), [0-9.]+%"`).MatchString(out) {
				t.Errorf("no edge label in human units:\n%.1500s", out)
			}
			if _, err := exec.LookPath("dot"); err != nil {
				t.Skip("Graphviz dot not installed")
			}
			if svg := dotSVG(t, out); !strings.Contains(string(svg), "<svg") {
				t.Error("dot wrote no SVG")
			}
		})
	}
}
