package report

import (
	"bufio"
	"bytes"
	_ "embed"
	"fmt"
	"html/template"
	"io"
	"math"
	"strconv"
	"strings"

	"github.com/culprithq/culprit/attribute/compare"
	json "github.com/goccy/go-json"
)

// LatencyDiffRenderer writes a latency comparison (diff --latency).
type LatencyDiffRenderer interface {
	RenderLatencyDiff(w io.Writer, c *compare.LatencyComparison, opts Options) error
}

// ForLatencyDiffFormat returns the latency-diff renderer of a format name
// (see registry).
func ForLatencyDiffFormat(name string) (LatencyDiffRenderer, error) {
	f, err := lookup(name, LatencyDiffFormats, func(f Format) bool { return f.LatencyDiff != nil })
	return f.LatencyDiff, err
}

// routeQText renders one quantile's change: "120ms → 180ms, +50% [+41%, +58%]".
func routeQText(q compare.QuantileChange) string {
	s := formatDuration(q.Base) + " → " + formatDuration(q.Candidate)
	ch := compare.Change{RelativeChange: q.RelativeChange, RelLo: q.RelLo, RelHi: q.RelHi}
	if q.RelativeChange != nil {
		s += ", " + relText(ch)
	}
	return s
}

// latencyDiffDoc is the text and Markdown report: the routes' latency,
// then the causes' critical-path time as the diff report shows causes.
type latencyDiffDoc struct{ format string }

func (d latencyDiffDoc) RenderLatencyDiff(w io.Writer, c *compare.LatencyComparison, opts Options) error {
	bw := bufio.NewWriter(w)
	md := d.format == "markdown"
	title := "Latency per entry point"
	if md {
		fmt.Fprintf(bw, "# %s\n\n", title)
		mdRow(bw, []string{"Entry point", "Verdict (p95)", "Requests", "p50", "p95"})
		mdRow(bw, []string{"---", "---", "---:", "---", "---"})
	} else {
		writeWrapped(bw, fmt.Sprintf("culprit diff --latency: %s (p50 and p95 with %s bootstrap intervals; the verdict follows p95)", strings.ToLower(title), pctText(compare.CompareConfidence)), textWidth(opts), "  ")
	}
	for _, r := range c.Routes {
		reqs := fmt.Sprintf("%d → %d", r.BaseRequests, r.CandRequests)
		if md {
			mdRow(bw, []string{mdText(r.Entry), string(r.Verdict), reqs, routeQText(r.P50), routeQText(r.P95)})
			continue
		}
		fmt.Fprintf(bw, "  %-12s %s (%s requests)\n      p50 %s\n      p95 %s\n", r.Verdict, oneLine(r.Entry, 0), reqs,
			routeQText(r.P50), routeQText(r.P95))
	}
	cs := c.Causes
	changes := shownChanges(cs, opts)
	if md {
		fmt.Fprintf(bw, "\n# Time on the critical path per root cause\n\n%s\n\n", mdText(newDiffHeadline(cs).Lead))
		mdRow(bw, []string{"Verdict", "Entry point", "Root cause", "Kind", "Base", "Candidate", "Relative [" + confText(cs.Confidence) + " CI]", "q", "MDE"})
		mdRow(bw, []string{"---", "---", "---", "---", "---:", "---:", "---:", "---:", "---:"})
		for _, ch := range changes {
			k := c.Of[ch.Identity]
			mdRow(bw, []string{string(ch.Verdict), mdText(k.Entry), mdText(k.Function), string(k.Kind), formatDuration(ch.Base),
				formatDuration(ch.Candidate), relText(ch), qText(ch.QValue), mdeText(ch)})
		}
	} else {
		width := textWidth(opts)
		fmt.Fprintln(bw)
		writeWrapped(bw, "Time on the critical path per request of its entry point, per root cause: "+newDiffHeadline(cs).Lead, width, "  ")
		fmt.Fprintf(bw, "%-12s %8s   %8s  %-22s %-8s %s\n", "VERDICT", "BASE", "CAND", "RELATIVE ["+confText(cs.Confidence)+" CI]", "Q", "KIND")
		fmt.Fprintf(bw, "    ENTRY POINT: ROOT CAUSE\n")
		for _, ch := range changes {
			k := c.Of[ch.Identity]
			fmt.Fprintf(bw, "%-12s %8s → %8s  %-22s %-8s %s\n", ch.Verdict, formatDuration(ch.Base), formatDuration(ch.Candidate),
				relText(ch), qText(ch.QValue), k.Kind)
			fmt.Fprintf(bw, "    %s: %s\n", oneLine(k.Entry, 40), Shorten(k.Function, max(20, width-6-min(40, len(k.Entry)))))
		}
	}
	if more := hiddenChanges(cs, opts); more > 0 {
		fmt.Fprintf(bw, "\n(%d more not shown; --limit 0 shows all)\n", more)
	}
	width := textWidth(opts)
	line := func(text string) {
		if md {
			fmt.Fprintln(bw, oneLine(text, 0))
		} else {
			writeWrapped(bw, text, width, "  ")
		}
	}
	if b := belowText(cs, 5); b != "" {
		fmt.Fprintln(bw)
		line(b)
	}
	fmt.Fprintln(bw)
	for _, wn := range cs.Warnings {
		line("warning: " + oneLine(wn, 400))
	}
	line("note: " + unchangedNote(cs))
	sig := fmt.Sprintf("Significance: q ≤ %s (Benjamini–Hochberg across causes), one bootstrap per request giving p-value and %s interval; budget %s.",
		strconv.FormatFloat(cs.Alpha, 'g', -1, 64), confText(cs.Confidence), budgetText(cs))
	line(sig)
	return bw.Flush()
}

type latencyDiffJSON struct{}

func (latencyDiffJSON) RenderLatencyDiff(w io.Writer, c *compare.LatencyComparison, opts Options) error {
	var causes bytes.Buffer
	if err := (DiffJSON{}).RenderDiff(&causes, c.Causes, opts); err != nil {
		return err
	}
	doc := struct {
		Schema string                `json:"schema"`
		Routes []compare.RouteChange `json:"routes"`
		Causes json.RawMessage       `json:"causes"`
	}{Schema: "culprit.latency-diff/v1", Routes: c.Routes, Causes: causes.Bytes()}
	if doc.Routes == nil {
		doc.Routes = []compare.RouteChange{}
	}
	return writeJSON(w, doc)
}

type latencyDiffCSV struct{}

// latencyDiffCSVHeader: one row per route quantile and per cause; columns
// are only ever added at the end.
var latencyDiffCSVHeader = []string{"row", "name", "quantile", "base_ns", "candidate_ns", "change_ns",
	"relative_change", "rel_lo", "rel_hi", "q_value", "verdict", "kind"}

func (latencyDiffCSV) RenderLatencyDiff(w io.Writer, c *compare.LatencyComparison, opts Options) error {
	cw := newCSVWriter(w)
	if err := cw.Write(latencyDiffCSVHeader); err != nil {
		return err
	}
	num := func(f float64) string { return strconv.FormatFloat(math.Round(f), 'f', -1, 64) } // whole ns
	for _, r := range c.Routes {
		for _, q := range []struct {
			name string
			qc   compare.QuantileChange
		}{{"p50", r.P50}, {"p95", r.P95}} {
			row := []string{"route", r.Entry, q.name, num(q.qc.Base), num(q.qc.Candidate), num(q.qc.Candidate - q.qc.Base),
				csvOptional(q.qc.RelativeChange), csvOptional(q.qc.RelLo), csvOptional(q.qc.RelHi), "", string(r.Verdict), ""}
			if err := cw.Write(row); err != nil {
				return err
			}
		}
	}
	for _, ch := range shownChanges(c.Causes, opts) {
		row := []string{"cause", ch.Function, "", num(ch.Base), num(ch.Candidate), num(ch.Change),
			csvOptional(ch.RelativeChange), csvOptional(ch.RelLo), csvOptional(ch.RelHi), csvOptional(ch.QValue),
			string(ch.Verdict), string(ch.Kind)}
		if err := cw.Write(row); err != nil {
			return err
		}
	}
	cw.Flush()
	return cw.Error()
}

//go:embed latency_diff.tmpl
var latencyDiffTemplate string

var latencyDiffPage = template.Must(template.New("latency-diff").Funcs(template.FuncMap{
	"q":     routeQText,
	"rel":   relText,
	"rate":  func(v float64) string { return formatDuration(v) },
	"qv":    qText,
	"clean": clean,
}).Parse(latencyDiffTemplate))

type latencyDiffHTML struct{}

func (latencyDiffHTML) RenderLatencyDiff(w io.Writer, c *compare.LatencyComparison, opts Options) error {
	return latencyDiffPage.Execute(w, struct {
		C       *compare.LatencyComparison
		Changes []compare.Change
		Prov    Provenance
	}{c, shownChanges(c.Causes, opts), opts.Provenance})
}
