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

// RenderExplanations writes explanations as an indented tree (format
// "text") or as JSON ("json"). unit is the value type's unit.
func RenderExplanations(w io.Writer, format string, ex []attribute.Explanation, unit string, opts Options) error {
	switch format {
	case "json":
		return writeJSON(w, struct {
			Schema       string                  `json:"schema"`
			Provenance   Provenance              `json:"producedBy"`
			Explanations []attribute.Explanation `json:"explanations"`
		}{ExplainSchema, opts.Provenance, ex})
	case "text", "":
	default:
		return fmt.Errorf("--format must be one of: text, json")
	}
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
				count = fmt.Sprintf(", %d calls", n.Calls)
			} else if n.Samples > 0 {
				count = fmt.Sprintf(", %d samples", n.Samples)
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
					line += fmt.Sprintf(" (%d calls)", d.Calls)
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
