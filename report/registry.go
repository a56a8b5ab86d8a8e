package report

import (
	"fmt"
	"io"
	"strings"

	"github.com/culprithq/culprit/attribute"
)

// ExplainRenderer writes the explanations of root causes in one format;
// unit is the value type's unit.
type ExplainRenderer interface {
	RenderExplain(w io.Writer, ex []attribute.Explanation, unit string, opts Options) error
}

// Format is one output format: its name and its renderer for each view
// (rank, diff, explain, latency and latency diff).
// A nil renderer means the format does not offer that view.
type Format struct {
	Name        string
	Rank        Renderer
	Diff        DiffRenderer
	Explain     ExplainRenderer
	Latency     LatencyRenderer
	LatencyDiff LatencyDiffRenderer
}

// registry is the one table of formats, in the order the help lists them.
// To add a format, write its renderers and add a row here (see
// DEVELOPERS.md, "Adding an output format").
var registry = []Format{
	{Name: "text", Rank: Text{}, Diff: DiffText{}, Explain: ExplainText{}, Latency: latencyText{}, LatencyDiff: latencyDiffDoc{"text"}},
	{Name: "markdown", Rank: Markdown{}, Diff: DiffMarkdown{}, Latency: latencyMarkdown{}, LatencyDiff: latencyDiffDoc{"markdown"}},
	{Name: "json", Rank: JSON{}, Diff: DiffJSON{}, Explain: ExplainJSON{}, Latency: latencyJSON{}, LatencyDiff: latencyDiffJSON{}},
	{Name: "csv", Rank: CSV{}, Diff: DiffCSV{}, Latency: latencyCSV{}, LatencyDiff: latencyDiffCSV{}},
	{Name: "html", Rank: HTML{}, Diff: DiffHTML{}, Latency: latencyHTML{}, LatencyDiff: latencyDiffHTML{}},
}

// Formats lists the format names ForFormat accepts.
var Formats = formatNames(func(f Format) bool { return f.Rank != nil })

// DiffFormats lists the format names ForDiffFormat accepts.
var DiffFormats = formatNames(func(f Format) bool { return f.Diff != nil })

// ExplainFormats lists the format names ForExplainFormat accepts.
var ExplainFormats = formatNames(func(f Format) bool { return f.Explain != nil })

// LatencyFormats and LatencyDiffFormats list the format names of the
// latency view and its comparison.
var (
	LatencyFormats     = formatNames(func(f Format) bool { return f.Latency != nil })
	LatencyDiffFormats = formatNames(func(f Format) bool { return f.LatencyDiff != nil })
)

func formatNames(has func(Format) bool) []string {
	var out []string
	for _, f := range registry {
		if has(f) {
			out = append(out, f.Name)
		}
	}
	return out
}

// lookup returns the format of a name that offers a view, or the error
// listing the names that do.
func lookup(name string, names []string, has func(Format) bool) (Format, error) {
	for _, f := range registry {
		if f.Name == name && has(f) {
			return f, nil
		}
	}
	return Format{}, fmt.Errorf("unknown format %q; --format must be one of: %s", name, strings.Join(names, ", "))
}

// ForFormat returns the rank renderer of a format name.
func ForFormat(name string) (Renderer, error) {
	f, err := lookup(name, Formats, func(f Format) bool { return f.Rank != nil })
	return f.Rank, err
}

// ForDiffFormat returns the comparison renderer of a format name.
func ForDiffFormat(name string) (DiffRenderer, error) {
	f, err := lookup(name, DiffFormats, func(f Format) bool { return f.Diff != nil })
	return f.Diff, err
}

// ForExplainFormat returns the explanation renderer of a format name.
func ForExplainFormat(name string) (ExplainRenderer, error) {
	f, err := lookup(name, ExplainFormats, func(f Format) bool { return f.Explain != nil })
	return f.Explain, err
}
