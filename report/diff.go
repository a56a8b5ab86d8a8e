package report

import (
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"

	"github.com/culprithq/culprit/attribute/compare"
)

// DiffSchema is the version tag of the diff JSON document.
const DiffSchema = "culprit.diff/v1"

// DiffRenderer writes a comparison in one format.
type DiffRenderer interface {
	// RenderDiff writes c to w. Options.Limit caps the changes shown (in
	// the order of c.Changes, most severe first); c is not modified.
	RenderDiff(w io.Writer, c *compare.Comparison, opts Options) error
}

// shownChanges returns the tested changes to show under opts.Limit; the
// changes below detection (sorted last) are left for belowChanges.
func shownChanges(c *compare.Comparison, opts Options) []compare.Change {
	tested := c.Changes
	for i, ch := range c.Changes {
		if ch.BelowDetection {
			tested = c.Changes[:i]
			break
		}
	}
	if opts.Limit > 0 && len(tested) > opts.Limit {
		return tested[:opts.Limit]
	}
	return tested
}

// belowChanges returns the changes with too little evidence to test.
func belowChanges(c *compare.Comparison) []compare.Change {
	for i, ch := range c.Changes {
		if ch.BelowDetection {
			return c.Changes[i:]
		}
	}
	return nil
}

// hiddenChanges counts the tested changes that opts.Limit cuts.
func hiddenChanges(c *compare.Comparison, opts Options) int {
	return len(c.Changes) - len(belowChanges(c)) - len(shownChanges(c, opts))
}

// belowText is the line that stands for the changes below detection:
// "3 root causes below detection (too few samples or requests for any
// change to be significant): a, b, c".
func belowText(c *compare.Comparison, names int) string {
	below := belowChanges(c)
	if len(below) == 0 {
		return ""
	}
	var fns []string
	for i, ch := range below {
		if i == names {
			fns = append(fns, fmt.Sprintf("and %d more", len(below)-names))
			break
		}
		fns = append(fns, shortName(ch.Function))
	}
	return plural(len(below), "root cause", "root causes") + " below detection (too few samples or requests for any change to be significant): " +
		strings.Join(fns, ", ")
}

// verdictText is the verdict with its reasons when calls were compared:
// "regressed (calls)", "regressed (time, calls)".
func verdictText(ch compare.Change) string {
	if ch.Calls == nil || len(ch.Reasons) == 0 {
		return string(ch.Verdict)
	}
	return string(ch.Verdict) + " (" + strings.Join(ch.Reasons, ", ") + ")"
}

// callsText renders the mean calls per request on both sides, "8.9 →
// 17.9"; "-" when calls were not compared.
func callsText(ch compare.Change) string {
	if ch.Calls == nil {
		return "-"
	}
	return numText(ch.Calls.Base) + " → " + numText(ch.Calls.Candidate)
}

// callsRelText renders the relative change of calls per request with its
// interval, like relText; "-" when calls were not compared.
func callsRelText(ch compare.Change) string {
	if ch.Calls == nil {
		return "-"
	}
	cc := ch.Calls
	return relText(compare.Change{Verdict: ch.Verdict, RelativeChange: cc.RelativeChange, RelLo: cc.RelLo, RelHi: cc.RelHi})
}

// anyCalls reports whether any change compared calls per request.
func anyCalls(changes []compare.Change) bool {
	for _, ch := range changes {
		if ch.Calls != nil {
			return true
		}
	}
	return false
}

// limitedChanges returns every change, tested or not, cut to opts.Limit:
// what the machine formats carry.
func limitedChanges(c *compare.Comparison, opts Options) []compare.Change {
	if opts.Limit > 0 && len(c.Changes) > opts.Limit {
		return c.Changes[:opts.Limit]
	}
	return c.Changes
}

// stmtNote is a statement of a change worth a line of its own: Label
// says what changed ("new statement", "calls per request 8 → 16"), Detail
// the number behind it.
type stmtNote struct{ Label, Statement, Detail string }

// statementNotes lists the statements of a change that are new in the
// candidate, and those whose calls per request changed significantly
// (statement q ≤ Alpha).
func statementNotes(c *compare.Comparison, ch compare.Change) []stmtNote {
	var out []stmtNote
	for _, s := range ch.Statements {
		switch {
		case s.New:
			out = append(out, stmtNote{"new statement", s.Statement, numText(s.Candidate) + " calls per request"})
		case !s.Gone && s.QValue != nil && *s.QValue <= c.Alpha:
			out = append(out, stmtNote{"calls per request " + numText(s.Base) + " → " + numText(s.Candidate), s.Statement, "q " + qText(s.QValue)})
		}
	}
	return out
}

// confText renders a confidence level without rounding it up to 100%:
// 0.95 → "95%", 0.9975 → "99.75%".
func confText(f float64) string {
	return strconv.FormatFloat(math.Floor(f*1e4+1e-6)/100, 'f', -1, 64) + "%"
}

// rateText renders a normalised cost in the comparison's unit: a share as
// a percentage with one decimal, durations and sizes in readable units, other units as a
// plain number with about three significant digits.
func rateText(v float64, c *compare.Comparison) string {
	if c.Basis == compare.BasisShare {
		return Percent(v)
	}
	switch c.ValueType.Unit {
	case "nanoseconds":
		return formatDuration(v)
	case "bytes":
		return formatBytes(v)
	}
	abs := math.Abs(v)
	switch {
	case abs >= 100:
		return strconv.FormatFloat(v, 'f', 0, 64)
	case abs >= 10:
		return strconv.FormatFloat(v, 'f', 1, 64)
	}
	return strconv.FormatFloat(v, 'g', 3, 64)
}

// signedRateText renders a difference of normalised costs like rateText,
// with a "+" before positive values; differences of shares are in
// percentage points ("+0.4 pp").
func signedRateText(v float64, c *compare.Comparison) string {
	s := rateText(v, c)
	if c.Basis == compare.BasisShare {
		s = strconv.FormatFloat(v*100, 'f', 1, 64) + " pp"
	}
	switch {
	case !nonZero(s) && c.Basis == compare.BasisShare:
		return "0 pp"
	case !nonZero(s):
		return "0"
	case v > 0:
		return "+" + s
	}
	return s
}

// nonZero reports whether a formatted number has a non-zero digit.
func nonZero(s string) bool {
	return strings.IndexFunc(s, func(r rune) bool { return r >= '1' && r <= '9' }) >= 0
}

// absText renders an absolute difference with its unit: "+2.0ms per
// request", "+3 count per second", "+0.5 pp".
func absText(v float64, c *compare.Comparison) string {
	s := signedRateText(v, c)
	switch {
	case c.Basis == compare.BasisShare:
		return s
	case c.ValueType.Unit == "nanoseconds" || c.ValueType.Unit == "bytes":
		return s + strings.TrimPrefix(c.Unit, c.ValueType.Unit)
	}
	return s + " " + c.Unit
}

// pctText renders a fraction as a percentage: no decimals from 10% up,
// one below.
func pctText(f float64) string {
	p := f * 100
	if math.Abs(p) >= 9.95 {
		return strconv.FormatFloat(p, 'f', 0, 64) + "%"
	}
	s := strconv.FormatFloat(p, 'f', 1, 64)
	if !nonZero(s) {
		s = "0"
	}
	return s + "%"
}

// signedPctText is pctText with a "+" before values that do not round to
// zero.
func signedPctText(f float64) string {
	s := pctText(f)
	if f > 0 && nonZero(s) {
		return "+" + s
	}
	return s
}

// relText renders a change's relative change and its interval,
// "+38% [+30%, +47%]". An unbounded end is "+∞"; a cause present on one
// side only reads "new" or "gone" (its relative change is undefined).
func relText(ch compare.Change) string {
	if ch.RelativeChange == nil {
		switch ch.Verdict {
		case compare.OutcomeNew:
			return "new"
		case compare.OutcomeGone:
			return "gone"
		}
		return "-"
	}
	s := signedPctText(*ch.RelativeChange)
	if ch.RelLo == nil && ch.RelHi == nil {
		return s
	}
	lo, hi := "-∞", "+∞"
	if ch.RelLo != nil {
		lo = signedPctText(*ch.RelLo)
	}
	if ch.RelHi != nil {
		hi = signedPctText(*ch.RelHi)
	}
	return s + " [" + lo + ", " + hi + "]"
}

// qText renders a p- or q-value with two significant digits; "-" when nil.
func qText(q *float64) string {
	switch {
	case q == nil:
		return "-"
	case *q < 0.0001:
		return "<0.0001"
	}
	return strconv.FormatFloat(*q, 'g', 2, 64)
}

// mdeText renders a change's minimum detectable relative change: "-" for
// a cause present on one side only, "∞" when nothing was detectable.
func mdeText(ch compare.Change) string {
	switch {
	case ch.MDE != nil:
		return pctText(*ch.MDE)
	case ch.Verdict == compare.OutcomeNew || ch.Verdict == compare.OutcomeGone:
		return "-"
	}
	return "∞"
}

// budgetText describes the budget in force: "default +5.0%", or the
// relative and absolute parts the user set.
func budgetText(c *compare.Comparison) string {
	b := c.Budget
	s := signedPctText(b.Relative)
	if !b.Set {
		return "default " + s
	}
	if b.Absolute > 0 {
		s += " and " + absText(b.Absolute, c)
	}
	return s
}

// basisText names the basis and the unit of every normalised value.
func basisText(c *compare.Comparison) string {
	return string(c.Basis) + " (" + c.Unit + ")"
}

// thresholdText states the budget and the significance level.
func thresholdText(c *compare.Comparison) string {
	return "budget " + budgetText(c) + ", q ≤ " + strconv.FormatFloat(c.Alpha, 'g', -1, 64)
}

// sideText summarises one side: its inputs, requests and duration.
func sideText(s compare.SideSummary) string {
	names := make([]string, 0, len(s.Inputs))
	for i, in := range s.Inputs {
		if i == 3 {
			names = append(names, fmt.Sprintf("and %d more", len(s.Inputs)-3))
			break
		}
		names = append(names, clean(in.Name))
	}
	out := "no inputs recorded"
	if len(names) > 0 {
		out = strings.Join(names, ", ")
	}
	var facts []string
	if s.SourceKind != "" {
		facts = append(facts, clean(s.SourceKind))
	}
	if s.Requests > 0 {
		facts = append(facts, plural(s.Requests, "request", "requests"))
	}
	if s.DurationNanos > 0 {
		facts = append(facts, formatDuration(float64(s.DurationNanos)))
	}
	if len(facts) > 0 {
		out += " (" + strings.Join(facts, ", ") + ")"
	}
	return out
}

// diffHeadline is the verdict summary of a comparison. Its strings are
// raw: each renderer escapes them.
type diffHeadline struct {
	// Lead is "2 root causes regressed", or the whole verdict when the
	// gate passes; Function and Change then are empty.
	Lead string
	// Function is the worst gate failure (the first in c.Gate(), which
	// follows Comparison.Changes: the largest absolute change among
	// regressions); Change is its relative change with the interval.
	Function, Change string
	// Counts lists every verdict that occurs: "6 root causes compared:
	// 1 regressed, 1 new, …".
	Counts string
}

func newDiffHeadline(c *compare.Comparison) diffHeadline {
	var h diffHeadline
	gate := c.Gate()
	var regressed, newFail int
	for _, ch := range gate {
		if ch.Verdict == compare.OutcomeRegressed {
			regressed++
		} else {
			newFail++
		}
	}
	switch {
	case len(c.Changes) == 0:
		h.Lead = "No root cause on either side: nothing to compare"
	case len(gate) == 0:
		h.Lead = "No root cause regressed beyond the budget (" + thresholdText(c) + ")"
	default:
		var parts []string
		if regressed > 0 {
			parts = append(parts, plural(regressed, "root cause", "root causes")+" regressed")
		}
		if newFail > 0 {
			parts = append(parts, plural(newFail, "new root cause exceeds", "new root causes exceed")+" the absolute budget")
		}
		h.Lead = strings.Join(parts, " and ")
		h.Function = gate[0].Function
		switch {
		case gate[0].RelativeChange != nil && len(gate[0].Reasons) == 1 && gate[0].Reasons[0] == compare.ReasonCalls:
			h.Change = "calls per request " + callsText(gate[0]) + " " + callsRelText(gate[0])
		case gate[0].RelativeChange != nil:
			h.Change = relText(gate[0])
		default:
			h.Change = relText(gate[0]) + " at " + rateText(gate[0].Candidate, c)
		}
	}
	if len(c.Changes) > 0 {
		var counts []string
		for _, v := range []compare.Outcome{compare.OutcomeRegressed, compare.OutcomeNew, compare.OutcomeInconclusive,
			compare.OutcomeImproved, compare.OutcomeGone, compare.OutcomeUnchanged} {
			n := 0
			for _, ch := range c.Changes {
				if ch.Verdict == v && !ch.BelowDetection {
					n++
				}
			}
			if n > 0 {
				counts = append(counts, fmt.Sprintf("%d %s", n, v))
			}
		}
		if n := len(belowChanges(c)); n > 0 {
			counts = append(counts, fmt.Sprintf("%d below detection", n))
		}
		h.Counts = plural(len(c.Changes), "root cause", "root causes") + " compared: " + strings.Join(counts, ", ")
	}
	return h
}

// plural64 is plural for an int64 count.
func plural64(n int64, one, many string) string {
	if n == 1 {
		return "1 " + one
	}
	return strconv.FormatInt(n, 10) + " " + many
}

func plural(n int, one, many string) string {
	if n == 1 {
		return "1 " + one
	}
	return strconv.Itoa(n) + " " + many
}

// methodNotes explains the methods the comparison used, in sentences.
func methodNotes(c *compare.Comparison) []string {
	var poisson, boot, calls bool
	for _, ch := range c.Changes {
		poisson = poisson || ch.Method == compare.MethodPoisson
		boot = boot || ch.Method == compare.MethodBootstrap
		calls = calls || ch.Calls != nil
	}
	conf := confText(c.Confidence)
	out := []string{fmt.Sprintf("Costs are normalised %s; every value is in %s.", normalisedHow(c.Basis), c.Unit)}
	if poisson {
		out = append(out, "Sampled profiles (and spans without per-request costs): sample counts are compared as Poisson rates with the exact conditional test; the "+conf+" interval is the Clopper–Pearson interval of the rate ratio, so the relative change is that of the sample rate.")
	}
	if boot {
		out = append(out, fmt.Sprintf("Per-request costs: one percentile bootstrap of the ratio of mean per-request cost (%d resamples, seed %d; Efron & Tibshirani, An Introduction to the Bootstrap, 1993) gives the p-value, the interval and the MDE, so they agree.",
			c.Resamples, c.Seed))
	}
	if calls {
		out = append(out, "Calls per request are compared the same way, beside time; a significant change in calls is a verdict in its own right (the reason is shown: time, calls or both).")
	}
	out = append(out,
		"p-values are adjusted for the number of tests by the Benjamini–Hochberg procedure (q-values); a change is significant when q ≤ "+strconv.FormatFloat(c.Alpha, 'g', -1, 64)+
			". Intervals are at the "+conf+" level that agrees with that step (false coverage rate adjusted intervals, Benjamini & Yekutieli, JASA 2005): an interval excludes zero exactly when q ≤ "+strconv.FormatFloat(c.Alpha, 'g', -1, 64)+".",
		"Regressed: significant and the interval's lower bound is above the budget ("+budgetText(c)+"); improved: the mirror image; inconclusive: significant but the interval straddles the budget, or the test could not run.",
		unchangedNote(c))
	return out
}

func normalisedHow(b compare.Basis) string {
	switch b {
	case compare.BasisPerRequest:
		return "per request of the entry points that reach each root cause (both sides know their requests)"
	case compare.BasisPerSecond:
		return "per second of profile duration (requests unknown on a side)"
	}
	return "as shares of database+network cost (neither requests nor durations known on both sides)"
}

// unchangedNote says what "unchanged" means.
func unchangedNote(c *compare.Comparison) string {
	return fmt.Sprintf("\"unchanged\" means no change above the MDE shown: the smallest relative change the test would detect with %s power at q ≤ %s. It is not proof that nothing changed.",
		strconv.FormatFloat(c.Power*100, 'g', -1, 64)+"%", strconv.FormatFloat(c.Alpha, 'g', -1, 64))
}

// diffProduced is the "how this was produced" block of a comparison, raw
// strings; each renderer escapes them.
type diffProduced struct {
	Command, Version         string
	Basis, ValueType, Budget string
	Alpha, Seed, Resamples   string
	Options                  []string
	Sides                    []producedSide
}

type producedSide struct {
	Label, Source string
	Inputs        []producedInput
}

func newDiffProduced(c *compare.Comparison, p Provenance) diffProduced {
	out := diffProduced{Command: clean(p.Command), Version: p.Version, Basis: basisText(c), ValueType: c.ValueType.String(),
		Budget: budgetText(c), Alpha: strconv.FormatFloat(c.Alpha, 'g', -1, 64), Seed: strconv.FormatUint(c.Seed, 10),
		Resamples: strconv.Itoa(c.Resamples), Options: p.Options}
	if strings.TrimSpace(out.Command) == "" {
		out.Command = "(command not recorded)"
	}
	if out.Version == "" {
		out.Version = "unknown"
	}
	for _, s := range []struct {
		label string
		side  compare.SideSummary
	}{{"base", c.Base}, {"candidate", c.Candidate}} {
		ps := producedSide{Label: s.label, Source: s.side.SourceKind}
		for _, in := range s.side.Inputs {
			ps.Inputs = append(ps.Inputs, producedInput{Name: in.Name, Format: in.Format, SHA256: in.SHA256, Bytes: in.Bytes})
		}
		out.Sides = append(out.Sides, ps)
	}
	return out
}
