package report

import (
	_ "embed"
	"html/template"
	"io"
	"math"
	"strconv"

	"github.com/culprithq/culprit/attribute/compare"
)

// DiffHTML renders a comparison as one self-contained HTML5 page: the
// verdict headline, the sides compared, a change chart (inline SVG: one
// horizontal bar per shown change from zero, improvements to the left and
// regressions to the right, its interval as a whisker, dashed lines at ±
// the relative budget), a sortable table of changes, the method notes,
// warnings, and how the page was produced.
//
// Like HTML, the page fetches nothing (its Content-Security-Policy
// forbids it and allows only the table-sorting script, by hash), is
// complete without that script, and reads the same in print and in
// greyscale: verdicts differ by colour and by pattern (regressed solid
// red, new cross-hatched purple, inconclusive dotted amber with a dashed
// outline, improved hatched green, gone striped blue, unchanged hollow
// grey). New causes are drawn to the right edge (their relative change is
// unbounded), gone causes at −100%; bars and whiskers beyond the axis are
// cut at its end, and the label beside each bar gives the true value.
//
// Every input string goes through html/template's contextual escaping after
// control characters become spaces and invalid UTF-8 becomes U+FFFD.
// Options.Color and Options.Width are ignored.
type DiffHTML struct{}

//go:embed diff.tmpl
var diffSource string

// diffTemplate is compiled once; a broken template fails every test.
var diffTemplate = template.Must(template.Must(template.New("diff.tmpl").Funcs(htmlFuncs).Parse(diffSource)).Parse(layoutSource))

// Change chart geometry in SVG user units (px at 100%).
const (
	diffNameEnd  = 232.0 // right edge of the name labels
	diffPlotX0   = 240.0 // left end of the axis
	diffHalf     = 170.0 // half the axis: zero is at diffPlotX0+diffHalf
	diffLabelX   = 592.0 // left edge of the value labels
	diffTop      = 22.0  // room for the budget labels
	diffName     = 34    // runes of a shortened name label
	diffMaxScale = 2.0   // the axis never reaches beyond ±200%
	diffChartMax = 20    // bars drawn; the table lists every change
)

type diffPage struct {
	CSP        string
	Script     template.JS
	Headline   diffHeadline
	Base       string
	Candidate  string
	Values     string
	Confidence string
	Rows       []diffRow
	More       int
	Chart      *diffChart
	ChartMore  bool
	Clipped    bool
	Calls      bool
	Below      string
	// NewStatements lists statements found only in the candidate and
	// those whose calls per request changed significantly.
	NewStatements []newStatement
	Notes         []string
	Warnings      []string
	Produced      diffProduced
}

type diffRow struct {
	Rank, Severity                       int
	Verdict, Class, Function, Identity   string
	Base, Candidate, Change, Rel, Q, MDE string
	BaseV, CandV, ChangeV, RelV, QV      string
	MDEV                                 string
	Calls, CallsRel                      string
	FnParts                              []string
}

type newStatement struct{ Function, Label, Statement, Detail string }

type diffChart struct {
	Width, Height, Zero, AxisY, TickY, BudgetY string
	Ticks                                      []chartTick
	Budget                                     []budgetLine
	Bars                                       []diffBar
}

type budgetLine struct{ X, LabelX, Anchor, Label string }

type diffBar struct {
	Class, Name, Title, Label        string
	NameX, LabelX, TextY, X, Y, W, H string
	Whisker, CapLo, CapHi            bool
	WX1, WX2, WY, WTop, WBot         string
	// ClipLo and ClipHi mark interval ends beyond the axis with an
	// arrowhead (paths ClipLoPath, ClipHiPath).
	ClipLo, ClipHi         bool
	ClipLoPath, ClipHiPath string
}

// verdicts lists the outcomes in the order of Comparison.Changes.
func verdicts() []compare.Outcome {
	return []compare.Outcome{compare.OutcomeRegressed, compare.OutcomeNew, compare.OutcomeInconclusive,
		compare.OutcomeImproved, compare.OutcomeGone, compare.OutcomeUnchanged}
}

// RenderDiff implements DiffRenderer.
func (DiffHTML) RenderDiff(w io.Writer, c *compare.Comparison, opts Options) error {
	changes := shownChanges(c, opts)
	p := diffPage{
		CSP:        pagePolicy(),
		Script:     template.JS(sortScript), // a constant of this package, never user data
		Headline:   newDiffHeadline(c),
		Base:       sideText(c.Base),
		Candidate:  sideText(c.Candidate),
		Values:     clean(basisText(c) + "; " + thresholdText(c)),
		Confidence: confText(c.Confidence),
		More:       hiddenChanges(c, opts),
		Calls:      anyCalls(changes),
		Below:      clean(belowText(c, 10)),
		Produced:   newDiffProduced(c, opts.Provenance),
	}
	h := &p.Headline
	h.Lead, h.Function, h.Change, h.Counts = clean(h.Lead), clean(h.Function), clean(h.Change), clean(h.Counts)
	for i, ch := range changes {
		row := diffRow{Rank: i + 1, Verdict: clean(verdictText(ch)), Class: verdictClass(ch.Verdict),
			Function: clean(ch.Function), Identity: clean(ch.Identity), FnParts: nameParts(Shorten(clean(ch.Function), htmlNameRunes)),
			Calls: callsText(ch), CallsRel: callsRelText(ch),
			Base: rateText(ch.Base, c), Candidate: rateText(ch.Candidate, c), Change: signedRateText(ch.Change, c),
			Rel: relText(ch), Q: qText(ch.QValue), MDE: mdeText(ch),
			BaseV: csvFloat(ch.Base), CandV: csvFloat(ch.Candidate), ChangeV: csvFloat(ch.Change),
			RelV: csvOptional(ch.RelativeChange), QV: csvOptional(ch.QValue), MDEV: csvOptional(ch.MDE)}
		for j, v := range verdicts() {
			if v == ch.Verdict {
				row.Severity = j
			}
		}
		p.Rows = append(p.Rows, row)
	}
	for _, ch := range changes {
		for _, n := range statementNotes(c, ch) {
			p.NewStatements = append(p.NewStatements, newStatement{Function: clean(ch.Function), Label: clean(n.Label),
				Statement: clean(n.Statement), Detail: clean(n.Detail)})
		}
	}
	if len(changes) > 0 {
		charted := changes
		if len(charted) > diffChartMax {
			charted, p.ChartMore = charted[:diffChartMax], true
		}
		p.Chart = newDiffChart(c, charted)
		for _, b := range p.Chart.Bars {
			p.Clipped = p.Clipped || b.ClipLo || b.ClipHi
		}
	}
	for _, n := range methodNotes(c) {
		p.Notes = append(p.Notes, clean(n))
	}
	for _, wn := range c.Warnings {
		p.Warnings = append(p.Warnings, clean(wn))
	}
	pr := &p.Produced
	pr.Version, pr.ValueType, pr.Basis, pr.Budget = clean(pr.Version), clean(pr.ValueType), clean(pr.Basis), clean(pr.Budget)
	pr.Options = cleanAll(pr.Options)
	for i := range pr.Sides {
		s := &pr.Sides[i]
		s.Source = clean(s.Source)
		for j := range s.Inputs {
			in := &s.Inputs[j]
			in.Name, in.Format, in.SHA256 = clean(in.Name), clean(in.Format), clean(in.SHA256)
		}
	}
	return diffTemplate.Execute(w, p)
}

// verdictClass is the CSS class that colours and patterns a verdict.
func verdictClass(v compare.Outcome) string {
	for _, o := range verdicts() {
		if o == v {
			return "v-" + string(v)
		}
	}
	return "v-unchanged"
}

// newDiffChart lays out one bar per change on a symmetric axis of
// relative change, ±D, where D covers every relative change, interval end
// and the budget (with room beyond it), rounded up to a multiple of a
// 1-2-5 step and capped at diffMaxScale.
func newDiffChart(c *compare.Comparison, changes []compare.Change) *diffChart {
	// The region that matters: the budget and the changes themselves;
	// intervals reaching beyond it are clipped and marked.
	top := math.Max(0.1, c.Budget.Relative*3)
	for _, ch := range changes {
		if v := ch.RelativeChange; v != nil {
			top = math.Max(top, math.Abs(*v)*1.15)
		}
	}
	topPct := math.Min(top, diffMaxScale) * 100
	step := 1.0
	for _, s := range []float64{1, 2, 5, 10, 20, 25, 50, 100} {
		step = s
		if topPct/s <= 3 {
			break
		}
	}
	domain := math.Ceil(topPct/step) * step / 100
	zero := diffPlotX0 + diffHalf
	scale := func(rel float64) float64 {
		return zero + diffHalf*math.Max(-1, math.Min(1, rel/domain))
	}
	n := float64(len(changes))
	axisY := diffTop + n*chartRow + 2
	ch := &diffChart{Width: px(chartWidth), Height: px(axisY + 18), Zero: px(zero), AxisY: px(axisY), TickY: px(axisY + 13),
		BudgetY: px(diffTop - 8)}
	m := int(math.Round(domain * 100 / step))
	for k := -m; k <= m; k++ {
		v := float64(k) * step
		label := strconv.FormatFloat(v, 'f', 0, 64) + "%"
		if k > 0 {
			label = "+" + label
		}
		ch.Ticks = append(ch.Ticks, chartTick{X: px(scale(v / 100)), Label: label})
	}
	if b := c.Budget.Relative; b > 0 && b < domain {
		ch.Budget = []budgetLine{
			{X: px(scale(-b)), LabelX: px(scale(-b) - 3), Anchor: "end", Label: signedPctText(-b)},
			{X: px(scale(b)), LabelX: px(scale(b) + 3), Anchor: "start", Label: "budget " + signedPctText(b)},
		}
	}
	for i, chg := range changes {
		y := diffTop + float64(i)*chartRow
		var rel float64
		switch {
		case chg.RelativeChange != nil:
			rel = *chg.RelativeChange
		case chg.Verdict == compare.OutcomeGone:
			rel = -1
		case chg.Verdict == compare.OutcomeNew:
			rel = domain
		}
		end := scale(rel)
		fn, label := clean(chg.Function), relText(chg)
		switch {
		case chg.RelativeChange != nil:
		case chg.Verdict == compare.OutcomeNew:
			label = "new: " + rateText(chg.Candidate, c)
		case chg.Verdict == compare.OutcomeGone:
			label = "gone: was " + rateText(chg.Base, c)
		}
		label = clean(label)
		b := diffBar{Class: verdictClass(chg.Verdict), Name: Shorten(fn, diffName),
			Title: fn + ": " + clean(string(chg.Verdict)) + ", " + label, Label: label,
			NameX: px(diffNameEnd), LabelX: px(diffLabelX), TextY: px(y + chartRow/2 + 4),
			X: px(math.Min(zero, end)), Y: px(y + (chartRow-chartBar)/2), W: px(math.Max(math.Abs(end-zero), 0.5)), H: px(chartBar)}
		if chg.RelativeChange != nil && (chg.RelLo != nil || chg.RelHi != nil) {
			lo, hi := math.Inf(-1), math.Inf(1)
			if chg.RelLo != nil {
				lo = *chg.RelLo
			}
			if chg.RelHi != nil {
				hi = *chg.RelHi
			}
			b.Whisker, b.WX1, b.WX2 = true, px(scale(lo)), px(scale(hi))
			b.CapLo, b.CapHi = math.Abs(lo) <= domain, math.Abs(hi) <= domain
			b.WY, b.WTop, b.WBot = px(y+chartRow/2), px(y+chartRow/2-5), px(y+chartRow/2+5)
			wy := y + chartRow/2
			if !b.CapLo {
				x := scale(lo)
				b.ClipLo, b.ClipLoPath = true, "M"+px(x)+" "+px(wy)+"L"+px(x+6)+" "+px(wy-4)+"L"+px(x+6)+" "+px(wy+4)+"Z"
			}
			if !b.CapHi {
				x := scale(hi)
				b.ClipHi, b.ClipHiPath = true, "M"+px(x)+" "+px(wy)+"L"+px(x-6)+" "+px(wy-4)+"L"+px(x-6)+" "+px(wy+4)+"Z"
			}
		}
		ch.Bars = append(ch.Bars, b)
	}
	return ch
}
