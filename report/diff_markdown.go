package report

import (
	"bufio"
	"fmt"
	"io"
	"strings"

	"github.com/culprithq/culprit/attribute/compare"
)

// DiffMarkdown renders a comparison as GitHub-flavoured Markdown for an
// incident review or a pull request: the verdict headline, the sides
// compared, the table of changes (most severe first, up to Options.Limit
// rows), how the statistics were done, the warnings, and how the report
// was produced.
//
// Input strings are made inert as Markdown does it (see Markdown):
// control characters become spaces, Markdown punctuation is
// backslash-escaped, code spans use a fence longer than any backtick run
// inside. Options.Color and Options.Width are ignored.
type DiffMarkdown struct{}

// RenderDiff implements DiffRenderer.
func (DiffMarkdown) RenderDiff(w io.Writer, c *compare.Comparison, opts Options) error {
	bw := bufio.NewWriter(w)
	fmt.Fprintln(bw, "# culprit: comparison of two builds")
	fmt.Fprintln(bw)
	h := newDiffHeadline(c)
	if h.Function == "" {
		fmt.Fprintf(bw, "%s.\n", mdText(h.Lead))
	} else {
		fmt.Fprintf(bw, "%s; worst: **%s** %s.\n", mdText(h.Lead), mdText(h.Function), mdText(h.Change))
	}
	if h.Counts != "" {
		fmt.Fprintln(bw)
		fmt.Fprintf(bw, "%s.\n", mdText(h.Counts))
	}
	fmt.Fprintln(bw)
	fmt.Fprintf(bw, "- base: %s\n", mdText(sideText(c.Base)))
	fmt.Fprintf(bw, "- candidate: %s\n", mdText(sideText(c.Candidate)))
	fmt.Fprintf(bw, "- values: %s; %s\n", mdText(basisText(c)), mdText(thresholdText(c)))

	fmt.Fprint(bw, "\n## Changes\n\n")
	changes := shownChanges(c, opts)
	if len(changes) == 0 {
		fmt.Fprintln(bw, "Nothing to compare.")
	} else {
		calls := anyCalls(changes)
		hdr := []string{"Verdict", "Root cause", "Base", "Candidate", "Change",
			"Relative change \\[" + confText(c.Confidence) + " interval\\]", "q", "MDE"}
		align := []string{"---", "---", "---:", "---:", "---:", "---:", "---:", "---:"}
		if calls {
			hdr = append(hdr, "Calls/request", "Calls change \\["+confText(c.Confidence)+" interval\\]", "Calls q")
			align = append(align, "---:", "---:", "---:")
		}
		mdRow(bw, hdr)
		mdRow(bw, align)
		for _, ch := range changes {
			verdict := mdText(verdictText(ch))
			if ch.Verdict == compare.OutcomeRegressed {
				verdict = "**" + verdict + "**"
			}
			row := []string{verdict, mdText(ch.Function), mdText(rateText(ch.Base, c)), mdText(rateText(ch.Candidate, c)),
				mdText(signedRateText(ch.Change, c)), mdText(relText(ch)), mdText(qText(ch.QValue)), mdText(mdeText(ch))}
			if calls {
				q := "-"
				if ch.Calls != nil {
					q = qText(ch.Calls.QValue)
				}
				row = append(row, mdText(callsText(ch)), mdText(callsRelText(ch)), mdText(q))
			}
			mdRow(bw, row)
		}
		if more := hiddenChanges(c, opts); more > 0 {
			fmt.Fprintln(bw)
			fmt.Fprintf(bw, "%s not shown (--limit 0 shows all).\n", plural(more, "more change is", "more changes are"))
		}
		var news []string
		for _, ch := range changes {
			for _, n := range statementNotes(c, ch) {
				news = append(news, fmt.Sprintf("- %s: %s: %s (%s)", mdText(ch.Function), mdText(n.Label), mdCode(n.Statement), mdText(n.Detail)))
			}
		}
		if len(news) > 0 {
			fmt.Fprint(bw, "\n### Statements that changed\n\n")
			fmt.Fprintln(bw, strings.Join(news, "\n"))
		}
	}
	if b := belowText(c, 10); b != "" {
		fmt.Fprintln(bw)
		fmt.Fprintf(bw, "%s.\n", mdText(b))
	}

	fmt.Fprint(bw, "\n## Method\n\n")
	for _, n := range methodNotes(c) {
		fmt.Fprintf(bw, "- %s\n", mdText(n))
	}
	if len(c.Warnings) > 0 {
		fmt.Fprint(bw, "\n## Warnings\n\n")
		for _, wn := range c.Warnings {
			fmt.Fprintf(bw, "- %s\n", mdText(wn))
		}
	}

	fmt.Fprint(bw, "\n## How this was produced\n\n")
	p := newDiffProduced(c, opts.Provenance)
	fence := strings.Repeat("`", max(3, longestRun(p.Command, '`')+1))
	fmt.Fprintf(bw, "%ssh\n%s\n%s\n\n", fence, p.Command, fence)
	fmt.Fprintf(bw, "- culprit version: %s\n", mdCode(p.Version))
	fmt.Fprintf(bw, "- value type: %s\n", mdCode(p.ValueType))
	fmt.Fprintf(bw, "- basis: %s\n", mdText(p.Basis))
	fmt.Fprintf(bw, "- budget: %s; q ≤ %s\n", mdText(p.Budget), mdText(p.Alpha))
	fmt.Fprintf(bw, "- bootstrap: %s resamples, seed %s\n", mdText(p.Resamples), mdText(p.Seed))
	for _, s := range p.Sides {
		kind := ""
		if s.Source != "" {
			kind = " (" + mdText(s.Source) + ")"
		}
		if len(s.Inputs) == 0 {
			fmt.Fprintf(bw, "- %s inputs%s: none recorded\n", s.Label, kind)
			continue
		}
		fmt.Fprintf(bw, "- %s inputs%s:\n", s.Label, kind)
		for _, in := range s.Inputs {
			fmt.Fprintf(bw, "  - %s (%s, %d bytes, sha256 %s)\n", mdCode(in.Name), mdText(in.Format), in.Bytes, mdCode(in.SHA256))
		}
	}
	if len(p.Options) > 0 {
		fmt.Fprintf(bw, "- options: %s\n", mdList(p.Options, ""))
	}
	return bw.Flush()
}
