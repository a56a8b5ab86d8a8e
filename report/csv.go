package report

import (
	"io"
	"strconv"

	"github.com/culprithq/culprit/attribute"
)

// CSV renders one row per root cause × boundary detail (statement
// fingerprint, operation or library function), for notebooks, spreadsheets
// and dashboards. A root cause with no detail still gets one row, with the
// detail columns empty. Rows follow the rank order (every root cause
// unless Options.Limit cuts them; then a last row reads "(omitted N)" in
// the rank column, with the omitted causes' summed cost and share) and,
// within a root cause, the order of its statements
// (cost descending). Options.Color and Options.Width are ignored.
//
// The header row is stable; columns may be added at the end but are never
// renamed, removed or reordered:
//
//	rank                      1-based position of the root cause
//	function                  root-cause function, or "(no application frame) ENTRY"
//	file, line                call site that called out most; empty when unknown
//	kind                      database, network or mixed
//	no_app_frame              true when no application frame was above the boundary
//	cause_cost                charged cost in value_unit
//	cause_share               cause_cost ÷ all database+network cost, a decimal fraction
//	cause_share_margin        95% margin of cause_share; empty for unsampled sources
//	cause_samples             samples (profiles) or spans behind cause_cost
//	cause_calls               outbound calls; empty when the source cannot count them
//	cause_requests            requests in which the cause appears; empty when requests are unknown
//	calls_per_request_median  calls per request (median, p95, max); empty when unknown
//	calls_per_request_p95
//	calls_per_request_max
//	detail_kind               database or network
//	system                    database or protocol system, e.g. postgresql
//	statement                 statement fingerprint (literals removed) or boundary function
//	peer                      remote peer
//	detail_cost               cost of this detail in value_unit
//	detail_calls              calls of this detail; empty when the source cannot count them
//	detail_samples            samples or spans behind detail_cost
//	value_type, value_unit    what the costs measure, e.g. cpu and nanoseconds
//	domain                    business domain (--domains); empty without a domains file
//
// Numbers are unformatted: integers in base 10, fractions in the shortest
// representation that round-trips (strconv 'g', -1). Strings are written as
// they are, quoted by encoding/csv when needed, except that a string a
// spreadsheet would run as a formula gets a leading apostrophe and
// invisible characters are shown as \uXXXX (see csvCell); note that Go's csv.Reader
// turns a carriage return directly before a line feed inside a quoted
// field into a bare line feed.
type CSV struct{}

// csvHeader is the stable header row documented on CSV.
var csvHeader = []string{
	"rank", "function", "file", "line", "kind", "no_app_frame",
	"cause_cost", "cause_share", "cause_share_margin", "cause_samples", "cause_calls", "cause_requests",
	"calls_per_request_median", "calls_per_request_p95", "calls_per_request_max",
	"detail_kind", "system", "statement", "peer", "detail_cost", "detail_calls", "detail_samples",
	"value_type", "value_unit", "domain",
}

// Render implements Renderer.
func (CSV) Render(w io.Writer, r *attribute.Result, opts Options) error {
	cw := newCSVWriter(w)
	if err := cw.Write(csvHeader); err != nil {
		return err
	}
	// Calls are counted for spans only; for profiles a zero means unknown.
	callsKnown := !r.Sampled
	for i, c := range shown(r, opts) {
		cause := make([]string, 0, len(csvHeader))
		line := ""
		if c.File != "" || c.Line != 0 {
			line = strconv.FormatInt(c.Line, 10)
		}
		cause = append(cause, strconv.Itoa(i+1), c.Function, c.File, line, string(c.Kind),
			strconv.FormatBool(c.NoAppFrame), strconv.FormatInt(c.Cost, 10), csvFloat(c.Share))
		if r.Sampled {
			cause = append(cause, csvFloat(c.ShareMargin))
		} else {
			cause = append(cause, "")
		}
		cause = append(cause, strconv.FormatInt(c.Samples, 10), csvCount(c.Calls, callsKnown))
		if r.Totals.Requests > 0 {
			cause = append(cause, strconv.Itoa(c.Requests))
		} else {
			cause = append(cause, "")
		}
		if d := c.CallsPerRequest; d != nil {
			cause = append(cause, csvFloat(d.Median), csvFloat(d.P95), csvFloat(d.Max))
		} else {
			cause = append(cause, "", "", "")
		}
		tail := []string{r.ValueType.Type, r.ValueType.Unit, c.Domain}
		if len(c.Statements) == 0 {
			row := append(append(cause[:len(cause):len(cause)], "", "", "", "", "", "", ""), tail...)
			if err := cw.Write(row); err != nil {
				return err
			}
			continue
		}
		for _, d := range c.Statements {
			row := append(cause[:len(cause):len(cause)], string(d.Kind), d.System, d.Statement, d.Peer,
				strconv.FormatInt(d.Cost, 10), csvCount(d.Calls, callsKnown), strconv.FormatInt(d.Samples, 10))
			row = append(row, tail...)
			if err := cw.Write(row); err != nil {
				return err
			}
		}
	}
	if shown := shown(r, opts); len(shown) < len(r.Causes) {
		o := omittedCauses(r.Causes[len(shown):])
		row := make([]string, len(csvHeader))
		row[0] = "(omitted " + strconv.Itoa(o.Count) + ")"
		row[6], row[7] = strconv.FormatInt(*o.Cost, 10), csvFloat(*o.Share)
		row[len(row)-3], row[len(row)-2] = r.ValueType.Type, r.ValueType.Unit
		if err := cw.Write(row); err != nil {
			return err
		}
	}
	cw.Flush()
	return cw.Error()
}

func csvFloat(f float64) string { return strconv.FormatFloat(f, 'g', -1, 64) }

// csvCount renders a call count, empty when the source cannot count calls
// and none were counted.
func csvCount(n int64, known bool) string {
	if !known && n == 0 {
		return ""
	}
	return strconv.FormatInt(n, 10)
}
