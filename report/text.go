package report

import (
	"bufio"
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"
	"text/tabwriter"
	"unicode"
	"unicode/utf8"

	"github.com/culprithq/culprit/attribute"
)

// Text renders an aligned table for a terminal.
type Text struct{}

// ANSI colours by kind, culprit's own code: database cyan, network
// magenta, no application frame yellow.
const (
	ansiDatabase = "\x1b[36m"
	ansiNetwork  = "\x1b[35m"
	ansiNoApp    = "\x1b[33m"
	ansiBold     = "\x1b[1m"
	ansiDefault  = "\x1b[39m" // same length as the kind colours
	ansiReset    = "\x1b[0m"
)

// DefaultWidth is the width of the text formats when Options.Width is 0.
const DefaultWidth = 100

// MinWidth is the narrowest width the text formats lay out for.
const MinWidth = 60

// textWidth returns the width to lay out for.
func textWidth(opts Options) int {
	if opts.Width <= 0 {
		return DefaultWidth
	}
	return max(opts.Width, MinWidth)
}

// Render implements Renderer. Every line fits Options.Width (default
// DefaultWidth, at least MinWidth), function names shortened at name
// boundaries (see Shorten).
func (Text) Render(w io.Writer, r *attribute.Result, opts Options) error {
	bw := bufio.NewWriter(w)
	width := textWidth(opts)
	unit := r.ValueType.Unit
	h := newHeadline(r)
	if h.Function == "" {
		writeWrapped(bw, h.Detail, width, "")
	} else {
		fn := Shorten(h.Function, width-20)
		writeWrapped(bw, fmt.Sprintf("%s accounts for %s of database and network %s (%s).", fn, h.Share, h.Noun, h.Detail), width, "")
	}
	writeWrapped(bw, sourceSentence(r), width, "")
	fmt.Fprintln(bw)

	causes := shown(r, opts)
	if len(causes) > 0 {
		if err := textCauses(bw, r, causes, width, opts.Color); err != nil {
			return err
		}
		if len(causes) < len(r.Causes) {
			fmt.Fprintf(bw, "(%s not shown; --limit 0 shows all)\n", plural(len(r.Causes)-len(causes), "more root cause", "more root causes"))
		}
		fmt.Fprintln(bw)
		fmt.Fprintln(bw, "Top calls per root cause:")
		for i, c := range causes {
			for j, d := range c.Statements {
				if j == 2 {
					fmt.Fprintf(bw, "       … %d more\n", len(c.Statements)-2)
					break
				}
				line := fmt.Sprintf("  %2d.  %s %s", i+1, FormatValue(d.Cost, unit), oneLine(d.Statement, 400))
				if d.Peer != "" {
					line += " → " + oneLine(d.Peer, 60)
				}
				if d.System != "" {
					line += " [" + oneLine(d.System, 30) + "]"
				}
				if d.Via != "" {
					line += " via " + oneLine(d.Via, 100)
				}
				writeWrapped(bw, line, width, "         ")
			}
		}
	}
	if len(r.Findings) > 0 {
		fmt.Fprintln(bw)
		fmt.Fprintln(bw, "Findings:")
		for _, f := range r.Findings {
			writeWrapped(bw, fmt.Sprintf("- %s: %s — %s (%s of the denominator)", oneLine(f.Kind, 40), Shorten(f.Function, width-8),
				oneLine(f.Evidence, 300), Percent(f.Share)), width, "    ")
			if f.Statement != "" {
				fmt.Fprintf(bw, "      %s\n", oneLine(f.Statement, width-6))
			}
		}
	}
	if len(r.Domains) > 0 {
		fmt.Fprintln(bw)
		fmt.Fprintln(bw, "By business domain:")
		tw := tabwriter.NewWriter(bw, 0, 0, 2, ' ', 0)
		fmt.Fprintln(tw, "  DOMAIN\tSHARE\tCOST\tDATABASE\tNETWORK\tROOT CAUSES")
		for _, d := range r.Domains {
			fmt.Fprintf(tw, "  %s\t%s\t%s\t%s\t%s\t%d\n", oneLine(d.Domain, width-54), Percent(d.Share), FormatValue(d.Cost, unit),
				FormatValue(d.Database, unit), FormatValue(d.Network, unit), d.Causes)
		}
		if err := tw.Flush(); err != nil {
			return err
		}
	}
	if len(r.Entries) > 0 {
		fmt.Fprintln(bw)
		fmt.Fprintln(bw, "By entry point:")
		tw := tabwriter.NewWriter(bw, 0, 0, 2, ' ', 0)
		reqs := r.Totals.Requests > 0
		hdr := "  ENTRY\tDATABASE\tNETWORK\tTOTAL"
		if reqs {
			hdr += "\tREQUESTS"
		}
		fmt.Fprintln(tw, hdr)
		for i, e := range r.Entries {
			if i == 10 {
				fmt.Fprintf(tw, "  … %d more\n", len(r.Entries)-10)
				break
			}
			row := fmt.Sprintf("  %s\t%s\t%s\t%s", Shorten(entryName(e.Entry), width-44),
				FormatValue(e.Database, unit), FormatValue(e.Network, unit), FormatValue(e.Cost, unit))
			if reqs {
				row += "\t" + strconv.Itoa(e.Requests)
			}
			fmt.Fprintln(tw, row)
		}
		if err := tw.Flush(); err != nil {
			return err
		}
	}
	fmt.Fprintln(bw)
	writeWrapped(bw, AppSummary(r), width, "  ")
	for _, c := range Caveats(r) {
		writeWrapped(bw, "note: "+c, width, "  ")
	}
	for _, wn := range r.Warnings {
		writeWrapped(bw, "warning: "+oneLine(wn, 400), width, "  ")
	}
	return bw.Flush()
}

// textCauses writes the table of root causes within width: the name
// column gets what the numbers leave, and the call site column is dropped
// when it would squeeze the names.
func textCauses(bw io.Writer, r *attribute.Result, causes []*attribute.Cause, width int, color bool) error {
	unit := r.ValueType.Unit
	perReq := anyPerRequest(causes)
	hdr := []string{"#", "SHARE", "COST", strings.ToUpper(countHeader(r))}
	if perReq {
		hdr = append(hdr, "MEDIAN", "P95")
	}
	hdr = append(hdr, "KIND")
	rows := [][]string{hdr}
	var sites []string
	longest := 0
	for i, c := range causes {
		share := Percent(c.Share)
		if r.Sampled {
			share += " ±" + strconv.FormatFloat(c.ShareMargin*100, 'f', 1, 64)
		}
		row := []string{strconv.Itoa(i + 1), share, FormatValue(c.Cost, unit), strconv.FormatInt(countOf(r, c), 10)}
		if perReq {
			if d := c.CallsPerRequest; d != nil {
				row = append(row, numText(d.Median), numText(d.P95))
			} else {
				row = append(row, "-", "-")
			}
		}
		rows = append(rows, append(row, string(c.Kind)))
		sites = append(sites, oneLine(site(c), 40))
		longest = max(longest, utf8.RuneCountInString(oneLine(c.Function, 0)))
	}
	widths := make([]int, len(hdr))
	for _, row := range rows {
		for j, cell := range row {
			widths[j] = max(widths[j], utf8.RuneCountInString(cell))
		}
	}
	fixed := 0
	for _, w := range widths {
		fixed += w + 2
	}
	siteW := len("CALLED FROM")
	for _, s := range sites {
		siteW = max(siteW, utf8.RuneCountInString(s))
	}
	nameW := width - fixed
	withSite := nameW-siteW-2 >= min(longest, 40)
	if withSite {
		nameW -= siteW + 2
	}
	nameW = max(nameW, 12)
	var line strings.Builder
	for i, row := range rows {
		line.Reset()
		for j, cell := range row {
			pad := strings.Repeat(" ", widths[j]-utf8.RuneCountInString(cell))
			if j == 0 || j == len(row)-1 {
				line.WriteString(cell + pad) // rank and kind align left
			} else {
				line.WriteString(pad + cell)
			}
			line.WriteString("  ")
		}
		name, st := "ROOT CAUSE", "CALLED FROM"
		if i > 0 {
			c := causes[i-1]
			name, st = Shorten(c.Function, nameW), sites[i-1]
		}
		if withSite {
			name += strings.Repeat(" ", max(0, nameW-utf8.RuneCountInString(name))+2) + st
		}
		out := strings.TrimRight(line.String()+name, " ")
		if color && i > 0 {
			out = colourRow(out, causes[i-1])
		}
		if _, err := fmt.Fprintln(bw, out); err != nil {
			return err
		}
	}
	if perReq {
		writeWrapped(bw, "MEDIAN and P95: calls per request, over the requests in which the root cause appears.", width, "  ")
	}
	return nil
}

// colourRow colours the kind and bolds the name of a laid-out row; the
// codes take no columns on a terminal.
func colourRow(row string, c *attribute.Cause) string {
	col := ansiDatabase
	switch {
	case c.NoAppFrame:
		col = ansiNoApp
	case c.Kind == attribute.KindNetwork:
		col = ansiNetwork
	}
	kind := string(c.Kind)
	i := strings.Index(row, "  "+kind+" ")
	if i < 0 {
		return row
	}
	i += 2
	rest := strings.TrimLeft(row[i+len(kind):], " ")
	pad := row[i+len(kind) : len(row)-len(rest)]
	return row[:i] + col + kind + ansiReset + pad + ansiBold + rest + ansiReset
}

// writeWrapped writes text broken at spaces into lines of at most width
// runes, continuation lines indented; a word longer than a line is cut.
func writeWrapped(w io.Writer, text string, width int, indent string) {
	text = oneLine(text, 0)
	lead := text[:len(text)-len(strings.TrimLeft(text, " "))]
	words := strings.Fields(text)
	line := ""
	for _, word := range words {
		switch {
		case line == "":
			line = lead + word
		case utf8.RuneCountInString(line)+1+utf8.RuneCountInString(word) <= width:
			line += " " + word
		default:
			fmt.Fprintln(w, oneLine(line, width))
			line = indent + word
		}
	}
	if line != "" {
		fmt.Fprintln(w, oneLine(line, width))
	}
}

func inputList(r *attribute.Result) string {
	switch len(r.Inputs) {
	case 0:
		return "no inputs"
	case 1:
		return r.Inputs[0].Name
	}
	return fmt.Sprintf("%d inputs", len(r.Inputs))
}

func site(c *attribute.Cause) string {
	if c.File == "" {
		return "-"
	}
	file := c.File
	if i := strings.LastIndexByte(file, '/'); i >= 0 {
		file = file[i+1:]
	}
	return file + ":" + strconv.FormatInt(c.Line, 10)
}

// oneLine replaces control characters (newlines included) with spaces,
// shows invisible ones as \uXXXX (revealInvisible) and cuts s to at most
// max runes.
func oneLine(s string, max int) string {
	s = revealInvisible(strings.Map(func(r rune) rune {
		if unicode.IsControl(r) {
			return ' '
		}
		return r
	}, s))
	if max > 1 && utf8.RuneCountInString(s) > max {
		rs := []rune(s)
		return string(rs[:max-1]) + "…"
	}
	return s
}

// Shorten fits a function name into max runes without cutting a word. It
// first drops the package path's leading elements
// ("…/catalog.(*Repo).Get"); if that is still too long it keeps the
// longest tail that starts at a name boundary (after "/", "." or ")"),
// and only when even the last name does not fit does it cut that name at
// its end ("VeryLongFunctionNa…"). A "(no application frame) " prefix is
// kept as it is and the entry point after it is shortened.
func Shorten(name string, max int) string {
	name = oneLine(name, 0)
	if max < 8 || utf8.RuneCountInString(name) <= max {
		return name
	}
	if rest, ok := strings.CutPrefix(name, attribute.NoAppFramePrefix); ok {
		if avail := max - utf8.RuneCountInString(attribute.NoAppFramePrefix); avail >= 8 {
			return attribute.NoAppFramePrefix + Shorten(rest, avail)
		}
		if label := attribute.NoAppFramePrefix + "…"; utf8.RuneCountInString(label) <= max {
			return label
		}
		return oneLine(name, max)
	}
	fn := name
	if i := strings.IndexByte(fn, '['); i >= 0 {
		fn = fn[:i] // generic shapes may contain slashes
	}
	if i := strings.LastIndexByte(fn, '/'); i >= 0 {
		short := "…" + name[i:]
		if utf8.RuneCountInString(short) <= max {
			return short
		}
	}
	// The longest tail that starts at a name boundary and fits: after a
	// "/" or "." (not before another "."), or at a "(".
	for i := 1; i < len(name); i++ {
		if c := name[i-1]; (c != '/' && c != '.' || name[i] == '.') && name[i] != '(' {
			continue
		}
		tail := name[i:]
		if utf8.RuneCountInString(tail)+1 <= max {
			return "…" + tail
		}
	}
	// Even the last name is too long: keep its start.
	last := name
	if i := strings.LastIndexAny(fn, "/.)"); i >= 0 {
		last = name[i+1:]
	}
	rs := []rune(last)
	if len(rs) > max-1 {
		rs = rs[:max-1]
	}
	return string(rs) + "…"
}

// shortName shortens a function name for a list or a label.
func shortName(fn string) string { return Shorten(fn, 48) }

// numText renders a count or mean without float noise: whole numbers as
// integers, else one decimal (two below 1), trailing zeros dropped.
func numText(f float64) string {
	if f == math.Trunc(f) && math.Abs(f) < 1e15 {
		return strconv.FormatFloat(f, 'f', 0, 64)
	}
	prec := 1
	if math.Abs(f) < 1 {
		prec = 2
	}
	s := strconv.FormatFloat(f, 'f', prec, 64)
	if strings.Contains(s, ".") {
		s = strings.TrimRight(strings.TrimRight(s, "0"), ".")
	}
	if s == "-0" {
		s = "0"
	}
	return s
}
