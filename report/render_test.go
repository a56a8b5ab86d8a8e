package report

import (
	"bytes"
	"crypto/sha256"
	"encoding/base64"
	"encoding/csv"
	"flag"
	"fmt"
	"math"
	"strconv"
	"strings"
	"testing"
	"unicode/utf8"

	"github.com/culprithq/culprit/attribute"
	"github.com/culprithq/culprit/traces"
	"golang.org/x/net/html"
)

var update = flag.Bool("update", false, "rewrite golden files")

const ms = int64(1e6)

// greenhouse is a small, consistent span result from an invented plant
// shop: Database+Network = 3.5s, and the causes' costs add up to it.
func greenhouse() *attribute.Result {
	const stmt = "SELECT id, name, price FROM plants WHERE category_id = ?"
	return &attribute.Result{
		Inputs:    []traces.Input{{Name: "load-test-traces.jsonl", Format: "otlp-json", Bytes: 48213, SHA256: fmt.Sprintf("%x", sha256.Sum256([]byte("greenhouse")))}},
		Source:    "spans",
		ValueType: traces.ValueType{Type: "duration", Unit: "nanoseconds"},
		Totals:    attribute.Totals{Cost: 5400 * ms, Database: 2600 * ms, Network: 900 * ms, Other: 1900 * ms, Unattributed: 150 * ms, Requests: 120, Samples: 9000, BoundarySamples: 3480},
		App:       attribute.AppInfo{Detected: []attribute.Detection{{Prefix: "example.com/greenhouse", Functions: 42, Reason: "INTERNAL and SERVER spans of the service"}}},
		Entries: []attribute.EntryTotal{
			{Entry: "GET /plants", Cost: 3300 * ms, Database: 1620 * ms, Network: 750 * ms, Requests: 80},
			{Entry: "POST /orders", Cost: 1600 * ms, Database: 830 * ms, Network: 150 * ms, Requests: 30},
			{Entry: "GET /healthz", Cost: 500 * ms, Database: 150 * ms, Requests: 10},
		},
		Causes: []*attribute.Cause{
			{Function: "example.com/greenhouse/catalog.(*Service).List", File: "catalog/service.go", Line: 88, Kind: attribute.KindDatabase,
				Cost: 1620 * ms, Database: 1620 * ms, Share: 1620.0 / 3500, Samples: 2880, Calls: 2880, Requests: 80,
				CallsPerRequest: &attribute.Distribution{Median: 36, P95: 41, Max: 48},
				Statements: []attribute.Detail{
					{Kind: attribute.KindDatabase, System: "postgresql", Statement: stmt, Peer: "db-primary:5432", Cost: 1410 * ms, Calls: 2800, Samples: 2800},
					{Kind: attribute.KindDatabase, System: "postgresql", Statement: "SELECT count(*) FROM plants WHERE category_id = ?", Peer: "db-primary:5432", Cost: 210 * ms, Calls: 80, Samples: 80},
				}},
			{Function: "example.com/greenhouse/orders.(*Repo).Save", File: "orders/repo.go", Line: 131, Kind: attribute.KindMixed,
				Cost: 980 * ms, Database: 830 * ms, Network: 150 * ms, Share: 980.0 / 3500, Samples: 60, Calls: 60, Requests: 30,
				CallsPerRequest: &attribute.Distribution{Median: 2, P95: 2, Max: 3},
				Statements: []attribute.Detail{
					{Kind: attribute.KindDatabase, System: "postgresql", Statement: "INSERT INTO orders (customer_id, total) VALUES (?)", Peer: "db-primary:5432", Cost: 830 * ms, Calls: 30, Samples: 30},
					{Kind: attribute.KindNetwork, System: "kafka", Statement: "publish orders.created", Peer: "broker-1:9092", Cost: 150 * ms, Calls: 30, Samples: 30},
				}},
			{Function: "example.com/greenhouse/pricing.(*Client).Quote", File: "pricing/client.go", Line: 57, Kind: attribute.KindNetwork,
				Cost: 750 * ms, Network: 750 * ms, Share: 750.0 / 3500, Samples: 160, Calls: 160, Requests: 80,
				CallsPerRequest: &attribute.Distribution{Median: 2, P95: 2, Max: 4},
				Statements:      []attribute.Detail{{Kind: attribute.KindNetwork, System: "http", Statement: "POST /v1/quote", Peer: "pricing.internal:8443", Cost: 750 * ms, Calls: 160, Samples: 160}}},
			{Function: "(no application frame) GET /healthz", Kind: attribute.KindDatabase, NoAppFrame: true,
				Cost: 150 * ms, Database: 150 * ms, Share: 150.0 / 3500, Samples: 10, Calls: 10, Requests: 10},
		},
		Findings: []attribute.Finding{{Kind: "repeated-statement", Function: "example.com/greenhouse/catalog.(*Service).List", Share: 1410.0 / 3500, Cost: 1410 * ms,
			Evidence: "issued 35 times per request (median) in 78 of 80 requests", Statement: stmt,
			PerRequest: &attribute.Distribution{Median: 35, P95: 40, Max: 47}, Requests: 78, RequestsSeen: 80}},
		Warnings: []string{"load-test-traces.jsonl: 3 orphan spans attached to their trace root"},
	}
}

// hostile strings: markup, quotes, cell separators, backticks, line
// breaks, NUL and ESC, invalid UTF-8. Statements and functions carry no
// CR because Go's csv.Reader folds CRLF inside fields (see CSV).
var hostile = []string{
	"<script>alert(1)</script>",
	`"quotes'`,
	"a|b\\|c\\",
	"x`y``z",
	"one\n# injected heading\n- injected item",
	"nul\x00esc\x1b[31mred",
	"bad\xff\xfeutf8",
}

func hostileResult() *attribute.Result {
	h := strings.Join(hostile, " ")
	r := &attribute.Result{
		Inputs:    []traces.Input{{Name: "<script>alert(1)</script>\r\n|`x`.pprof", Format: "pprof", Bytes: 10, SHA256: "a|b"}},
		Source:    "pprof\x1b",
		ValueType: traces.ValueType{Type: "cpu<b>", Unit: "nanoseconds"},
		Sampled:   true, CPUOnly: true,
		Totals:   attribute.Totals{Cost: 1000, Database: 600, Network: 300, Other: 100, Unattributed: 90, Samples: 100, BoundarySamples: 90},
		App:      attribute.AppInfo{Prefixes: []string{"`evil`", "<i>x</i>"}, RulesFiles: []string{"rules\n.toml"}},
		Entries:  []attribute.EntryTotal{{Entry: h, Cost: 700, Database: 400, Network: 300}, {Entry: "\x00", Cost: 300, Database: 200}},
		Findings: []attribute.Finding{{Kind: "recursive-access", Function: h, Evidence: h, Statement: h, Peer: h, Depth: 3, Share: 0.5, Cost: 450}},
		Warnings: []string{h, "```\r\n<img src=https://attacker.invalid/x>"},
	}
	for i, s := range hostile {
		c := &attribute.Cause{Function: s, File: s + "/f.go", Line: int64(i + 1), Kind: attribute.KindDatabase,
			Cost: int64(200 - 20*i), Database: int64(200 - 20*i), Share: float64(200-20*i) / 900, ShareMargin: 0.02, Samples: int64(20 - i)}
		if i%2 == 1 {
			c.Kind, c.NoAppFrame = attribute.KindNetwork, i == 3
		}
		if i != 2 {
			c.Statements = []attribute.Detail{{Kind: c.Kind, System: s, Statement: s + " " + h, Peer: s, Cost: c.Cost, Samples: c.Samples}}
		}
		r.Causes = append(r.Causes, c)
	}
	return r
}

type testCase struct {
	name string
	r    *attribute.Result
	opts Options
}

func cases() []testCase {
	prov := Provenance{Command: "culprit rank --format html load-test-traces.jsonl", Version: "v0.1.0", Options: []string{"--limit 0"}}
	evil := Provenance{Command: "culprit rank ```\n<script>alert(1)</script> `x`", Version: "v0\x1b"}
	return []testCase{
		{"greenhouse", greenhouse(), Options{Provenance: prov}},
		{"greenhouse/limit1", greenhouse(), Options{Limit: 1, Provenance: prov}},
		{"hostile", hostileResult(), Options{Provenance: evil}},
		{"hostile/limit2", hostileResult(), Options{Limit: 2, Provenance: evil}},
		{"empty", &attribute.Result{ValueType: traces.ValueType{Type: "samples", Unit: "count"}}, Options{}},
	}
}

func render(t *testing.T, rd Renderer, tc testCase) string {
	t.Helper()
	var b bytes.Buffer
	if err := rd.Render(&b, tc.r, tc.opts); err != nil {
		t.Fatalf("Render: %v", err)
	}
	return b.String()
}

func TestForFormat(t *testing.T) {
	for _, name := range Formats {
		t.Run(name, func(t *testing.T) {
			if _, err := ForFormat(name); err != nil {
				t.Fatal(err)
			}
		})
	}
	if _, err := ForFormat("pdf"); err == nil || !strings.Contains(err.Error(), "markdown, json, csv, html") {
		t.Errorf("ForFormat(pdf) error = %v, want the list of formats", err)
	}
}

func TestDeterministic(t *testing.T) {
	for _, name := range Formats {
		rd, _ := ForFormat(name)
		for _, tc := range cases() {
			t.Run(name+"/"+tc.name, func(t *testing.T) {
				if a, b := render(t, rd, tc), render(t, rd, tc); a != b {
					t.Error("two renderings differ")
				}
			})
		}
	}
}

func TestGolden(t *testing.T) {
	tc := cases()[0]
	for _, g := range []struct {
		file string
		rd   Renderer
	}{{"rank.md", Markdown{}}, {"rank.csv", CSV{}}, {"rank.html", HTML{}}} {
		t.Run(g.file, func(t *testing.T) {
			got := render(t, g.rd, tc)
			checkGolden(t, g.file, got)
		})
	}
}

// outsideCode removes the code spans of a Markdown line, following
// CommonMark 0.31 §6.1: a backtick string opens a span that the next
// backtick string of the same length closes; escapes are kept.
func outsideCode(line string) string {
	run := func(i int) int {
		n := 0
		for i+n < len(line) && line[i+n] == '`' {
			n++
		}
		return n
	}
	var b strings.Builder
	for i := 0; i < len(line); {
		switch {
		case line[i] == '\\' && i+1 < len(line):
			b.WriteString(line[i : i+2])
			i += 2
			continue
		case line[i] != '`':
			b.WriteByte(line[i])
			i++
			continue
		}
		n, closed := run(i), -1
		for j := i + n; j < len(line); {
			if m := run(j); m == n {
				closed = j
				break
			} else if m > 0 {
				j += m
			} else {
				j++
			}
		}
		if closed < 0 {
			b.WriteString(line[i : i+n])
			i += n
			continue
		}
		i = closed + n
	}
	return b.String()
}

// unescaped drops backslash-escaped characters from s.
func unescaped(s string) string {
	var b strings.Builder
	for i := 0; i < len(s); i++ {
		if s[i] == '\\' {
			i++
			continue
		}
		b.WriteByte(s[i])
	}
	return b.String()
}

func TestMarkdown(t *testing.T) {
	for _, tc := range cases() {
		t.Run(tc.name, func(t *testing.T) {
			out := render(t, Markdown{}, tc)
			if !utf8.ValidString(out) {
				t.Error("output is not valid UTF-8")
			}
			if i := strings.IndexFunc(out, func(r rune) bool { return r < 0x20 && r != '\n' || r == 0x7f }); i >= 0 {
				t.Errorf("control character %q at byte %d", out[i], i)
			}
			var tables [][]string // runs of lines starting with '|'
			fence, prev := "", ""
			for _, line := range strings.Split(out, "\n") {
				switch {
				case fence == "" && strings.HasPrefix(line, "```"):
					fence = line[:strings.IndexFunc(line, func(r rune) bool { return r != '`' })]
				case fence != "":
					if strings.HasPrefix(line, fence) && strings.Trim(line, "`") == "" {
						fence = ""
					}
				case strings.HasPrefix(line, "# injected") || strings.HasPrefix(line, "- injected"):
					t.Errorf("user text starts a block: %q", line)
				case strings.ContainsAny(unescaped(outsideCode(line)), "<`&"):
					t.Errorf("raw HTML, entity or unclosed code span outside code: %q", line)
				case strings.HasPrefix(line, "|"):
					if !strings.HasPrefix(prev, "|") {
						tables = append(tables, nil)
					}
					tables[len(tables)-1] = append(tables[len(tables)-1], line)
				}
				prev = line
			}
			if fence != "" {
				t.Error("code block not closed")
			}
			for _, rows := range tables {
				// Cells are split at '|' not escaped by a backslash.
				want := strings.Count(unescaped(rows[0]), "|")
				for _, row := range rows {
					if got := strings.Count(unescaped(row), "|"); got != want || !strings.HasSuffix(row, " |") {
						t.Errorf("row has %d cell separators, header %d: %q", got, want, row)
					}
				}
			}
			if n := len(shown(tc.r, tc.opts)); n > 0 && len(tables[0]) != n+2 {
				t.Errorf("root-cause table has %d lines, want %d", len(tables[0]), n+2)
			}
			if tc.r == nil || len(tc.r.Causes) == 0 {
				return
			}
			if want := "**" + mdText(tc.r.Causes[0].Function) + "** accounts for " + shareText(tc.r, tc.r.Causes[0]); !strings.Contains(out, want) {
				t.Errorf("headline %q missing", want)
			}
		})
	}
}

func TestMarkdownEscapes(t *testing.T) {
	for _, tt := range []struct{ name, fn, in, want string }{
		{"pipe", "text", "a|b", `a\|b`},
		{"backslash before pipe", "text", `a\|b`, `a\\\|b`},
		{"markup", "text", "<b>*x*</b> [l](u) &amp;", `\<b\>\*x\*\</b\> \[l\](u) \&amp;`},
		{"newline and controls", "text", "a\nb\x00c\x1bd", "a b c d"},
		{"invalid utf8", "text", "a\xffb", "a\uFFFDb"},
		{"plain code", "code", "SELECT 1", "`SELECT 1`"},
		{"backticks inside", "code", "a`b``c", "```a`b``c```"},
		{"backtick at edge", "code", "`x", "`` `x ``"},
		{"spaces at both edges", "code", " x ", "`  x  `"},
		{"empty code", "code", "\n", "(empty)"},
	} {
		t.Run(tt.name, func(t *testing.T) {
			got := mdText(tt.in)
			if tt.fn == "code" {
				got = mdCode(tt.in)
			}
			if got != tt.want {
				t.Errorf("%s(%q) = %q, want %q", tt.fn, tt.in, got, tt.want)
			}
		})
	}
}

func TestCSV(t *testing.T) {
	for _, tc := range cases() {
		t.Run(tc.name, func(t *testing.T) {
			recs, err := csv.NewReader(strings.NewReader(render(t, CSV{}, tc))).ReadAll()
			if err != nil {
				t.Fatal(err)
			}
			if strings.Join(recs[0], ",") != strings.Join(csvHeader, ",") {
				t.Fatalf("header = %v", recs[0])
			}
			col := map[string]int{}
			for i, h := range recs[0] {
				col[h] = i
			}
			var want [][2]string // function, statement per row
			for _, c := range shown(tc.r, tc.opts) {
				if len(c.Statements) == 0 {
					want = append(want, [2]string{c.Function, ""})
				}
				for _, d := range c.Statements {
					want = append(want, [2]string{c.Function, d.Statement})
				}
			}
			if cut := len(tc.r.Causes) - len(shown(tc.r, tc.opts)); cut > 0 {
				// An explicit limit ends the file with an "(omitted N)" row.
				last := recs[len(recs)-1]
				var share float64
				for _, c := range tc.r.Causes[len(tc.r.Causes)-cut:] {
					share += c.Share
				}
				if last[col["rank"]] != fmt.Sprintf("(omitted %d)", cut) || last[col["cause_share"]] != csvFloat(share) {
					t.Errorf("last row %q, want (omitted %d) with share %v", last, cut, share)
				}
				recs = recs[:len(recs)-1]
			}
			if len(recs)-1 != len(want) {
				t.Fatalf("%d rows, want %d", len(recs)-1, len(want))
			}
			for i, rec := range recs[1:] {
				if rec[col["function"]] != want[i][0] || rec[col["statement"]] != want[i][1] {
					t.Errorf("row %d: function %q statement %q, want %q %q", i+1, rec[col["function"]], rec[col["statement"]], want[i][0], want[i][1])
				}
				rank, _ := strconv.Atoi(rec[col["rank"]])
				c := tc.r.Causes[rank-1]
				if share, err := strconv.ParseFloat(rec[col["cause_share"]], 64); err != nil || share != c.Share {
					t.Errorf("row %d: cause_share %q, want %v", i+1, rec[col["cause_share"]], c.Share)
				}
				if got := rec[col["cause_share_margin"]] == ""; got != !tc.r.Sampled {
					t.Errorf("row %d: cause_share_margin %q with sampled=%v", i+1, rec[col["cause_share_margin"]], tc.r.Sampled)
				}
				if got := rec[col["cause_calls"]] == ""; got != tc.r.Sampled {
					t.Errorf("row %d: cause_calls %q with sampled=%v", i+1, rec[col["cause_calls"]], tc.r.Sampled)
				}
			}
		})
	}
}

func attr(n *html.Node, key string) string {
	for _, a := range n.Attr {
		if a.Key == key {
			return a.Val
		}
	}
	return ""
}

func text(n *html.Node) string {
	var b strings.Builder
	for c := range n.Descendants() {
		if c.Type == html.TextNode {
			b.WriteString(c.Data)
		}
	}
	return b.String()
}

// find returns the elements below root named tag whose class starts with
// class, in document order.
func find(root *html.Node, tag, class string) []*html.Node {
	var out []*html.Node
	if root == nil {
		return nil
	}
	for n := range root.Descendants() {
		if n.Type == html.ElementNode && n.Data == tag && strings.HasPrefix(attr(n, "class"), class) {
			out = append(out, n)
		}
	}
	return out
}

func byID(root *html.Node, id string) *html.Node {
	for n := range root.Descendants() {
		if n.Type == html.ElementNode && attr(n, "id") == id {
			return n
		}
	}
	return nil
}

func width(n *html.Node) float64 {
	w, _ := strconv.ParseFloat(attr(n, "width"), 64)
	return w
}

func TestHTML(t *testing.T) {
	for _, tc := range cases() {
		t.Run(tc.name, func(t *testing.T) {
			out := render(t, HTML{}, tc)
			if strings.Contains(out, "<script>alert") {
				t.Error("unescaped <script>alert in output")
			}
			doc, err := html.Parse(strings.NewReader(out))
			if err != nil {
				t.Fatal(err)
			}
			if doc.FirstChild == nil || doc.FirstChild.Type != html.DoctypeNode || doc.FirstChild.Data != "html" {
				t.Error("missing <!DOCTYPE html>")
			}
			var csp string
			for _, m := range find(doc, "meta", "") {
				if attr(m, "http-equiv") == "Content-Security-Policy" {
					csp = attr(m, "content")
				}
			}
			if !strings.HasPrefix(csp, "default-src 'none';") {
				t.Errorf("Content-Security-Policy = %q", csp)
			}
			scripts := find(doc, "script", "")
			if len(scripts) != 1 {
				t.Fatalf("%d <script> elements, want 1", len(scripts))
			}
			sum := sha256.Sum256([]byte(text(scripts[0])))
			if text(scripts[0]) != sortScript || !strings.Contains(csp, "'sha256-"+base64.StdEncoding.EncodeToString(sum[:])+"'") {
				t.Error("script is not the sort script allowed by the page's policy")
			}
			for n := range doc.Descendants() {
				switch n.Data {
				case "link", "img", "iframe", "object", "embed", "base", "form", "image", "use":
					t.Errorf("unexpected <%s> element", n.Data)
				}
				for _, a := range n.Attr {
					v := strings.ToLower(strings.TrimSpace(a.Val))
					if strings.HasPrefix(a.Key, "on") || a.Key == "style" || strings.HasPrefix(v, "http://") ||
						strings.HasPrefix(v, "https://") || strings.HasPrefix(v, "//") || strings.HasPrefix(v, "javascript:") {
						t.Errorf("<%s %s=%q> could act or fetch", n.Data, a.Key, a.Val)
					}
				}
			}

			causes := shown(tc.r, tc.opts)
			chart := byID(doc, "causes-chart")
			if len(causes) == 0 {
				if chart != nil {
					t.Error("chart drawn without root causes")
				}
				return
			}
			if chart == nil || chart.Namespace != "svg" {
				t.Fatal("no root-cause chart parsed as SVG")
			}
			bars, fns := find(chart, "rect", "bar "), find(byID(doc, "causes-table"), "td", "fn")
			if len(bars) != len(causes) || len(fns) != len(causes) {
				t.Fatalf("%d bars and %d table rows, want one per shown root cause (%d)", len(bars), len(fns), len(causes))
			}
			if n, want := len(find(chart, "line", "whisker")), 3*len(causes); tc.r.Sampled && n != want || !tc.r.Sampled && n != 0 {
				t.Errorf("%d whisker lines with sampled=%v", n, tc.r.Sampled)
			}
			for i, c := range causes {
				if got := text(fns[i]); got != clean(c.Function) {
					t.Errorf("table row %d shows %q, want %q", i+1, got, clean(c.Function))
				}
				// One linear scale: width ratios equal share ratios (to
				// the 0.1px the geometry is rounded to).
				if want := width(bars[0]) * c.Share / causes[0].Share; math.Abs(width(bars[i])-want) > 0.2 {
					t.Errorf("bar %d is %.1f wide, want %.1f", i+1, width(bars[i]), want)
				}
			}
			// Stacked entry bars: segment widths add up in proportion
			// to each entry's total.
			rows := find(byID(doc, "entries-chart"), "g", "")
			if len(rows) != len(tc.r.Entries) {
				t.Fatalf("%d entry bars, want %d", len(rows), len(tc.r.Entries))
			}
			var first float64
			for i, g := range rows {
				var sum float64
				for _, seg := range find(g, "rect", "seg ") {
					sum += width(seg)
				}
				if i == 0 {
					first = sum
				}
				if want := first * float64(tc.r.Entries[i].Cost) / float64(tc.r.Entries[0].Cost); math.Abs(sum-want) > 0.3 {
					t.Errorf("entry %d bar is %.1f wide, want %.1f", i+1, sum, want)
				}
			}
		})
	}
}
