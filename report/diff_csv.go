package report

import (
	"io"
	"strconv"
	"strings"

	"github.com/culprithq/culprit/attribute/compare"
)

// DiffCSV renders one row per change of a comparison, in the order of
// Comparison.Changes (most severe first, up to Options.Limit rows), for
// notebooks, spreadsheets and dashboards. Options.Color and Options.Width
// are ignored.
//
// The header row is stable; columns may be added at the end but are never
// renamed, removed or reordered:
//
//	verdict          regressed, new, inconclusive, improved, gone or unchanged
//	function         root-cause function (the costliest with this identity)
//	identity         the name matched across builds (see attribute.Identity)
//	kind             database, network or mixed
//	base, candidate  normalised cost on each side, in unit
//	change           candidate − base, in unit
//	relative_change  candidate ÷ base − 1, a decimal fraction; empty when undefined (new, gone)
//	rel_lo, rel_hi   bounds of its 95% interval; empty when undefined or unbounded
//	p_value          two-sided p-value of method; empty when the test could not run
//	q_value          Benjamini–Hochberg adjusted p-value; empty likewise
//	mde              smallest relative change detectable at 80% power; empty when unbounded
//	method           poisson-exact or bootstrap
//	basis            per-request, per-second or share
//	unit             unit of base, candidate and change, e.g. "nanoseconds per request"
//	reasons          what gives the verdict: time, calls or "time calls"; empty when unchanged
//	below_detection  true when the cause had too little evidence to be tested
//	calls_base, calls_candidate            mean calls per request; empty when not compared
//	calls_relative_change, calls_rel_lo, calls_rel_hi, calls_p_value, calls_q_value, calls_mde
//	                 the calls test, as the columns above; empty when not compared
//	calls_verdict    the verdict on calls alone
//	confidence       level of every interval (adjusted for the number of tests)
//
// Every change is a row, those below detection included, unless
// Options.Limit cuts them; then a last row reads "(omitted N)" in the
// verdict column, with the omitted changes' base and candidate summed.
//
// Numbers are unformatted, in the shortest representation that
// round-trips (strconv 'g', -1). Strings are written as they are, quoted by
// encoding/csv when needed (see CSV about carriage returns).
type DiffCSV struct{}

// diffCSVHeader is the stable header row documented on DiffCSV.
var diffCSVHeader = []string{
	"verdict", "function", "identity", "kind", "base", "candidate", "change",
	"relative_change", "rel_lo", "rel_hi", "p_value", "q_value", "mde", "method", "basis", "unit",
	"reasons", "below_detection", "calls_base", "calls_candidate", "calls_relative_change", "calls_rel_lo", "calls_rel_hi",
	"calls_p_value", "calls_q_value", "calls_mde", "calls_verdict", "confidence",
}

// RenderDiff implements DiffRenderer.
func (DiffCSV) RenderDiff(w io.Writer, c *compare.Comparison, opts Options) error {
	cw := newCSVWriter(w)
	if err := cw.Write(diffCSVHeader); err != nil {
		return err
	}
	shown := limitedChanges(c, opts)
	for _, ch := range shown {
		row := []string{string(ch.Verdict), ch.Function, ch.Identity, string(ch.Kind),
			csvFloat(ch.Base), csvFloat(ch.Candidate), csvFloat(ch.Change),
			csvOptional(ch.RelativeChange), csvOptional(ch.RelLo), csvOptional(ch.RelHi),
			csvOptional(ch.PValue), csvOptional(ch.QValue), csvOptional(ch.MDE),
			ch.Method, string(c.Basis), c.Unit, strings.Join(ch.Reasons, " "), strconv.FormatBool(ch.BelowDetection)}
		if cc := ch.Calls; cc != nil {
			row = append(row, csvFloat(cc.Base), csvFloat(cc.Candidate), csvOptional(cc.RelativeChange), csvOptional(cc.RelLo),
				csvOptional(cc.RelHi), csvOptional(cc.PValue), csvOptional(cc.QValue), csvOptional(cc.MDE), string(cc.Verdict))
		} else {
			row = append(row, "", "", "", "", "", "", "", "", "")
		}
		row = append(row, csvFloat(c.Confidence))
		if err := cw.Write(row); err != nil {
			return err
		}
	}
	if omitted := c.Changes[len(shown):]; len(omitted) > 0 {
		var b, cand float64
		for _, ch := range omitted {
			b += ch.Base
			cand += ch.Candidate
		}
		row := make([]string, len(diffCSVHeader))
		row[0] = "(omitted " + strconv.Itoa(len(omitted)) + ")"
		row[4], row[5], row[6] = csvFloat(b), csvFloat(cand), csvFloat(cand-b)
		row[14], row[15] = string(c.Basis), c.Unit
		if err := cw.Write(row); err != nil {
			return err
		}
	}
	cw.Flush()
	return cw.Error()
}

// csvOptional renders a float that may not exist: empty for nil.
func csvOptional(f *float64) string {
	if f == nil {
		return ""
	}
	return strconv.FormatFloat(*f, 'g', -1, 64)
}
