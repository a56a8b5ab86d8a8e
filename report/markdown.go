package report

import (
	"bufio"
	"fmt"
	"io"
	"strconv"
	"strings"
	"unicode"

	"github.com/culprithq/culprit/attribute"
)

// Markdown renders a GitHub-flavoured Markdown report ready to paste into
// an incident review: a one-sentence headline, the ranked table, the top
// statements of each root cause, findings, the per-entry breakdown, the
// caveats and warnings, and how the report was produced.
//
// Every input string is made inert: control characters (newlines
// included) become spaces, invalid UTF-8 becomes U+FFFD, Markdown
// punctuation is backslash-escaped (so `|` is `\|` inside table cells),
// and code spans use a backtick fence longer than any run inside them.
// User text never starts a line, so it cannot open a block. Options.Color
// and Options.Width are ignored.
type Markdown struct{}

// topStatements is how many statements per root cause the Markdown and
// HTML reports list; the CSV and JSON formats carry all of them.
const topStatements = 5

// Render implements Renderer.
func (Markdown) Render(w io.Writer, r *attribute.Result, opts Options) error {
	bw := bufio.NewWriter(w)
	unit := r.ValueType.Unit
	causes := shown(r, opts)

	fmt.Fprintln(bw, "# culprit: database and network root causes")
	fmt.Fprintln(bw)
	h := newHeadline(r)
	if h.Function == "" {
		fmt.Fprintln(bw, h.Detail)
	} else {
		fmt.Fprintf(bw, "**%s** accounts for %s of database and network %s (%s).\n",
			mdText(h.Function), h.Share, h.Noun, mdText(h.Detail))
	}
	fmt.Fprintln(bw)
	fmt.Fprintln(bw, mdText(sourceSentence(r)))

	fmt.Fprint(bw, "\n## Root causes\n\n")
	if len(causes) == 0 {
		fmt.Fprintln(bw, "Nothing to rank.")
	} else {
		perReq := anyPerRequest(causes)
		hdr := []string{"Rank", "Share", "Cost", countHeader(r)}
		align := []string{"---:", "---:", "---:", "---:"}
		if perReq {
			hdr = append(hdr, "Calls/request median", "Calls/request p95")
			align = append(align, "---:", "---:")
		}
		hdr = append(hdr, "Kind", "Root cause", "Call site")
		align = append(align, "---", "---", "---")
		mdRow(bw, hdr)
		mdRow(bw, align)
		for i, c := range causes {
			row := []string{strconv.Itoa(i + 1), shareText(r, c), FormatValue(c.Cost, unit), strconv.FormatInt(countOf(r, c), 10)}
			if perReq {
				row = append(row, perRequestText(c)...)
			}
			row = append(row, mdText(string(c.Kind)), mdText(c.Function), mdText(site(c)))
			mdRow(bw, row)
		}
		if more := len(r.Causes) - len(causes); more > 0 {
			fmt.Fprintln(bw)
			fmt.Fprintf(bw, "%s not shown (--limit 0 shows all).\n", plural(more, "more root cause is", "more root causes are"))
		}

		fmt.Fprint(bw, "\n## Top statements per root cause\n")
		for i, c := range causes {
			fmt.Fprintln(bw)
			fmt.Fprintf(bw, "### %d. %s\n", i+1, mdText(c.Function))
			fmt.Fprintln(bw)
			if len(c.Statements) == 0 {
				fmt.Fprintln(bw, "No statement recorded.")
				continue
			}
			for j, d := range c.Statements {
				if j == topStatements {
					fmt.Fprintf(bw, "- … %d more (the CSV and JSON formats list all)\n", len(c.Statements)-j)
					break
				}
				fmt.Fprintf(bw, "- %s\n", mdDetail(r, d))
			}
		}
	}

	if len(r.Findings) > 0 {
		fmt.Fprint(bw, "\n## Findings\n\n")
		for _, f := range r.Findings {
			fmt.Fprintf(bw, "- **%s** in %s: %s (%s of database and network cost, %s)\n",
				mdText(f.Kind), mdText(f.Function), mdText(f.Evidence), Percent(f.Share), FormatValue(f.Cost, unit))
			for _, ev := range findingEvidence(f) {
				fmt.Fprintf(bw, "  - %s: %s\n", ev.Label, mdEvidence(ev))
			}
		}
	}

	if len(r.Domains) > 0 {
		fmt.Fprint(bw, "\n## By business domain\n\n")
		mdRow(bw, []string{"Domain", "Share", "Cost", "Database", "Network", "Root causes"})
		mdRow(bw, []string{"---", "---:", "---:", "---:", "---:", "---:"})
		for _, d := range r.Domains {
			mdRow(bw, []string{mdText(d.Domain), Percent(d.Share), FormatValue(d.Cost, unit),
				FormatValue(d.Database, unit), FormatValue(d.Network, unit), strconv.Itoa(d.Causes)})
		}
	}

	if len(r.Entries) > 0 {
		fmt.Fprint(bw, "\n## By entry point\n\n")
		// Requests only when the source knows them (not "0" for profiles).
		reqs := r.Totals.Requests > 0
		hdr, align := []string{"Entry point", "Database", "Network", "Other", "Total"}, []string{"---", "---:", "---:", "---:", "---:"}
		if reqs {
			hdr, align = append(hdr, "Requests"), append(align, "---:")
		}
		mdRow(bw, hdr)
		mdRow(bw, align)
		for _, e := range r.Entries {
			row := []string{mdText(entryName(e.Entry)), FormatValue(e.Database, unit), FormatValue(e.Network, unit),
				FormatValue(entryOther(e), unit), FormatValue(e.Cost, unit)}
			if reqs {
				row = append(row, strconv.Itoa(e.Requests))
			}
			mdRow(bw, row)
		}
	}

	fmt.Fprint(bw, "\n## Notes\n\n")
	fmt.Fprintf(bw, "- %s\n", mdText(AppSummary(r)))
	for _, c := range Caveats(r) {
		fmt.Fprintf(bw, "- %s\n", mdText(c))
	}
	if len(r.Warnings) > 0 {
		fmt.Fprint(bw, "\n## Warnings\n\n")
		for _, wn := range r.Warnings {
			fmt.Fprintf(bw, "- %s\n", mdText(wn))
		}
	}

	fmt.Fprint(bw, "\n## How this was produced\n\n")
	p := newProduced(r, opts.Provenance)
	fence := strings.Repeat("`", max(3, longestRun(p.Command, '`')+1))
	fmt.Fprintf(bw, "%ssh\n%s\n%s\n\n", fence, p.Command, fence)
	fmt.Fprintf(bw, "- culprit version: %s\n", mdCode(p.Version))
	fmt.Fprintf(bw, "- value type: %s\n", mdCode(p.ValueType))
	if p.Source != "" {
		fmt.Fprintf(bw, "- source kind: %s\n", mdText(p.Source))
	}
	if len(p.Inputs) == 0 {
		fmt.Fprintln(bw, "- inputs: none")
	} else {
		fmt.Fprintln(bw, "- inputs:")
		for _, in := range p.Inputs {
			fmt.Fprintf(bw, "  - %s (%s, %d bytes, sha256 %s)\n", mdCode(in.Name), mdText(in.Format), in.Bytes, mdCode(in.SHA256))
		}
	}
	fmt.Fprintf(bw, "- rules files: %s\n", mdList(p.RulesFiles, "none (built-in rules only)"))
	fmt.Fprintf(bw, "- application prefixes: %s\n", mdList(p.Prefixes, "none given (auto-detected, see Notes)"))
	if len(p.Options) > 0 {
		fmt.Fprintf(bw, "- options: %s\n", mdList(p.Options, ""))
	}
	return bw.Flush()
}

// mdDetail renders one statement line of a root cause.
func mdDetail(r *attribute.Result, d attribute.Detail) string {
	var b strings.Builder
	b.WriteString(FormatValue(d.Cost, r.ValueType.Unit))
	if r.Sampled {
		b.WriteString(", " + plural64(d.Samples, "sample", "samples"))
	} else {
		b.WriteString(", " + plural64(d.Calls, "call", "calls"))
	}
	b.WriteString(", " + mdText(string(d.Kind)))
	if d.System != "" {
		b.WriteString(" " + mdText(d.System))
	}
	b.WriteString(": " + mdCode(d.Statement))
	if d.Peer != "" {
		b.WriteString(" → " + mdCode(d.Peer))
	}
	if d.Via != "" {
		b.WriteString(" via " + mdCode(d.Via))
	}
	return b.String()
}

func mdEvidence(ev evidence) string {
	if ev.Code {
		return mdCode(ev.Value)
	}
	return mdText(ev.Value)
}

// mdRow writes one table row of already escaped cells.
func mdRow(w io.Writer, cells []string) {
	fmt.Fprintf(w, "| %s |\n", strings.Join(cells, " | "))
}

// mdList renders items as comma-separated code spans, or empty when there
// are none.
func mdList(items []string, empty string) string {
	if len(items) == 0 {
		return empty
	}
	parts := make([]string, len(items))
	for i, s := range items {
		parts[i] = mdCode(s)
	}
	return strings.Join(parts, ", ")
}

// mdSpecial are the characters that may start inline Markdown (emphasis,
// code, links, raw HTML, entities, strikethrough, table cells, math,
// heading closers); each gets a backslash, which CommonMark allows before
// any ASCII punctuation.
const mdSpecial = "\\`*_[]<>|~&#$!{}"

// mdText makes s safe as inline Markdown text, table cells included.
func mdText(s string) string {
	s = clean(s)
	var b strings.Builder
	for _, r := range s {
		if r < 0x80 && strings.ContainsRune(mdSpecial, r) {
			b.WriteByte('\\')
		}
		b.WriteRune(r)
	}
	return mdAutolinks(b.String())
}

// mdCode renders s as a code span outside tables. The fence is one
// backtick longer than the longest run inside, and the content is padded
// with spaces when CommonMark would otherwise strip or merge its edges.
func mdCode(s string) string {
	s = clean(s)
	if strings.TrimSpace(s) == "" {
		return "(empty)"
	}
	fence := strings.Repeat("`", longestRun(s, '`')+1)
	if s[0] == '`' || s[len(s)-1] == '`' || (s[0] == ' ' && s[len(s)-1] == ' ') {
		s = " " + s + " "
	}
	return fence + s + fence
}

// longestRun returns the length of the longest run of c in s.
func longestRun(s string, c byte) int {
	best, n := 0, 0
	for i := 0; i < len(s); i++ {
		if s[i] == c {
			n++
			best = max(best, n)
		} else {
			n = 0
		}
	}
	return best
}

// clean makes s one line of valid UTF-8 for people to read: invalid bytes
// become U+FFFD, control characters (C0, DEL, C1, line and paragraph
// separators) become spaces and invisible ones \uXXXX (revealInvisible).
func clean(s string) string {
	return revealInvisible(strings.Map(func(r rune) rune {
		if unicode.IsControl(r) || r == '\u2028' || r == '\u2029' {
			return ' '
		}
		return r
	}, strings.ToValidUTF8(s, "\uFFFD")))
}

// headline is the one-sentence summary of the Markdown and HTML reports.
// Its strings are raw: each renderer escapes them.
type headline struct {
	// Function is the top root cause; empty when there is none, and
	// Detail is then the whole sentence.
	Function string
	Share    string // "46.2% ± 3.1%"
	Noun     string // "time" for durations, "cost" otherwise
	Detail   string // what the share is of
}

func newHeadline(r *attribute.Result) headline {
	if len(r.Causes) == 0 {
		return headline{Detail: "No database or network cost found: no path reached a database or network call."}
	}
	c, unit, t := r.Causes[0], r.ValueType.Unit, r.Totals
	h := headline{Function: c.Function, Share: shareText(r, c), Noun: "cost"}
	if unit == "nanoseconds" {
		h.Noun = "time"
	}
	h.Detail = fmt.Sprintf("%s of %s database+network; %s in all", FormatValue(c.Cost, unit),
		FormatValue(t.Database+t.Network, unit), FormatValue(t.Cost, unit))
	if r.Sampled {
		h.Detail += "; " + plural64(c.Samples, "sample", "samples")
	}
	return h
}

// sourceSentence states what was read and the denominator of the shares.
func sourceSentence(r *attribute.Result) string {
	unit, t := r.ValueType.Unit, r.Totals
	kind := ""
	if r.Source != "" {
		kind = " (" + r.Source + ")"
	}
	s := fmt.Sprintf("Value type %s%s from %s. Database %s + network %s = %s, the denominator of every share, of %s in all; other %s",
		r.ValueType, kind, inputList(r), FormatValue(t.Database, unit), FormatValue(t.Network, unit),
		FormatValue(t.Database+t.Network, unit), FormatValue(t.Cost, unit), FormatValue(t.Other, unit))
	if t.Unattributed > 0 {
		s += "; no application frame " + FormatValue(t.Unattributed, unit)
	}
	if t.Requests > 0 {
		s += "; " + plural(t.Requests, "request", "requests")
	}
	if r.Sampled {
		s += "; " + plural64(t.Samples, "sample", "samples")
	}
	return s + "."
}

// shareText renders a cause's share with its margin for sampled sources.
func shareText(r *attribute.Result, c *attribute.Cause) string {
	if r.Sampled {
		return Percent(c.Share) + " ± " + Percent(c.ShareMargin)
	}
	return Percent(c.Share)
}

// countHeader and countOf give the count behind a row: samples for
// profiles, calls for spans.
func countHeader(r *attribute.Result) string {
	if r.Sampled {
		return "Samples"
	}
	return "Calls"
}

func countOf(r *attribute.Result, c *attribute.Cause) int64 {
	if r.Sampled {
		return c.Samples
	}
	return c.Calls
}

func anyPerRequest(causes []*attribute.Cause) bool {
	for _, c := range causes {
		if c.CallsPerRequest != nil {
			return true
		}
	}
	return false
}

// perRequestText renders the median and p95 of calls per request (over
// the requests in which the cause appears), "–" when unknown.
func perRequestText(c *attribute.Cause) []string {
	if c.CallsPerRequest == nil {
		return []string{"–", "–"}
	}
	return []string{numText(c.CallsPerRequest.Median), numText(c.CallsPerRequest.P95)}
}

// entryName is an entry point's name, cleaned (see clean), or a
// placeholder when nothing readable is left.
func entryName(e string) string {
	e = clean(e)
	if strings.TrimSpace(e) == "" {
		return "(unnamed entry point)"
	}
	return e
}

// entryOther is an entry point's cost that reached no boundary.
func entryOther(e attribute.EntryTotal) int64 {
	return max(0, e.Cost-e.Database-e.Network)
}

// evidence is one labelled fact behind a finding; Code marks statement
// and peer text, shown as code.
type evidence struct {
	Label, Value string
	Code         bool
}

func findingEvidence(f attribute.Finding) []evidence {
	var out []evidence
	if f.Statement != "" {
		out = append(out, evidence{"statement", f.Statement, true})
	}
	if f.Peer != "" {
		out = append(out, evidence{"peer", f.Peer, true})
	}
	if d := f.PerRequest; d != nil {
		out = append(out, evidence{Label: "per request", Value: fmt.Sprintf("median %s, p95 %s, max %s", numText(d.Median), numText(d.P95), numText(d.Max))})
	}
	if f.RequestsSeen > 0 {
		out = append(out, evidence{Label: "requests", Value: fmt.Sprintf("%d of %d", f.Requests, f.RequestsSeen)})
	}
	if f.Depth > 0 {
		out = append(out, evidence{Label: "deepest recursion", Value: strconv.Itoa(f.Depth)})
	}
	return out
}

// produced is the "how this was produced" block, raw strings; each
// renderer escapes them.
type produced struct {
	Command, Version, ValueType, Source string
	Inputs                              []producedInput
	RulesFiles, Prefixes, Options       []string
}

type producedInput struct {
	Name, Format, SHA256 string
	Bytes                int64
}

func newProduced(r *attribute.Result, p Provenance) produced {
	out := produced{Command: clean(p.Command), Version: p.Version, ValueType: r.ValueType.String(), Source: r.Source,
		RulesFiles: r.App.RulesFiles, Prefixes: r.App.Prefixes, Options: p.Options}
	if strings.TrimSpace(out.Command) == "" {
		out.Command = "(command not recorded)"
	}
	if out.Version == "" {
		out.Version = "unknown"
	}
	for _, in := range r.Inputs {
		out.Inputs = append(out.Inputs, producedInput{Name: in.Name, Format: in.Format, SHA256: in.SHA256, Bytes: in.Bytes})
	}
	return out
}
