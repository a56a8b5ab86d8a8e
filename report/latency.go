package report

import (
	"bufio"
	_ "embed"
	"fmt"
	"html/template"
	"io"
	"math"
	"strconv"
	"strings"

	"github.com/culprithq/culprit/attribute"
	"github.com/culprithq/culprit/traces"
)

// LatencyRenderer writes a latency analysis in one format.
type LatencyRenderer interface {
	RenderLatency(w io.Writer, r *attribute.LatencyResult, opts Options) error
}

// ForLatencyFormat returns the latency renderer of a format name (see
// registry).
func ForLatencyFormat(name string) (LatencyRenderer, error) {
	f, err := lookup(name, LatencyFormats, func(f Format) bool { return f.Latency != nil })
	return f.Latency, err
}

// latencyHeadline is the one sentence that opens every human format: for
// the entry point with the slowest p95, what its tail spends its time on
// and how much of the median requests' time that is. Strings are raw.
type latencyHeadline struct {
	Entry, P95, Tail, Cause, Kind, TailShare, MedianShare string
	Sentence                                              string
}

func newLatencyHeadline(r *attribute.LatencyResult) latencyHeadline {
	if len(r.Entries) == 0 {
		return latencyHeadline{Sentence: "No requests found: no trace had a root span with timing."}
	}
	e := r.Entries[0]
	h := latencyHeadline{Entry: e.Entry, P95: formatDuration(e.P95), Tail: formatDuration(e.TailThreshold)}
	var top *attribute.LatencyCause
	for _, c := range e.Causes {
		if top == nil || c.TailPath > top.TailPath {
			top = c
		}
	}
	if top == nil {
		h.Sentence = fmt.Sprintf("%s p95 %s; its requests have no time on a critical path.", e.Entry, h.P95)
		return h
	}
	_, tail, median := top.Share(e)
	h.Cause, h.Kind, h.TailShare, h.MedianShare = top.Function, string(top.Kind), Percent(tail), Percent(median)
	what := "in " + top.Function + " (" + string(top.Kind) + ")"
	switch {
	case top.Kind == attribute.KindUnaccounted && r.Source == traces.ExecTrace:
		what = "in waits with no application function above them (unaccounted)"
	case top.Kind == attribute.KindUnaccounted:
		what = "in time no span covers (unaccounted: queueing or un-instrumented work)"
	case top.Kind == attribute.KindRunning:
		what = "running or waiting for a CPU in " + top.Function + " outside any wait (running)"
	}
	slow := fmt.Sprintf("its slowest %d requests (%s and slower) spend", e.TailRequests, h.Tail)
	if e.TailRequests == 1 {
		slow = fmt.Sprintf("its slowest request (%s) spends", h.Tail)
	}
	h.Sentence = fmt.Sprintf("%s p95 %s: %s %s of the time %s, against %s for the requests at or below the median.",
		e.Entry, h.P95, slow, h.TailShare, what, h.MedianShare)
	return h
}

// latencyCauses returns e's causes under opts.Limit and how many it cut.
func latencyCauses(e *attribute.LatencyEntry, opts Options) ([]*attribute.LatencyCause, int) {
	if opts.Limit > 0 && len(e.Causes) > opts.Limit {
		return e.Causes[:opts.Limit], len(e.Causes) - opts.Limit
	}
	return e.Causes, 0
}

func perReq(total int64, n int) float64 {
	if n == 0 {
		return 0
	}
	return float64(total) / float64(n)
}

type latencyText struct{}

func (latencyText) RenderLatency(w io.Writer, r *attribute.LatencyResult, opts Options) error {
	bw := bufio.NewWriter(w)
	width := textWidth(opts)
	writeWrapped(bw, newLatencyHeadline(r).Sentence, width, "  ")
	writeWrapped(bw, fmt.Sprintf("Critical paths of %s from %s; tail: requests at or above their entry point's %s.",
		plural(r.Requests, "request", "requests"), oneLine(latencyInputs(r), 200), quantileText(r.Tail)), width, "  ")
	for _, e := range r.Entries {
		fmt.Fprintln(bw)
		writeWrapped(bw, fmt.Sprintf("%s — %s; p50 %s, p95 %s, p99 %s, mean %s; tail %s (≥ %s)", oneLine(e.Entry, 0),
			plural(e.Requests, "request", "requests"), formatDuration(e.P50), formatDuration(e.P95), formatDuration(e.P99),
			formatDuration(e.Mean), plural(e.TailRequests, "request", "requests"), formatDuration(e.TailThreshold)), width, "  ")
		causes, cut := latencyCauses(e, opts)
		// The fixed columns take 55 runes; the name gets the rest.
		nameW := max(16, width-55)
		fmt.Fprintf(bw, "%8s %6s %8s %6s %8s  %-11s  %s\n", "ON PATH", "SHARE", "TAIL", "TAIL%", "SUMMED", "KIND", "ROOT CAUSE")
		for _, c := range causes {
			all, tail, _ := c.Share(e)
			fmt.Fprintf(bw, "%8s %6s %8s %6s %8s  %-11s  %s\n",
				formatDuration(perReq(c.Path, e.Requests)), Percent(all),
				formatDuration(perReq(c.TailPath, e.TailRequests)), Percent(tail),
				formatDuration(perReq(c.Summed, e.Requests)), c.Kind, Shorten(c.Function, nameW))
		}
		if cut > 0 {
			fmt.Fprintf(bw, "(%s more; --limit 0 shows all)\n", plural(cut, "cause", "causes"))
		}
	}
	fmt.Fprintln(bw)
	writeWrapped(bw, "ON PATH: mean time per request on the critical path (what requests waited for); TAIL: the same over the tail requests; SUMMED: the cause's whole time per request, parallel work included.", width, "")
	for _, wn := range r.Warnings {
		writeWrapped(bw, "warning: "+oneLine(wn, 400), width, "  ")
	}
	return bw.Flush()
}

func quantileText(q float64) string {
	return "p" + strconv.FormatFloat(q*100, 'f', -1, 64)
}

func latencyInputs(r *attribute.LatencyResult) string {
	names := make([]string, len(r.Inputs))
	for i, in := range r.Inputs {
		names[i] = in.Name
	}
	return strings.Join(names, ", ")
}

type latencyMarkdown struct{}

func (latencyMarkdown) RenderLatency(w io.Writer, r *attribute.LatencyResult, opts Options) error {
	bw := bufio.NewWriter(w)
	fmt.Fprintf(bw, "# What made requests slow\n\n%s\n\n", mdText(newLatencyHeadline(r).Sentence))
	fmt.Fprintf(bw, "Critical paths of %s; the tail is the requests at or above the %s of their entry point.\n",
		plural(r.Requests, "request", "requests"), quantileText(r.Tail))
	for _, e := range r.Entries {
		fmt.Fprintf(bw, "\n## %s\n\n%s; p50 %s, p95 %s, p99 %s, mean %s; tail: %s at or above %s.\n\n", mdText(e.Entry),
			plural(e.Requests, "request", "requests"), formatDuration(e.P50), formatDuration(e.P95), formatDuration(e.P99),
			formatDuration(e.Mean), plural(e.TailRequests, "request", "requests"), formatDuration(e.TailThreshold))
		mdRow(bw, []string{"Root cause", "Kind", "On path per request", "Share", "Tail per request", "Tail share", "Median share", "Summed per request"})
		mdRow(bw, []string{"---", "---", "---:", "---:", "---:", "---:", "---:", "---:"})
		causes, cut := latencyCauses(e, opts)
		for _, c := range causes {
			all, tail, median := c.Share(e)
			mdRow(bw, []string{mdText(c.Function), string(c.Kind), formatDuration(perReq(c.Path, e.Requests)), Percent(all),
				formatDuration(perReq(c.TailPath, e.TailRequests)), Percent(tail), Percent(median),
				formatDuration(perReq(c.Summed, e.Requests))})
		}
		if cut > 0 {
			fmt.Fprintf(bw, "\n%s more not shown.\n", plural(cut, "cause", "causes"))
		}
	}
	fmt.Fprintf(bw, "\n*On path* is the mean time per request on the critical path: what the request waited for. *Summed* is the cause's whole time, parallel work included; where it exceeds the time on the path, the difference overlapped other work.\n")
	if len(r.Warnings) > 0 {
		fmt.Fprintf(bw, "\n## Warnings\n\n")
		for _, wn := range r.Warnings {
			fmt.Fprintf(bw, "- %s\n", mdText(wn))
		}
	}
	writeMDProvenance(bw, opts.Provenance, latencyInputs(r))
	return bw.Flush()
}

func writeMDProvenance(w io.Writer, p Provenance, inputs string) {
	fmt.Fprintf(w, "\n## How this was produced\n\n- command: %s\n- version: %s\n- inputs: %s\n", mdCode(p.Command), mdCode(p.Version), mdText(inputs))
}

// JSON output types of culprit.latency/v1. Times are nanoseconds.
type latencyDoc struct {
	Schema     string         `json:"schema"`
	Inputs     []InputDoc     `json:"inputs"`
	Tail       float64        `json:"tail"`
	Requests   int            `json:"requests"`
	Headline   string         `json:"headline"`
	Entries    []latencyEntry `json:"entries"`
	App        AppDoc         `json:"app"`
	Warnings   []string       `json:"warnings"`
	ProducedBy Provenance     `json:"producedBy"`
}

type latencyEntry struct {
	Entry    string         `json:"entry"`
	Requests int            `json:"requests"`
	Latency  latencyStats   `json:"latency"`
	Tail     tailDoc        `json:"tail"`
	Causes   []latencyCause `json:"causes"`
	Omitted  int            `json:"omittedCauses,omitempty"`
}

type latencyStats struct {
	P50  int64 `json:"p50"`
	P95  int64 `json:"p95"`
	P99  int64 `json:"p99"`
	Mean int64 `json:"mean"`
}

type tailDoc struct {
	Quantile  float64 `json:"quantile"`
	Threshold int64   `json:"threshold"`
	Requests  int     `json:"requests"`
}

type latencyCause struct {
	Function     string      `json:"function"`
	Kind         string      `json:"kind"`
	NoAppFrame   bool        `json:"noAppFrame"`
	Requests     int         `json:"requests"`
	CriticalPath criticalDoc `json:"criticalPath"`
	SummedTime   summedDoc   `json:"summedTime"`
}

type criticalDoc struct {
	MeanPerRequest     int64   `json:"meanPerRequest"`
	Share              float64 `json:"share"`
	TailMeanPerRequest int64   `json:"tailMeanPerRequest"`
	TailShare          float64 `json:"tailShare"`
	MedianShare        float64 `json:"medianShare"`
}

type summedDoc struct {
	MeanPerRequest int64 `json:"meanPerRequest"`
}

func ns(f float64) int64 { return int64(math.Round(f)) }

// share rounds a fraction to 6 decimals, so that JSON carries no float noise.
func share(f float64) float64 { return math.Round(f*1e6) / 1e6 }

type latencyJSON struct{}

func (latencyJSON) RenderLatency(w io.Writer, r *attribute.LatencyResult, opts Options) error {
	doc := latencyDoc{Schema: "culprit.latency/v1", Tail: r.Tail, Requests: r.Requests,
		Headline: newLatencyHeadline(r).Sentence, App: appDoc(r.App), Warnings: r.Warnings, ProducedBy: opts.Provenance,
		Inputs: []InputDoc{}, Entries: []latencyEntry{}}
	if doc.Warnings == nil {
		doc.Warnings = []string{}
	}
	for _, in := range r.Inputs {
		doc.Inputs = append(doc.Inputs, inputDoc(in))
	}
	for _, e := range r.Entries {
		causes, cut := latencyCauses(e, opts)
		je := latencyEntry{Entry: e.Entry, Requests: e.Requests,
			Latency: latencyStats{ns(e.P50), ns(e.P95), ns(e.P99), ns(e.Mean)},
			Tail:    tailDoc{r.Tail, ns(e.TailThreshold), e.TailRequests}, Causes: []latencyCause{}, Omitted: cut}
		for _, c := range causes {
			all, tail, median := c.Share(e)
			je.Causes = append(je.Causes, latencyCause{Function: c.Function, Kind: string(c.Kind), NoAppFrame: c.NoAppFrame,
				Requests: c.Requests,
				CriticalPath: criticalDoc{ns(perReq(c.Path, e.Requests)), share(all), ns(perReq(c.TailPath, e.TailRequests)),
					share(tail), share(median)},
				SummedTime: summedDoc{ns(perReq(c.Summed, e.Requests))}})
		}
		doc.Entries = append(doc.Entries, je)
	}
	return writeJSON(w, doc)
}

type latencyCSV struct{}

// latencyCSVHeader is the CSV column order; columns are only ever added at the end.
var latencyCSVHeader = []string{"entry", "entry_requests", "p50_ns", "p95_ns", "p99_ns", "mean_ns", "tail_threshold_ns",
	"tail_requests", "function", "kind", "no_app_frame", "cause_requests", "path_per_request_ns", "share",
	"tail_path_per_request_ns", "tail_share", "median_share", "summed_per_request_ns"}

func (latencyCSV) RenderLatency(w io.Writer, r *attribute.LatencyResult, opts Options) error {
	cw := newCSVWriter(w)
	if err := cw.Write(latencyCSVHeader); err != nil {
		return err
	}
	i64 := func(f float64) string { return strconv.FormatInt(ns(f), 10) }
	fl := func(f float64) string { return strconv.FormatFloat(share(f), 'f', -1, 64) }
	for _, e := range r.Entries {
		causes, cut := latencyCauses(e, opts)
		head := []string{e.Entry, strconv.Itoa(e.Requests), i64(e.P50), i64(e.P95), i64(e.P99), i64(e.Mean),
			i64(e.TailThreshold), strconv.Itoa(e.TailRequests)}
		for _, c := range causes {
			all, tail, median := c.Share(e)
			row := append(append([]string(nil), head...), c.Function, string(c.Kind), strconv.FormatBool(c.NoAppFrame),
				strconv.Itoa(c.Requests), i64(perReq(c.Path, e.Requests)), fl(all), i64(perReq(c.TailPath, e.TailRequests)),
				fl(tail), fl(median), i64(perReq(c.Summed, e.Requests)))
			if err := cw.Write(row); err != nil {
				return err
			}
		}
		if cut > 0 {
			row := append(append([]string(nil), head...), fmt.Sprintf("(omitted %d)", cut))
			row = append(row, make([]string, len(latencyCSVHeader)-len(row))...)
			if err := cw.Write(row); err != nil {
				return err
			}
		}
	}
	cw.Flush()
	return cw.Error()
}

//go:embed latency.tmpl
var latencyTemplate string

var latencyPage = template.Must(template.New("latency").Funcs(htmlFuncs).Funcs(template.FuncMap{
	"dur":    formatDuration,
	"pct":    Percent,
	"perReq": func(t int64, n int) string { return formatDuration(perReq(t, n)) },
	"plural": plural,
	"shareOf": func(c *attribute.LatencyCause, e *attribute.LatencyEntry) [3]string {
		a, t, m := c.Share(e)
		return [3]string{Percent(a), Percent(t), Percent(m)}
	},
	"clean": clean,
}).Parse(latencyTemplate))

type latencyHTML struct{}

type latencyPageData struct {
	Headline string
	R        *attribute.LatencyResult
	Entries  []latencyPageEntry
	Tail     string
	Inputs   string
	Prov     Provenance
}

type latencyPageEntry struct {
	E      *attribute.LatencyEntry
	Causes []*attribute.LatencyCause
	Cut    int
}

func (latencyHTML) RenderLatency(w io.Writer, r *attribute.LatencyResult, opts Options) error {
	d := latencyPageData{Headline: newLatencyHeadline(r).Sentence, R: r, Tail: quantileText(r.Tail),
		Inputs: latencyInputs(r), Prov: opts.Provenance}
	for _, e := range r.Entries {
		cs, cut := latencyCauses(e, opts)
		d.Entries = append(d.Entries, latencyPageEntry{e, cs, cut})
	}
	return latencyPage.Execute(w, d)
}

// RenderLatencyPaths writes the critical paths of the slowest requests
// of the entry points whose name matches (explain --latency): an
// indented list of spans with their time on the path. format is text,
// markdown (the same list in a code block) or json.
func RenderLatencyPaths(w io.Writer, format string, entries []*attribute.LatencyEntry) error {
	switch format {
	case "json":
		type doc struct {
			Schema  string `json:"schema"`
			Entries []struct {
				Entry   string                   `json:"entry"`
				Slowest []*attribute.RequestPath `json:"slowest"`
			} `json:"entries"`
		}
		d := doc{Schema: "culprit.latency-paths/v1"}
		for _, e := range entries {
			d.Entries = append(d.Entries, struct {
				Entry   string                   `json:"entry"`
				Slowest []*attribute.RequestPath `json:"slowest"`
			}{e.Entry, e.Slowest})
		}
		return writeJSON(w, d)
	case "text", "markdown", "":
	default:
		return fmt.Errorf("explain --latency writes text, markdown or json, not %q", format)
	}
	bw := bufio.NewWriter(w)
	if format == "markdown" {
		fmt.Fprintln(bw, "# Critical paths of the slowest requests")
	}
	for _, e := range entries {
		if format == "markdown" {
			fmt.Fprintf(bw, "\n## %s\n\n```text\n", mdText(e.Entry))
		} else {
			fmt.Fprintf(bw, "%s — p50 %s, p95 %s\n", oneLine(e.Entry, 0), formatDuration(e.P50), formatDuration(e.P95))
		}
		for _, rp := range e.Slowest {
			fmt.Fprintf(bw, "request %s: %s\n", oneLine(rp.Request, 64), formatDuration(float64(rp.Latency)))
			fmt.Fprintf(bw, "%9s %6s  %s\n", "ON PATH", "SHARE", "SPAN")
			writePathSpan(bw, rp.Root, rp.Latency, 0)
		}
		if format == "markdown" {
			fmt.Fprintln(bw, "```")
		} else {
			fmt.Fprintln(bw)
		}
	}
	fmt.Fprintln(bw, "Each line: time on the critical path (share of the request), the span, when it started and how long it lasted; spans not on the path are left out.")
	return bw.Flush()
}

func writePathSpan(w io.Writer, s *attribute.PathSpan, latency int64, depth int) {
	if s == nil {
		return
	}
	what := string(s.Kind)
	// The cause, unless the span is its own (an application span, the
	// request's goroutine) or it is the entry point's unaccounted time.
	if s.Cause != "" && s.Cause != s.Function && s.Kind != attribute.KindUnaccounted {
		what += " → " + Shorten(s.Cause, 60)
	}
	fmt.Fprintf(w, "%9s %6s  %s%s  [%s; at +%s, lasted %s]\n",
		formatDuration(float64(s.OnPath)), Percent(ratio64(s.OnPath, latency)), strings.Repeat("  ", depth), oneLine(s.Function, 120),
		oneLine(what, 100), formatDuration(float64(s.Start)), formatDuration(float64(s.Duration)))
	for _, c := range s.Children {
		writePathSpan(w, c, latency, depth+1)
	}
}

func ratio64(a, b int64) float64 {
	if b <= 0 {
		return 0
	}
	return float64(a) / float64(b)
}
