package callgraph

import (
	"bytes"
	"encoding/xml"
	"io"
	"math"
	"os/exec"
	"strconv"
	"strings"
	"testing"
	"unicode/utf8"

	"gonum.org/v1/gonum/graph/formats/dot"
	"gonum.org/v1/gonum/graph/formats/dot/ast"
)

// hostileNames are function and span names written to break out of a DOT
// string or ID: an HTML-like ID with live attributes, a closed string, a
// Graphviz escape, an entity that decodes to a bidi override, control and
// invisible characters, invalid UTF-8, a keyword.
var hostileNames = []string{
	`<x> [URL="javascript:alert(1)"]; <y>`,
	`"a" [href="javascript:alert(2)"] "b`,
	`<<b onmouseover="alert(3)">x</b>>`,
	`x\"; node [URL="javascript:alert(4)"] \`,
	`\N\G\L\E\T\H \l\r`,
	"&#8238;evil&#x202E;",
	"line\nbreak\r\x00\x1b[31m",
	"rtl\u202egnp.exe\u2066\u200b\ufeff",
	"bad\xff\xfeutf8",
	"node",
	"",
}

// parseDOT parses out with gonum's DOT parser (an implementation of the
// Graphviz DOT grammar) and returns each node's attributes by node ID and
// each edge's by "from -> to".
func parseDOT(t *testing.T, out []byte) (nodes, edges map[string]map[string]string) {
	t.Helper()
	file, err := dot.ParseBytes(out)
	if err != nil {
		t.Fatalf("DOT does not parse: %v\n%s", err, out)
	}
	nodes, edges = map[string]map[string]string{}, map[string]map[string]string{}
	attrs := func(as []*ast.Attr) map[string]string {
		m := map[string]string{}
		for _, a := range as {
			if !strings.HasPrefix(a.Val, `"`) {
				t.Errorf("attribute %s=%s is not a quoted string", a.Key, a.Val)
			}
			m[a.Key] = a.Val
		}
		return m
	}
	for _, st := range file.Graphs[0].Stmts {
		switch st := st.(type) {
		case *ast.NodeStmt:
			nodes[st.Node.ID] = attrs(st.Attrs)
		case *ast.EdgeStmt:
			edges[st.From.(*ast.Node).ID+" -> "+st.To.Vertex.(*ast.Node).ID] = attrs(st.Attrs)
		}
	}
	return nodes, edges
}

// An HTML-like ID (<…>) would be markup to Graphviz, and a name that
// closes its string would add attributes of its own: a span named
// `<x> [URL="javascript:alert(1)"]; <y>` put a clickable script into the
// SVG. Node IDs must be quoted numbers, every value a quoted string, and
// the names only in labels, which must read back as the name.
func TestDOTInjectionHTMLLikeID(t *testing.T) {
	g := NewDigraph("culprit", Attr{Key: "rankdir", Value: "LR"})
	var prev *DigraphNode
	for i, name := range hostileNames {
		n := g.AddNode(name, Attr{Key: "class", Value: name})
		n.W = float64(i + 1)
		if prev != nil {
			g.AddWeight(prev, n, float64(i))
		}
		prev = n
	}
	out, err := g.MarshalDOT()
	if err != nil {
		t.Fatal(err)
	}
	nodes, edges := parseDOT(t, out)
	if len(nodes) != len(hostileNames) || len(edges) != len(hostileNames)-1 {
		t.Fatalf("%d nodes and %d edges, want %d and %d (a name added statements):\n%s",
			len(nodes), len(edges), len(hostileNames), len(hostileNames)-1, out)
	}
	for i, name := range hostileNames {
		id := `"` + strconv.Itoa(i) + `"`
		a := nodes[id]
		if a == nil {
			t.Fatalf("no node %s:\n%s", id, out)
		}
		for k := range a {
			if k != "label" && k != "class" {
				t.Errorf("node %s has attribute %s, which no name may add", id, k)
			}
		}
		label, err := strconv.Unquote(a["label"])
		if err != nil {
			t.Fatalf("label %s: %v", a["label"], err)
		}
		first, _, _ := strings.Cut(label, "\n")
		if want := shownName(name); first != want {
			t.Errorf("label of %q reads %q, want %q", name, first, want)
		}
	}
}

// shownName is what a DOT label of name holds once read as a DOT string
// (Graphviz then decodes &amp; to &): the name itself, with invalid UTF-8
// and control and invisible characters as \uXXXX text.
func shownName(name string) string {
	var b strings.Builder
	for _, r := range name {
		switch {
		case r < 0x20 || r == 0x7f || r == 0x202e || r == 0x2066 || r == 0x200b || r == 0xfeff || r == utf8.RuneError:
			h := strconv.FormatInt(int64(r), 16)
			b.WriteString(`\u` + strings.Repeat("0", 4-len(h)) + h)
		case r == '&':
			b.WriteString("&amp;")
		default:
			b.WriteRune(r)
		}
	}
	return b.String()
}

// dot segfaulted on the demo CPU profile: edge weights were nanoseconds,
// and Graphviz ranks with integer weights that overflow past about 2^31.
// Weights are shares scaled to 1–100, labels carry the units, and a name
// over Graphviz's 16,384-byte string limit is cut.
func TestDOTWeightsAndLongNames(t *testing.T) {
	g := NewDigraph("culprit")
	g.Format = func(v float64) string { return strconv.FormatFloat(v/1e9, 'f', 2, 64) + "s" }
	long := strings.Repeat("é", 40000) // 80,000 bytes
	a, b, c := g.AddNode("main.main"), g.AddNode(long), g.AddNode("database/sql.(*DB).Query")
	a.W, b.W, c.W = 7e18, 7e18, 7e18
	g.AddWeight(a, b, 7e18)
	g.AddWeight(b, c, 6.3e18)
	g.AddWeight(a, c, 1)
	g.Total = 7e18
	out, err := g.MarshalDOT()
	if err != nil {
		t.Fatal(err)
	}
	nodes, edges := parseDOT(t, out)
	want := map[string][2]string{
		`"0" -> "1"`: {`"100"`, "7000000000.00s, 100%"},
		`"1" -> "2"`: {`"90"`, "6300000000.00s, 90%"},
		`"0" -> "2"`: {`"1"`, "0.00s, 0.0%"},
	}
	for e, w := range want {
		if edges[e]["weight"] != w[0] || edges[e]["label"] != strconv.Quote(w[1]) {
			t.Errorf("edge %s: weight %s label %s, want %s %q", e, edges[e]["weight"], edges[e]["label"], w[0], w[1])
		}
	}
	label := nodes[`"1"`]["label"]
	if n := len(label); n > 16384 || n < 1000 {
		t.Errorf("long name's label is %d bytes, want cut below 16,384", n)
	}
	if !strings.Contains(label, "é…é") || !strings.HasPrefix(label, `"éé`) {
		t.Errorf("long name not cut in the middle: %.40s…", label)
	}
	if !utf8.Valid(out) {
		t.Error("cutting a name split a character")
	}
	svg := renderSVG(t, out)
	checkSVG(t, svg)
}

// renderSVG runs Graphviz's dot -Tsvg on a DOT document (the check that
// Graphviz itself accepts what culprit writes); it skips without dot.
func renderSVG(t *testing.T, doc []byte) []byte {
	t.Helper()
	path, err := exec.LookPath("dot")
	if err != nil {
		t.Skip("Graphviz dot not installed")
	}
	cmd := exec.Command(path, "-Tsvg")
	cmd.Stdin = bytes.NewReader(doc)
	var stderr bytes.Buffer
	cmd.Stderr = &stderr
	svg, err := cmd.Output()
	if err != nil {
		t.Fatalf("dot -Tsvg: %v\n%s", err, stderr.String())
	}
	return svg
}

// checkSVG asserts that an SVG runs nothing: no link elements, no
// attribute holding a javascript: URL, no on… event attribute, and no
// bidirectional or invisible character anywhere. Names may still show
// the text "javascript:" in a label, which is inert.
func checkSVG(t *testing.T, svg []byte) {
	t.Helper()
	dec := xml.NewDecoder(bytes.NewReader(svg))
	dec.Strict = false
	for {
		tok, err := dec.Token()
		if err == io.EOF {
			break
		}
		if err != nil {
			t.Fatalf("SVG does not parse: %v", err)
		}
		el, ok := tok.(xml.StartElement)
		if !ok {
			continue
		}
		if el.Name.Local == "a" || el.Name.Local == "script" || el.Name.Local == "foreignObject" {
			t.Errorf("SVG has a <%s> element", el.Name.Local)
		}
		for _, a := range el.Attr {
			if strings.HasPrefix(strings.ToLower(a.Name.Local), "on") ||
				strings.Contains(strings.ToLower(a.Value), "javascript:") {
				t.Errorf("SVG element <%s> has %s=%q", el.Name.Local, a.Name.Local, a.Value)
			}
		}
	}
	if i := bytes.IndexFunc(svg, func(r rune) bool {
		return (r >= 0x202a && r <= 0x202e) || (r >= 0x2066 && r <= 0x2069) || (r >= 0x200b && r <= 0x200f) || r == 0xfeff
	}); i >= 0 {
		t.Errorf("SVG holds a bidirectional or invisible character at byte %d", i)
	}
}

// The hostile names through dot -Tsvg: Graphviz renders them, and the SVG
// carries no script, link or bidi control.
func TestDOTHostileNamesRenderInert(t *testing.T) {
	g := NewDigraph("culprit")
	var prev *DigraphNode
	for _, name := range hostileNames {
		n := g.AddNode(name)
		n.W = math.MaxInt64
		if prev != nil {
			g.AddWeight(prev, n, math.MaxInt64)
		}
		prev = n
	}
	out, err := g.MarshalDOT()
	if err != nil {
		t.Fatal(err)
	}
	checkSVG(t, renderSVG(t, out))
}
