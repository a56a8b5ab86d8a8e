package report

import (
	"bytes"
	"encoding/csv"
	"encoding/json"
	"strconv"
	"strings"
	"testing"
	"unicode/utf8"

	"github.com/culprithq/culprit/attribute"
	"github.com/culprithq/culprit/attribute/compare"
	"github.com/yuin/goldmark"
	"github.com/yuin/goldmark/extension"
	"golang.org/x/net/html"
)

// Names that attack the reader rather than the format: bidirectional
// overrides and invisible characters (Boucher and Anderson, "Trojan
// Source: Invisible Vulnerabilities", 2021), spreadsheet formulas (OWASP,
// "CSV Injection"), and text that GitHub-flavoured Markdown links by
// itself ("extended autolinks" of the GFM specification).
var (
	bidiName    = "example.com/shop.(*Cart).Total\u202e 0001 \u2066gnp.exe\u2069\u202c"
	invisName   = "zero\u200bwidth\u200c\u200d\ufeffbom\u200e\u200f\u061c\U000E0041tag"
	formulas    = []string{`=HYPERLINK("http://attacker.invalid","x")`, "+1+cmd|' /C calc'!A0", "-2+3", "@SUM(A1:A9)", "\tlead tab", "\rlead cr", "'quoted"}
	linkName    = "see https://attacker.invalid/x, www.attacker.invalid, alice@example.org and mailto:bob@example.org"
	attackNames = append([]string{bidiName, invisName, linkName}, formulas...)
)

// attackResult is greenhouse with attack names in every text field a
// source controls: functions, statements, peers, systems, entries,
// findings and warnings.
func attackResult() *attribute.Result {
	r := greenhouse()
	r.Causes = nil
	for i, s := range attackNames {
		r.Causes = append(r.Causes, &attribute.Cause{Function: s, File: s, Line: 1, Kind: attribute.KindDatabase,
			Cost: int64(100 - i), Database: int64(100 - i), Share: float64(100-i) / 1000, Samples: 1, Calls: 1, Requests: 1,
			Statements: []attribute.Detail{{Kind: attribute.KindDatabase, System: s, Statement: s, Peer: s, Cost: int64(100 - i), Calls: 1, Samples: 1}}})
	}
	r.Entries[0].Entry = bidiName
	r.Findings[0].Function, r.Findings[0].Statement, r.Findings[0].Evidence = invisName, bidiName, linkName
	r.Warnings = append(r.Warnings, bidiName)
	return r
}

func attackDiff() *compare.Comparison {
	c := nurseryDiff()
	changes := make([]compare.Change, 0, len(attackNames))
	for i, s := range attackNames {
		ch := c.Changes[i%len(c.Changes)]
		ch.Function, ch.Identity, ch.Functions = s, s, nil
		changes = append(changes, ch)
	}
	c.Changes = changes
	c.Warnings = append(c.Warnings, bidiName)
	return c
}

// renderAll renders the attack result and comparison in every rank, diff
// and explain format.
func renderAll(t *testing.T) map[string]string {
	t.Helper()
	out := map[string]string{}
	for _, f := range Formats {
		rd, _ := ForFormat(f)
		var b bytes.Buffer
		if err := rd.Render(&b, attackResult(), Options{Limit: 0}); err != nil {
			t.Fatal(err)
		}
		out["rank "+f] = b.String()
	}
	for _, f := range DiffFormats {
		rd, _ := ForDiffFormat(f)
		var b bytes.Buffer
		if err := rd.RenderDiff(&b, attackDiff(), Options{}); err != nil {
			t.Fatal(err)
		}
		out["diff "+f] = b.String()
	}
	ex := []attribute.Explanation{{RootCause: bidiName, Cost: 1, Share: 1, Paths: []*attribute.ExplainNode{
		{Function: invisName, Class: "application", Cost: 1, Statements: []attribute.Detail{{Statement: bidiName, Peer: linkName}}}}}}
	for _, f := range ExplainFormats {
		rd, _ := ForExplainFormat(f)
		var b bytes.Buffer
		if err := rd.RenderExplain(&b, ex, "nanoseconds", Options{}); err != nil {
			t.Fatal(err)
		}
		out["explain "+f] = b.String()
	}
	return out
}

// A bidirectional override in a name reversed the HTML and Markdown
// headline, numbers included. No output holds an invisible character:
// human formats show \u202e as text, and JSON writes the same data as
// JSON escapes, so that it decodes to the exact name.
func TestTrojanSourceNamesShownEscaped(t *testing.T) {
	for name, out := range renderAll(t) {
		if i := strings.IndexFunc(out, isInvisible); i >= 0 {
			r, _ := utf8.DecodeRuneInString(out[i:])
			t.Errorf("%s holds invisible character %U at byte %d", name, r, i)
		}
		if !strings.Contains(out, `\u202e`) && !strings.Contains(out, `\\u202e`) {
			t.Errorf("%s does not show the override as \\u202e", name)
		}
	}
	var doc struct {
		Causes []struct{ Function string } `json:"rootCauses"`
	}
	if err := json.Unmarshal([]byte(renderAll(t)["rank json"]), &doc); err != nil {
		t.Fatal(err)
	}
	if doc.Causes[0].Function != bidiName || doc.Causes[1].Function != invisName {
		t.Errorf("JSON changed the names: %q %q", doc.Causes[0].Function, doc.Causes[1].Function)
	}
}

// Cells starting with =, +, -, @, tab or CR are formulas in a spreadsheet
// (OWASP, "CSV Injection"): such text cells get a leading apostrophe, the
// common practice, as do cells starting with one, so that every text
// reads back by removing one apostrophe. Numbers stay numbers, negative
// ones included.
func TestCSVFormulaInjection(t *testing.T) {
	out := renderAll(t)
	check := func(name string, textCols []string, numCols []string) {
		recs, err := csv.NewReader(strings.NewReader(out[name])).ReadAll()
		if err != nil {
			t.Fatalf("%s: %v", name, err)
		}
		col := map[string]int{}
		for i, h := range recs[0] {
			col[h] = i
		}
		seen := map[string]bool{}
		for _, rec := range recs[1:] {
			for _, c := range textCols {
				v := rec[col[c]]
				if v != "" && strings.ContainsRune("=+-@\t\r", rune(v[0])) {
					t.Errorf("%s: %s cell %q is a formula", name, c, v)
				}
				if strings.HasPrefix(v, "'") != (v != "" && strings.ContainsRune("=+-@\t\r'", rune(strings.TrimPrefix(v, "'")[0]))) {
					t.Errorf("%s: %s cell %q: apostrophe not exactly where needed", name, c, v)
				}
				seen[strings.TrimPrefix(v, "'")] = true
			}
			for _, c := range numCols {
				if _, err := strconv.ParseFloat(rec[col[c]], 64); err != nil {
					t.Errorf("%s: %s cell %q is not a number", name, c, rec[col[c]])
				}
			}
		}
		for _, f := range formulas {
			// Go's csv.Reader reads a quoted leading CR as it is, except
			// CRLF; every formula must come back after the apostrophe.
			if !seen[f] {
				t.Errorf("%s: formula %q does not read back after its apostrophe", name, f)
			}
		}
	}
	check("rank csv", []string{"function", "file", "system", "statement", "peer"}, []string{"cause_cost", "cause_share", "detail_cost"})
	check("diff csv", []string{"function", "identity"}, []string{"base", "candidate", "change"})
	if !strings.Contains(out["diff csv"], ",-") {
		t.Error("no negative number in the diff CSV: the numeric check proves nothing")
	}
}

// URLs and e-mail addresses in names became live links in rendered
// Markdown. Rendered by goldmark with its GitHub-flavoured extensions
// (linkify included), the reports hold no link; the same text unescaped
// does, so the check can fail.
func TestMarkdownAutolinks(t *testing.T) {
	md := goldmark.New(goldmark.WithExtensions(extension.GFM))
	render := func(src string) string {
		var b bytes.Buffer
		if err := md.Convert([]byte(src), &b); err != nil {
			t.Fatal(err)
		}
		return b.String()
	}
	if !strings.Contains(render(linkName), "<a ") {
		t.Fatal("goldmark does not link the raw text: the check proves nothing")
	}
	out := renderAll(t)
	for _, name := range []string{"rank markdown", "diff markdown"} {
		h := render(out[name])
		if strings.Contains(h, "<a ") {
			i := strings.Index(h, "<a ")
			t.Errorf("%s renders a link: %s", name, h[i:min(len(h), i+120)])
		}
		if !strings.Contains(h, "attacker.invalid") || !strings.Contains(h, "alice@example.org") {
			t.Errorf("%s lost the text of the names", name)
		}
	}
}

// A 30,000-character name took minutes to lay out at phone width in a
// table cell with overflow-wrap: anywhere. HTML cells show at most
// htmlNameRunes of a name (statements htmlTextRunes), with the full text
// in the title.
func TestHTMLLongNamesCut(t *testing.T) {
	long := "example.com/" + strings.Repeat("x", 30000) + ".(*T).Method"
	r := attackResult()
	r.Causes[0].Function = long
	r.Causes[0].Statements[0].Statement = "SELECT " + strings.Repeat("a, ", 10000) + "b FROM t"
	r.Entries[0].Entry = long
	r.Causes[1].File = long
	var b bytes.Buffer
	if err := (HTML{}).Render(&b, r, Options{}); err != nil {
		t.Fatal(err)
	}
	doc, err := html.Parse(&b)
	if err != nil {
		t.Fatal(err)
	}
	titled := 0
	var walk func(n *html.Node)
	walk = func(n *html.Node) {
		if n.Type == html.ElementNode && (n.Data == "td" || n.Data == "h3" || n.Data == "strong" || n.Data == "span" || n.Data == "code") {
			limit := htmlNameRunes + 10
			if n.Data == "code" {
				limit = htmlTextRunes
			}
			if got := utf8.RuneCountInString(text(n)); got > limit {
				t.Errorf("<%s> shows %d characters", n.Data, got)
			}
			if tt := attr(n, "title"); tt == long || strings.HasSuffix(tt, " b FROM t") {
				titled++
			}
		}
		for c := n.FirstChild; c != nil; c = c.NextSibling {
			walk(c)
		}
	}
	walk(doc)
	if titled < 4 { // headline, table cell, heading, statement, entry
		t.Errorf("%d elements carry the full text as title, want the cut ones", titled)
	}
}
