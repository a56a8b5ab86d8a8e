package report

import (
	"bufio"
	"bytes"
	"fmt"
	"io"
	"strconv"
	"strings"
	"text/tabwriter"
	"unicode/utf8"

	"github.com/culprithq/culprit/attribute/compare"
)

// DiffText renders a comparison for a terminal: a header (basis and unit,
// significance level, budget, each side's inputs), a one-line verdict, an
// aligned table of changes (most severe first, up to Options.Limit rows),
// the warnings, and what "unchanged" means. With Options.Color the verdict
// column is coloured (see verdictANSI); Options.Width (default 100) bounds
// the function column. Input strings are reduced to one line of printable
// text.
type DiffText struct{}

// ANSI colours by verdict, culprit's own code: regressed red, new
// magenta, inconclusive yellow, improved green; gone and unchanged keep
// the default colour.
func verdictANSI(v compare.Outcome) string {
	switch v {
	case compare.OutcomeRegressed:
		return "\x1b[31m"
	case compare.OutcomeNew:
		return "\x1b[35m"
	case compare.OutcomeInconclusive:
		return "\x1b[33m"
	case compare.OutcomeImproved:
		return "\x1b[32m"
	}
	return "\x1b[39m"
}

// RenderDiff implements DiffRenderer.
func (DiffText) RenderDiff(w io.Writer, c *compare.Comparison, opts Options) error {
	bw := bufio.NewWriter(w)
	width := textWidth(opts)
	const indent = "           "
	h := newDiffHeadline(c)
	line := h.Lead
	if h.Function != "" {
		fn := Shorten(h.Function, width-20)
		line += "; worst: " + fn + " " + h.Change
	}
	writeWrapped(bw, line+".", width, "  ")
	if h.Counts != "" {
		writeWrapped(bw, h.Counts+".", width, "  ")
	}
	fmt.Fprintln(bw)
	writeWrapped(bw, "values:    "+c.ValueType.String()+", "+basisText(c), width, indent)
	writeWrapped(bw, "base:      "+sideText(c.Base), width, indent)
	writeWrapped(bw, "candidate: "+sideText(c.Candidate), width, indent)
	writeWrapped(bw, fmt.Sprintf("tests:     q ≤ %s (Benjamini–Hochberg); %s intervals; MDE at %s power; budget %s",
		strconv.FormatFloat(c.Alpha, 'g', -1, 64), confText(c.Confidence), pctText(c.Power), budgetText(c)), width, indent)

	changes := shownChanges(c, opts)
	if len(changes) > 0 {
		fmt.Fprintln(bw)
		if err := diffTable(bw, c, changes, width, opts.Color); err != nil {
			return err
		}
		if more := hiddenChanges(c, opts); more > 0 {
			fmt.Fprintf(bw, "(%s not shown; --limit 0 shows all)\n", plural(more, "more change", "more changes"))
		}
		for _, ch := range changes {
			for _, n := range statementNotes(c, ch) {
				writeWrapped(bw, fmt.Sprintf("%s: %s: %s (%s)", Shorten(ch.Function, width/2), n.Label,
					oneLine(n.Statement, width), n.Detail), width, "    ")
			}
		}
	}
	if b := belowText(c, 5); b != "" {
		fmt.Fprintln(bw)
		writeWrapped(bw, b, width, "  ")
	}
	fmt.Fprintln(bw)
	for _, wn := range c.Warnings {
		writeWrapped(bw, "warning: "+oneLine(wn, 400), width, "  ")
	}
	writeWrapped(bw, "note: "+unchangedNote(c), width, "  ")
	return bw.Flush()
}

// diffTable writes the changes within width: one line per change when
// the names fit (or get at least 40 columns), else the verdict and name on
// one line and the numbers indented below.
func diffTable(bw io.Writer, c *compare.Comparison, changes []compare.Change, width int, color bool) error {
	calls := false
	vw := len("VERDICT")
	for _, ch := range changes {
		calls = calls || ch.Calls != nil
		vw = max(vw, utf8.RuneCountInString(verdictText(ch)))
	}
	var tb bytes.Buffer
	tw := tabwriter.NewWriter(&tb, 0, 0, 2, ' ', 0)
	hdr := fmt.Sprintf("BASE\tCAND\tCHANGE\tRELATIVE [%s CI]\tQ\tMDE\t", confText(c.Confidence))
	if calls {
		hdr += "CALLS/REQ\t"
	}
	fmt.Fprintln(tw, hdr)
	for _, ch := range changes {
		row := fmt.Sprintf("%s\t%s\t%s\t%s\t%s\t%s\t", rateText(ch.Base, c), rateText(ch.Candidate, c),
			signedRateText(ch.Change, c), relText(ch), qText(ch.QValue), mdeText(ch))
		if calls {
			row += callsText(ch) + "\t"
		}
		fmt.Fprintln(tw, row)
	}
	if err := tw.Flush(); err != nil {
		return err
	}
	lines := strings.Split(strings.TrimSuffix(tb.String(), "\n"), "\n")
	numW := utf8.RuneCountInString(lines[0])
	longest := 0
	for _, ch := range changes {
		longest = max(longest, utf8.RuneCountInString(oneLine(ch.Function, 0)))
	}
	oneLineRows := width-vw-2-numW >= min(longest, 40)
	nameWidth := width - vw - 2 - numW
	if !oneLineRows {
		nameWidth = width - vw - 2
	}
	for i, line := range lines {
		verdict, name := "VERDICT", "ROOT CAUSE"
		if i > 0 {
			verdict, name = verdictText(changes[i-1]), Shorten(changes[i-1].Function, nameWidth)
		}
		pad := strings.Repeat(" ", vw-utf8.RuneCountInString(verdict)+2)
		if color && i > 0 {
			verdict = verdictANSI(changes[i-1].Verdict) + verdict + ansiReset
		}
		var err error
		if oneLineRows {
			_, err = fmt.Fprintln(bw, strings.TrimRight(verdict+pad+line+name, " "))
		} else {
			_, err = fmt.Fprintf(bw, "%s\n  %s\n", strings.TrimRight(verdict+pad+name, " "), strings.TrimRight(oneLine(line, width-2), " "))
		}
		if err != nil {
			return err
		}
	}
	return nil
}
