package report

import (
	"io"
	"strconv"

	"github.com/culprithq/culprit/attribute"
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
//	method           poisson-exact or mann-whitney+bootstrap
//	basis            per-request, per-second or share
//	unit             unit of base, candidate and change, e.g. "nanoseconds per request"
//
// Numbers are unformatted, in the shortest representation that
// round-trips (strconv 'g', -1). Strings are written as they are, quoted by
// encoding/csv when needed (see CSV about carriage returns).
type DiffCSV struct{}

// diffCSVHeader is the stable header row documented on DiffCSV.
var diffCSVHeader = []string{
	"verdict", "function", "identity", "kind", "base", "candidate", "change",
	"relative_change", "rel_lo", "rel_hi", "p_value", "q_value", "mde", "method", "basis", "unit",
}

// RenderDiff implements DiffRenderer.
func (DiffCSV) RenderDiff(w io.Writer, c *attribute.Comparison, opts Options) error {
	cw := newCSVWriter(w)
	if err := cw.Write(diffCSVHeader); err != nil {
		return err
	}
	for _, ch := range shownChanges(c, opts) {
		row := []string{string(ch.Verdict), ch.Function, ch.Identity, string(ch.Kind),
			csvFloat(ch.Base), csvFloat(ch.Candidate), csvFloat(ch.Change),
			csvOptional(ch.RelativeChange), csvOptional(ch.RelLo), csvOptional(ch.RelHi),
			csvOptional(ch.PValue), csvOptional(ch.QValue), csvOptional(ch.MDE),
			ch.Method, string(c.Basis), c.Unit}
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
