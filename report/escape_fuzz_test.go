package report

import (
	"bytes"
	"encoding/csv"
	"strconv"
	"strings"
	"testing"
	"unicode/utf8"

	"github.com/culprithq/culprit/callgraph"
	"github.com/yuin/goldmark"
	"github.com/yuin/goldmark/extension"
	dotfmt "gonum.org/v1/gonum/graph/formats/dot"
	"gonum.org/v1/gonum/graph/formats/dot/ast"
)

// FuzzRenderNames renders a random name, as every function, statement,
// peer, entry and warning, through every rank, diff and explain format
// and through DOT. Rendering never fails or panics, and the output
// properties the safety tests check hold for any name: no invisible
// character, no CSV formula, no Markdown link (goldmark with GFM), HTML
// cells cut, and a DOT document that gonum's parser reads as exactly the
// two nodes and one edge written, with the name only in labels.
func FuzzRenderNames(f *testing.F) {
	for _, s := range attackNames {
		f.Add(s)
	}
	for _, s := range hostile {
		f.Add(s)
	}
	md := goldmark.New(goldmark.WithExtensions(extension.GFM))
	f.Fuzz(func(t *testing.T, name string) {
		// renderAll reads the attack names: swap the fuzzed one in.
		saved, b, i, l := attackNames, bidiName, invisName, linkName
		attackNames, bidiName, invisName, linkName = []string{name, name + " " + name}, name, name, name
		defer func() { attackNames, bidiName, invisName, linkName = saved, b, i, l }()
		out := renderAll(t)
		for format, s := range out {
			if i := strings.IndexFunc(s, isInvisible); i >= 0 && utf8.ValidString(s[i:]) {
				t.Errorf("%s holds an invisible character at byte %d", format, i)
			}
		}
		for _, format := range []string{"rank csv", "diff csv"} {
			recs, err := csv.NewReader(strings.NewReader(out[format])).ReadAll()
			if err != nil {
				t.Fatalf("%s: %v", format, err)
			}
			for _, rec := range recs[1:] {
				for _, cell := range rec {
					if cell != "" && strings.IndexByte("=+-@\t\r", cell[0]) >= 0 {
						if _, err := strconv.ParseFloat(cell, 64); err != nil {
							t.Errorf("%s: formula cell %q", format, cell)
						}
					}
				}
			}
		}
		for _, format := range []string{"rank markdown", "diff markdown"} {
			var b bytes.Buffer
			if err := md.Convert([]byte(out[format]), &b); err != nil {
				t.Fatal(err)
			}
			if strings.Contains(b.String(), "<a ") {
				t.Errorf("%s renders a link", format)
			}
		}

		g := callgraph.NewDigraph("culprit")
		a, z := g.AddNode(name, callgraph.Attr{Key: "class", Value: name}), g.AddNode("database/sql.(*DB).Query")
		g.AddWeight(a, z, 1)
		doc, err := g.MarshalDOT()
		if err != nil {
			t.Fatal(err)
		}
		file, err := dotfmt.ParseBytes(doc)
		if err != nil {
			t.Fatalf("DOT does not parse: %v\n%s", err, doc)
		}
		nodes, edges := 0, 0
		for _, st := range file.Graphs[0].Stmts {
			switch st := st.(type) {
			case *ast.NodeStmt:
				nodes++
				for _, at := range st.Attrs {
					if at.Key != "label" && at.Key != "class" || !strings.HasPrefix(at.Val, `"`) {
						t.Errorf("node attribute %s=%s", at.Key, at.Val)
					}
				}
			case *ast.EdgeStmt:
				edges++
			default:
				t.Errorf("statement %T from a name", st)
			}
		}
		if nodes != 2 || edges != 1 {
			t.Errorf("%d nodes and %d edges, want 2 and 1:\n%s", nodes, edges, doc)
		}
	})
}
