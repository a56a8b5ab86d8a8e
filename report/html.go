package report

import (
	"crypto/sha256"
	_ "embed"
	"encoding/base64"
	"fmt"
	"html/template"
	"io"
	"math"
	"strconv"

	"github.com/culprithq/culprit/attribute"
)

// HTML renders one self-contained HTML5 page: the headline, a bar chart of
// root-cause shares (with ± whiskers for sampled sources) and a stacked
// bar chart per entry point, both inline SVG; a sortable table of root
// causes; statements, findings, caveats, warnings and how the page was
// produced. The page fetches nothing (a Content-Security-Policy forbids it
// and allows only its own script, by hash), reads the same in print and in
// greyscale (kinds differ by shape: database solid, network hatched, mixed
// cross-hatched, no application frame dotted outline), and is complete
// without its script, which only sorts the table.
//
// Every input string goes through html/template's contextual escaping after
// control characters become spaces and invalid UTF-8 becomes U+FFFD.
// Options.Color and Options.Width are ignored.
type HTML struct{}

//go:embed html.tmpl
var htmlSource string

// htmlTemplate is compiled once; a broken template fails every test.
var htmlTemplate = template.Must(template.Must(template.New("html.tmpl").Funcs(htmlFuncs).Parse(htmlSource)).Parse(layoutSource))

// layoutSource defines the CSS that the rank and diff pages share.
//
//go:embed layout.tmpl
var layoutSource string

// sortScript sorts a table.sortable by the clicked header: numerically on
// the cells' data-v attribute for th[data-type=num], else by text; rank
// order breaks ties. It is hashed into the page's Content-Security-Policy.
const sortScript = `(function () {
  "use strict";
  function key(row, col) {
    var c = row.cells[col], v = c.getAttribute("data-v");
    return v === null ? c.textContent : v;
  }
  function num(s) {
    var f = parseFloat(s);
    return isNaN(f) ? -Infinity : f;
  }
  function sorter(table, col) {
    return function () {
      var heads = table.tHead.rows[0].cells, th = heads[col];
      var asc = th.getAttribute("aria-sort") !== "ascending";
      var numeric = th.getAttribute("data-type") === "num";
      for (var i = 0; i < heads.length; i++) heads[i].removeAttribute("aria-sort");
      th.setAttribute("aria-sort", asc ? "ascending" : "descending");
      var body = table.tBodies[0];
      var rows = Array.prototype.slice.call(body.rows);
      rows.sort(function (a, b) {
        var x = key(a, col), y = key(b, col);
        var c = numeric ? num(x) - num(y) : x.localeCompare(y);
        if (!asc) c = -c;
        return c !== 0 ? c : num(a.getAttribute("data-rank")) - num(b.getAttribute("data-rank"));
      });
      for (var j = 0; j < rows.length; j++) body.appendChild(rows[j]);
    };
  }
  var tables = document.querySelectorAll("table.sortable");
  for (var t = 0; t < tables.length; t++) {
    var heads = tables[t].tHead.rows[0].cells;
    for (var i = 0; i < heads.length; i++) {
      var f = sorter(tables[t], i);
      heads[i].tabIndex = 0;
      heads[i].title = "Sort by this column";
      heads[i].addEventListener("click", f);
      heads[i].addEventListener("keydown", (function (f) {
        return function (e) { if (e.key === "Enter" || e.key === " ") { e.preventDefault(); f(); } };
      })(f));
    }
  }
})();`

// Chart geometry in SVG user units (px at 100%).
const (
	chartWidth   = 760.0
	chartNameEnd = 292.0 // right edge of the name labels
	chartX0      = 300.0 // left edge of the bars
	chartBarMax  = 340.0 // longest bar
	chartRow     = 26.0
	chartBar     = 16.0
	chartTop     = 8.0
	chartName    = 44 // runes of a shortened name label
	chartEntries = 20 // entry points drawn
	chartCauses  = 20 // bars of the root-cause chart, the last one "others" when there are more
)

// htmlDomain is one row of the business-domain table.
type htmlDomain struct {
	Domain, Share, Cost string
	Database, Network   string
	ShareV              float64
	CostV               int64
	DatabaseV, NetworkV int64
	Causes              int
}

type htmlPage struct {
	CSP         string
	Script      template.JS
	Headline    headline
	Source      string
	Sampled     bool
	CountHeader string
	PerRequest  bool
	Requests    bool
	Rows        []htmlRow
	More        int
	Chart       *causeChart
	Statements  []htmlStatements
	Findings    []htmlFinding
	Entries     []htmlEntry
	Domains     []htmlDomain
	EntryChart  *entryChart
	EntriesMore int
	Unit        string
	App         string
	Caveats     []string
	Warnings    []string
	Produced    produced
}

type htmlRow struct {
	Rank                            int
	Share, ShareV, Cost, PerRequest string
	PerRequestP95                   string
	CostV, Count                    int64
	PerRequestV, Kind, Class        string
	Function, Site, File            string
	FnParts                         []string
}

type htmlEntry struct {
	Entry                           string
	EntryParts                      []string
	Database, Network, Other, Total string
	DatabaseV, NetworkV, OtherV     int64
	TotalV                          int64
	Requests                        int
}

type htmlStatements struct {
	Rank     int
	Function string
	Lines    []htmlDetail
	More     int
}

type htmlDetail struct {
	Cost, Count, Kind, System, Statement, Peer, Via string
}

type htmlFinding struct {
	Kind, Function, Evidence, Share, Cost string
	Facts                                 []evidence
}

type causeChart struct {
	Width, Height, X0, AxisY, TickY string
	Ticks                           []chartTick
	Bars                            []causeBar
}

type chartTick struct{ X, Label string }

type causeBar struct {
	Class, Name, Title, Label string
	NameX, TextY, X, Y, W, H  string
	LabelX                    string
	Whisker                   bool
	WX1, WX2, WY, WTop, WBot  string
}

type entryChart struct {
	Width, Height string
	Rows          []entryBar
}

type entryBar struct {
	Name, Title, Label, NameX, TextY, LabelX string
	Segments                                 []entrySegment
}

type entrySegment struct{ Class, X, Y, W, H, Title string }

// pagePolicy is the Content-Security-Policy of every page culprit writes:
// nothing may be fetched, and the only script allowed is the package's own
// table-sorting script, by its hash.
func pagePolicy() string {
	sum := sha256.Sum256([]byte(sortScript))
	return "default-src 'none'; style-src 'unsafe-inline'; script-src 'sha256-" +
		base64.StdEncoding.EncodeToString(sum[:]) + "'; base-uri 'none'; form-action 'none'"
}

// Render implements Renderer.
func (HTML) Render(w io.Writer, r *attribute.Result, opts Options) error {
	unit := r.ValueType.Unit
	causes := shown(r, opts)
	p := htmlPage{
		CSP:         pagePolicy(),
		Script:      template.JS(sortScript), // a constant of this package, never user data
		Headline:    newHeadline(r),
		Source:      clean(sourceSentence(r)),
		Sampled:     r.Sampled,
		CountHeader: countHeader(r),
		PerRequest:  anyPerRequest(causes),
		Requests:    r.Totals.Requests > 0,
		More:        len(r.Causes) - len(causes),
		Unit:        unit,
		App:         clean(AppSummary(r)),
		Produced:    newProduced(r, opts.Provenance),
	}
	p.Headline.Function, p.Headline.Detail = clean(p.Headline.Function), clean(p.Headline.Detail)
	for i, c := range causes {
		row := htmlRow{Rank: i + 1, Share: shareText(r, c), ShareV: strconv.FormatFloat(c.Share, 'g', -1, 64),
			Cost: FormatValue(c.Cost, unit), CostV: c.Cost, Count: countOf(r, c), PerRequest: perRequestText(c)[0], PerRequestP95: perRequestText(c)[1],
			Kind: clean(string(c.Kind)), Class: kindClass(c), Function: clean(c.Function), Site: clean(site(c)), File: clean(c.File), FnParts: nameParts(Shorten(clean(c.Function), htmlNameRunes))}
		if c.CallsPerRequest != nil {
			row.PerRequestV = strconv.FormatFloat(c.CallsPerRequest.Median, 'g', -1, 64)
		}
		p.Rows = append(p.Rows, row)
		st := htmlStatements{Rank: i + 1, Function: row.Function}
		for j, d := range c.Statements {
			if j == topStatements {
				st.More = len(c.Statements) - j
				break
			}
			hd := htmlDetail{Cost: FormatValue(d.Cost, unit), Kind: clean(string(d.Kind)), System: clean(d.System),
				Statement: clean(d.Statement), Peer: clean(d.Peer), Via: clean(d.Via)}
			if r.Sampled {
				hd.Count = plural64(d.Samples, "sample", "samples")
			} else {
				hd.Count = plural64(d.Calls, "call", "calls")
			}
			st.Lines = append(st.Lines, hd)
		}
		p.Statements = append(p.Statements, st)
	}
	if len(causes) > 0 {
		p.Chart = newCauseChart(r, causes)
	}
	for _, f := range r.Findings {
		hf := htmlFinding{Kind: clean(f.Kind), Function: clean(f.Function), Evidence: clean(f.Evidence),
			Share: Percent(f.Share), Cost: FormatValue(f.Cost, unit)}
		for _, ev := range findingEvidence(f) {
			ev.Value = clean(ev.Value)
			hf.Facts = append(hf.Facts, ev)
		}
		p.Findings = append(p.Findings, hf)
	}
	for _, d := range r.Domains {
		p.Domains = append(p.Domains, htmlDomain{Domain: clean(d.Domain), Share: Percent(d.Share), ShareV: d.Share,
			Cost: FormatValue(d.Cost, unit), CostV: d.Cost, Causes: d.Causes,
			Database: FormatValue(d.Database, unit), DatabaseV: d.Database, Network: FormatValue(d.Network, unit), NetworkV: d.Network})
	}
	for _, e := range r.Entries {
		p.Entries = append(p.Entries, htmlEntry{Entry: entryName(e.Entry), EntryParts: nameParts(Shorten(entryName(e.Entry), htmlNameRunes)),
			Database: FormatValue(e.Database, unit), Network: FormatValue(e.Network, unit),
			Other: FormatValue(entryOther(e), unit), Total: FormatValue(e.Cost, unit),
			DatabaseV: e.Database, NetworkV: e.Network, OtherV: entryOther(e), TotalV: e.Cost, Requests: e.Requests})
	}
	if len(r.Entries) > 0 {
		p.EntryChart = newEntryChart(r.Entries, unit)
		p.EntriesMore = max(0, len(r.Entries)-chartEntries)
	}
	for _, c := range Caveats(r) {
		p.Caveats = append(p.Caveats, clean(c))
	}
	for _, wn := range r.Warnings {
		p.Warnings = append(p.Warnings, clean(wn))
	}
	pr := &p.Produced
	pr.Version, pr.ValueType, pr.Source = clean(pr.Version), clean(pr.ValueType), clean(pr.Source)
	pr.RulesFiles, pr.Prefixes, pr.Options = cleanAll(pr.RulesFiles), cleanAll(pr.Prefixes), cleanAll(pr.Options)
	for i := range pr.Inputs {
		in := &pr.Inputs[i]
		in.Name, in.Format, in.SHA256 = clean(in.Name), clean(in.Format), clean(in.SHA256)
	}
	return htmlTemplate.Execute(w, p)
}

// nameParts splits a cleaned name after each "/" and "." so that the page
// can offer a line break there (<wbr>) instead of breaking inside a word.
func nameParts(name string) []string {
	var out []string
	start := 0
	for i := 0; i < len(name); i++ {
		if name[i] == '/' || name[i] == '.' {
			out = append(out, name[start:i+1])
			start = i + 1
		}
	}
	if start < len(name) {
		out = append(out, name[start:])
	}
	return out
}

func cleanAll(in []string) []string {
	out := make([]string, len(in))
	for i, s := range in {
		out[i] = clean(s)
	}
	return out
}

// kindClass is the CSS class that colours and shapes a cause by kind.
func kindClass(c *attribute.Cause) string {
	switch {
	case c.NoAppFrame:
		return "k-noapp"
	case c.Kind == attribute.KindNetwork:
		return "k-network"
	case c.Kind == attribute.KindMixed:
		return "k-mixed"
	}
	return "k-database"
}

func px(f float64) string { return strconv.FormatFloat(f, 'f', 1, 64) }

// newCauseChart lays out one bar per cause on a percent axis whose end is
// a multiple of a 1-2-5 step, so that the ticks are round numbers.
//
// At most chartCauses causes get a bar; the rest are summed into one
// "others" bar, so that the chart stays readable on a phone and in print.
func newCauseChart(r *attribute.Result, causes []*attribute.Cause) *causeChart {
	others := len(causes) > chartCauses
	if others {
		others := &attribute.Cause{Function: fmt.Sprintf("%d others", len(causes)-chartCauses+1), Kind: attribute.KindMixed}
		for _, c := range causes[chartCauses-1:] {
			others.Share += c.Share
			others.Cost += c.Cost
		}
		causes = append(causes[:chartCauses-1:chartCauses-1], others)
	}
	top := 0.0
	for _, c := range causes {
		top = math.Max(top, c.Share+c.ShareMargin)
	}
	topPct := math.Max(top*100, 1)
	step := 1.0
	for _, s := range []float64{1, 2, 5, 10, 20, 25, 50, 100, 200, 500, 1000} {
		step = s
		if topPct/s <= 5 {
			break
		}
	}
	domain := math.Ceil(topPct/step) * step
	scale := func(share float64) float64 { return chartX0 + chartBarMax*math.Max(0, share*100)/domain }
	n := float64(len(causes))
	axisY := chartTop + n*chartRow + 2
	ch := &causeChart{Width: px(chartWidth), X0: px(chartX0), Height: px(axisY + 18), AxisY: px(axisY), TickY: px(axisY + 13)}
	for v := 0.0; v <= domain+step/2; v += step {
		ch.Ticks = append(ch.Ticks, chartTick{X: px(chartX0 + chartBarMax*v/domain), Label: strconv.FormatFloat(v, 'f', 0, 64) + "%"})
	}
	for i, c := range causes {
		y := chartTop + float64(i)*chartRow
		end := scale(c.Share)
		class := kindClass(c)
		if others && i == len(causes)-1 {
			class = "k-other"
		}
		b := causeBar{Class: class, Name: Shorten(clean(c.Function), chartName),
			Title: clean(c.Function) + ": " + shareText(r, c) + " (" + string(c.Kind) + ")", Label: shareText(r, c),
			NameX: px(chartNameEnd), TextY: px(y + chartRow/2 + 4), X: px(chartX0), Y: px(y + (chartRow-chartBar)/2),
			W: px(math.Max(end-chartX0, 0.5)), H: px(chartBar)}
		if r.Sampled && c.ShareMargin > 0 {
			lo, hi := scale(c.Share-c.ShareMargin), scale(c.Share+c.ShareMargin)
			b.Whisker, b.WX1, b.WX2, b.WY = true, px(lo), px(hi), px(y+chartRow/2)
			b.WTop, b.WBot = px(y+chartRow/2-5), px(y+chartRow/2+5)
			end = math.Max(end, hi)
		}
		b.LabelX = px(end + 6)
		ch.Bars = append(ch.Bars, b)
	}
	return ch
}

// newEntryChart stacks database, network and other cost per entry point,
// all on one scale: the largest entry's total.
func newEntryChart(entries []attribute.EntryTotal, unit string) *entryChart {
	if len(entries) > chartEntries {
		entries = entries[:chartEntries]
	}
	top := int64(1)
	for _, e := range entries {
		top = max(top, e.Cost, e.Database+e.Network)
	}
	ch := &entryChart{Width: px(chartWidth), Height: px(chartTop*2 + float64(len(entries))*chartRow)}
	for i, e := range entries {
		y := chartTop + float64(i)*chartRow
		total := max(e.Cost, e.Database+e.Network)
		name := entryName(e.Entry)
		row := entryBar{Name: Shorten(name, chartName), NameX: px(chartNameEnd), TextY: px(y + chartRow/2 + 4),
			Title: name, Label: FormatValue(total, unit)}
		x := chartX0
		for _, seg := range []struct {
			class, name string
			v           int64
		}{{"k-database", "database", e.Database}, {"k-network", "network", e.Network}, {"k-other", "other", entryOther(e)}} {
			if seg.v <= 0 {
				continue
			}
			w := chartBarMax * float64(seg.v) / float64(top)
			row.Segments = append(row.Segments, entrySegment{Class: seg.class, X: px(x), Y: px(y + (chartRow-chartBar)/2),
				W: px(math.Max(w, 0.5)), H: px(chartBar), Title: name + ": " + seg.name + " " + FormatValue(seg.v, unit)})
			x += w
		}
		row.LabelX = px(x + 6)
		ch.Rows = append(ch.Rows, row)
	}
	return ch
}
