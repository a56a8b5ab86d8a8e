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

	"github.com/culprithq/culprit/attribute"
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
func verdictANSI(v attribute.Outcome) string {
	switch v {
	case attribute.OutcomeRegressed:
		return "\x1b[31m"
	case attribute.OutcomeNew:
		return "\x1b[35m"
	case attribute.OutcomeInconclusive:
		return "\x1b[33m"
	case attribute.OutcomeImproved:
		return "\x1b[32m"
	}
	return "\x1b[39m"
}

// RenderDiff implements DiffRenderer.
func (DiffText) RenderDiff(w io.Writer, c *attribute.Comparison, opts Options) error {
	bw := bufio.NewWriter(w)
	width := opts.Width
	if width <= 0 {
		width = 100
	}
	fmt.Fprintf(bw, "culprit diff: %s, %s\n", oneLine(c.ValueType.String(), 80), oneLine(basisText(c), 120))
	fmt.Fprintf(bw, "base:      %s\n", oneLine(sideText(c.Base), width*3))
	fmt.Fprintf(bw, "candidate: %s\n", oneLine(sideText(c.Candidate), width*3))
	fmt.Fprintf(bw, "significance: q ≤ %s (Benjamini–Hochberg); %s intervals; MDE at %s power; budget %s\n",
		strconv.FormatFloat(c.Alpha, 'g', -1, 64), pctText(c.Confidence), pctText(c.Power), oneLine(budgetText(c), 200))
	fmt.Fprintln(bw)

	h := newDiffHeadline(c)
	line := oneLine(h.Lead, 0)
	if h.Function != "" {
		fn := Shorten(h.Function, max(40, width-utf8.RuneCountInString(line+h.Change)-10))
		if opts.Color {
			fn = ansiBold + fn + ansiReset
		}
		line += "; worst: " + fn + " " + h.Change
	}
	fmt.Fprintln(bw, line)
	if h.Counts != "" {
		fmt.Fprintln(bw, h.Counts)
	}

	changes := shownChanges(c, opts)
	if len(changes) > 0 {
		fmt.Fprintln(bw)
		// The numbers go through tabwriter; the verdict (coloured, which
		// tabwriter would count as width) is padded here, and the
		// function comes last, shortened to the width that is left.
		vw := len("VERDICT")
		for _, ch := range changes {
			vw = max(vw, utf8.RuneCountInString(oneLine(string(ch.Verdict), 0)))
		}
		var tb bytes.Buffer
		tw := tabwriter.NewWriter(&tb, 0, 0, 2, ' ', 0)
		fmt.Fprintf(tw, "BASE\tCANDIDATE\tCHANGE\tRELATIVE [%s CI]\tQ\tMDE\t\n", pctText(c.Confidence))
		for _, ch := range changes {
			fmt.Fprintf(tw, "%s\t%s\t%s\t%s\t%s\t%s\t\n", rateText(ch.Base, c), rateText(ch.Candidate, c),
				signedRateText(ch.Change, c), relText(ch), qText(ch.QValue), mdeText(ch))
		}
		if err := tw.Flush(); err != nil {
			return err
		}
		lines := strings.Split(strings.TrimSuffix(tb.String(), "\n"), "\n")
		nameWidth := max(32, width-vw-2-utf8.RuneCountInString(lines[0]))
		for i, line := range lines {
			verdict, name := "VERDICT", "ROOT CAUSE"
			if i > 0 {
				verdict, name = oneLine(string(changes[i-1].Verdict), 0), Shorten(changes[i-1].Function, nameWidth)
			}
			pad := strings.Repeat(" ", vw-utf8.RuneCountInString(verdict)+2)
			if opts.Color && i > 0 {
				verdict = verdictANSI(changes[i-1].Verdict) + verdict + ansiReset
			}
			fmt.Fprintln(bw, verdict+pad+line+name)
		}
		if more := len(c.Changes) - len(changes); more > 0 {
			fmt.Fprintf(bw, "(%d more changes not shown; --limit 0 shows all)\n", more)
		}
	}
	fmt.Fprintln(bw)
	for _, wn := range c.Warnings {
		fmt.Fprintln(bw, "warning: "+oneLine(wn, 400))
	}
	fmt.Fprintln(bw, "note: "+unchangedNote(c))
	return bw.Flush()
}
