package report

import (
	"bufio"
	"fmt"
	"io"
	"strings"

	"github.com/culprithq/culprit/attribute"
)

// ExplainSchema is the version tag of the explain JSON document.
const ExplainSchema = "culprit.explain/v1"

// ExplainJSON renders the explanations as ExplainDocument (JSON Schema in
// testdata/schema/explain.schema.json).
type ExplainJSON struct{}

// ExplainText renders the explanations as an indented tree.
type ExplainText struct{}

// ExplainDocument is the culprit.explain/v1 document; lists are never null.
type ExplainDocument struct {
	Schema       string           `json:"schema"`
	ProducedBy   Provenance       `json:"producedBy"`
	Explanations []ExplanationDoc `json:"explanations"`
}

// ExplanationDoc shows how one root cause reaches its boundaries.
type ExplanationDoc struct {
	RootCause string           `json:"rootCause"`
	Cost      int64            `json:"cost"`
	Share     float64          `json:"share"`
	Paths     []ExplainNodeDoc `json:"paths"`
}

// ExplainNodeDoc is one frame on the paths of an explanation.
type ExplainNodeDoc struct {
	Function      string           `json:"function"`
	File          string           `json:"file,omitempty"`
	Line          int64            `json:"line,omitempty"`
	Classes       []string         `json:"classes"`
	Cost          int64            `json:"cost"`
	Calls         int64            `json:"calls"`
	Samples       int64            `json:"samples"`
	SkippedFrames int              `json:"skippedFrames,omitempty"`
	Statements    []DetailDoc      `json:"statements"`
	Children      []ExplainNodeDoc `json:"children"`
}

// RenderExplain implements ExplainRenderer.
func (ExplainJSON) RenderExplain(w io.Writer, ex []attribute.Explanation, unit string, opts Options) error {
	doc := ExplainDocument{Schema: ExplainSchema, ProducedBy: opts.Provenance, Explanations: []ExplanationDoc{}}
	for _, e := range ex {
		ed := ExplanationDoc{RootCause: e.RootCause, Cost: e.Cost, Share: e.Share, Paths: []ExplainNodeDoc{}}
		for _, n := range e.Paths {
			ed.Paths = append(ed.Paths, explainNodeDoc(n))
		}
		doc.Explanations = append(doc.Explanations, ed)
	}
	return writeJSON(w, doc)
}

func explainNodeDoc(n *attribute.ExplainNode) ExplainNodeDoc {
	out := ExplainNodeDoc{Function: n.Function, File: n.File, Line: n.Line, Classes: strings.Split(n.Class, ", "), Cost: n.Cost, Calls: n.Calls,
		Samples: n.Samples, SkippedFrames: n.Skipped, Statements: []DetailDoc{}, Children: []ExplainNodeDoc{}}
	for _, d := range n.Statements {
		calls := d.Calls
		out.Statements = append(out.Statements, DetailDoc{Kind: string(d.Kind), System: d.System, Statement: d.Statement,
			StatementID: d.StatementID, Peer: d.Peer, Via: d.Via, Cost: d.Cost, Calls: &calls, Samples: d.Samples})
	}
	for _, c := range n.Children {
		out.Children = append(out.Children, explainNodeDoc(c))
	}
	return out
}

// RenderExplain implements ExplainRenderer.
func (ExplainText) RenderExplain(w io.Writer, ex []attribute.Explanation, unit string, opts Options) error {
	bw := bufio.NewWriter(w)
	if len(ex) == 0 {
		fmt.Fprintln(bw, "No root cause matches the pattern.")
	}
	for i, e := range ex {
		if i > 0 {
			fmt.Fprintln(bw)
		}
		fmt.Fprintf(bw, "%s — %s, %s of database and network cost\n", oneLine(e.RootCause, 0), FormatValue(e.Cost, unit), Percent(e.Share))
		type item struct {
			n     *attribute.ExplainNode
			depth int
		}
		var stack []item
		for j := len(e.Paths) - 1; j >= 0; j-- {
			stack = append(stack, item{e.Paths[j], 1})
		}
		for len(stack) > 0 {
			it := stack[len(stack)-1]
			stack = stack[:len(stack)-1]
			n := it.n
			indent := strings.Repeat("  ", it.depth)
			skipped := ""
			if n.Skipped > 0 {
				skipped = fmt.Sprintf(" (via %d library frames)", n.Skipped)
			}
			site := ""
			if n.File != "" {
				site = " " + site2(n.File, n.Line)
			}
			count := ""
			if n.Calls > 0 {
				count = ", " + plural64(n.Calls, "call", "calls")
			} else if n.Samples > 0 {
				count = ", " + plural64(n.Samples, "sample", "samples")
			}
			fmt.Fprintf(bw, "%s%s [%s]%s%s — %s%s\n", indent, oneLine(n.Function, 0), n.Class, site, skipped, FormatValue(n.Cost, unit), count)
			for _, d := range n.Statements {
				line := fmt.Sprintf("%s  ↳ %s %s", indent, FormatValue(d.Cost, unit), oneLine(d.Statement, 200))
				if d.Peer != "" {
					line += " → " + oneLine(d.Peer, 100)
				}
				if d.System != "" {
					line += " [" + oneLine(d.System, 40) + "]"
				}
				if d.Calls > 0 {
					line += " (" + plural64(d.Calls, "call", "calls") + ")"
				}
				fmt.Fprintln(bw, line)
			}
			for j := len(n.Children) - 1; j >= 0; j-- {
				stack = append(stack, item{n.Children[j], it.depth + 1})
			}
		}
	}
	return bw.Flush()
}

func site2(file string, line int64) string {
	if i := strings.LastIndexByte(file, '/'); i >= 0 {
		file = file[i+1:]
	}
	return fmt.Sprintf("%s:%d", oneLine(file, 0), line)
}
