package report

import (
	"bufio"
	"fmt"
	"io"
	"strconv"
	"strings"
	"text/tabwriter"
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

// Render implements Renderer.
func (Text) Render(w io.Writer, r *attribute.Result, opts Options) error {
	bw := bufio.NewWriter(w)
	width := opts.Width
	if width <= 0 {
		width = 100
	}
	unit := r.ValueType.Unit
	t := r.Totals
	denom := t.Database + t.Network
	fmt.Fprintf(bw, "culprit: %s (%s) from %s\n", oneLine(r.ValueType.String(), 80), oneLine(r.Source, 20), oneLine(inputList(r), 200))
	fmt.Fprintf(bw, "database %s + network %s = %s of %s total: the denominator of every share",
		FormatValue(t.Database, unit), FormatValue(t.Network, unit), FormatValue(denom, unit), FormatValue(t.Cost, unit))
	fmt.Fprintf(bw, "; other %s", FormatValue(t.Other, unit))
	if t.Unattributed > 0 {
		fmt.Fprintf(bw, "; no application frame %s", FormatValue(t.Unattributed, unit))
	}
	if t.Requests > 0 {
		fmt.Fprintf(bw, "; %d requests", t.Requests)
	}
	if r.Sampled {
		fmt.Fprintf(bw, "; %d samples", t.Samples)
	}
	fmt.Fprintln(bw)
	fmt.Fprintln(bw)

	causes := shown(r, opts)
	if len(causes) == 0 {
		fmt.Fprintln(bw, "No database or network cost found: no path reached a database or network call.")
	} else {
		tw := tabwriter.NewWriter(bw, 0, 0, 2, ' ', 0)
		countCol := "CALLS"
		if r.Sampled {
			countCol = "SAMPLES"
		}
		perReq := r.Totals.Requests > 0 && !r.Sampled
		hdr := "RANK\tSHARE\tCOST\t" + countCol + "\t"
		if perReq {
			hdr += "PER REQ (MED/P95)\t"
		}
		if opts.Color {
			// tabwriter counts escape codes as width: give the header cells
			// codes of the same length as the coloured cells below them.
			hdr += ansiDefault + "KIND" + ansiReset + "\t" + ansiBold + "ROOT CAUSE" + ansiReset + "\tCALLED FROM"
		} else {
			hdr += "KIND\tROOT CAUSE\tCALLED FROM"
		}
		fmt.Fprintln(tw, hdr)
		nameWidth := width - 60
		if nameWidth < 30 {
			nameWidth = 30
		}
		for i, c := range causes {
			share := Percent(c.Share)
			if r.Sampled {
				share += " ±" + strconv.FormatFloat(c.ShareMargin*100, 'f', 1, 64)
			}
			count := c.Calls
			if r.Sampled {
				count = c.Samples
			}
			row := fmt.Sprintf("%d\t%s\t%s\t%d\t", i+1, share, FormatValue(c.Cost, unit), count)
			if perReq {
				if c.CallsPerRequest != nil {
					row += fmt.Sprintf("%s/%s\t", num(c.CallsPerRequest.Median), num(c.CallsPerRequest.P95))
				} else {
					row += "-\t"
				}
			}
			name := Shorten(c.Function, nameWidth)
			if c.NoAppFrame {
				name = "(no app frame) " + Shorten(strings.TrimPrefix(c.Function, attribute.NoAppFramePrefix), nameWidth-15)
			}
			kind := string(c.Kind)
			if opts.Color {
				col := ansiDatabase
				switch {
				case c.NoAppFrame:
					col = ansiNoApp
				case c.Kind == attribute.KindNetwork:
					col = ansiNetwork
				}
				kind = col + kind + ansiReset
				name = ansiBold + name + ansiReset
			}
			row += kind + "\t" + name + "\t" + oneLine(site(c), 80)
			fmt.Fprintln(tw, row)
		}
		if err := tw.Flush(); err != nil {
			return err
		}
		if len(causes) < len(r.Causes) {
			fmt.Fprintf(bw, "(%d more root causes; --limit 0 shows all)\n", len(r.Causes)-len(causes))
		}
		fmt.Fprintln(bw)
		fmt.Fprintln(bw, "Top calls per root cause:")
		for i, c := range causes {
			for j, d := range c.Statements {
				if j == 2 {
					fmt.Fprintf(bw, "       … %d more\n", len(c.Statements)-2)
					break
				}
				line := fmt.Sprintf("  %2d.  %s %s", i+1, FormatValue(d.Cost, unit), oneLine(d.Statement, width-20))
				if d.Peer != "" {
					line += " → " + oneLine(d.Peer, 100)
				}
				if d.System != "" {
					line += " [" + oneLine(d.System, 40) + "]"
				}
				if d.Via != "" {
					line += " via " + oneLine(d.Via, 100)
				}
				fmt.Fprintln(bw, line)
			}
		}
	}
	if len(r.Findings) > 0 {
		fmt.Fprintln(bw)
		fmt.Fprintln(bw, "Findings:")
		for _, f := range r.Findings {
			fmt.Fprintf(bw, "  - %s: %s — %s (%s of the denominator)\n", oneLine(f.Kind, 40), oneLine(f.Function, 200), oneLine(f.Evidence, 300), Percent(f.Share))
			if f.Statement != "" {
				fmt.Fprintf(bw, "      %s\n", oneLine(f.Statement, width-6))
			}
		}
	}
	if len(r.Domains) > 0 {
		fmt.Fprintln(bw)
		fmt.Fprintln(bw, "By business domain:")
		tw := tabwriter.NewWriter(bw, 0, 0, 2, ' ', 0)
		fmt.Fprintln(tw, "  DOMAIN\tSHARE\tCOST\tROOT CAUSES")
		for _, d := range r.Domains {
			fmt.Fprintf(tw, "  %s\t%s\t%s\t%d\n", oneLine(d.Domain, 60), Percent(d.Share), FormatValue(d.Cost, unit), d.Causes)
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
			row := fmt.Sprintf("  %s\t%s\t%s\t%s", Shorten(e.Entry, width-40),
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
	fmt.Fprintln(bw, oneLine(AppSummary(r), 0))
	for _, c := range Caveats(r) {
		fmt.Fprintln(bw, "note: "+oneLine(c, 0))
	}
	for _, wn := range r.Warnings {
		fmt.Fprintln(bw, "warning: "+oneLine(wn, 400))
	}
	return bw.Flush()
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

func num(f float64) string { return strconv.FormatFloat(f, 'f', -1, 64) }

// oneLine replaces control characters (newlines included) with spaces
// and cuts s to at most max runes.
func oneLine(s string, max int) string {
	s = strings.Map(func(r rune) rune {
		if r < 0x20 || r == 0x7f {
			return ' '
		}
		return r
	}, s)
	if max > 1 && utf8.RuneCountInString(s) > max {
		rs := []rune(s)
		return string(rs[:max-1]) + "…"
	}
	return s
}

// Shorten fits a function name into max runes. It first drops the
// package path's leading elements ("…/catalog.(*Repo).Get"), keeping the
// last package element and the function or method; if that is still too
// long it keeps the end, where the function's own name is.
func Shorten(name string, max int) string {
	name = oneLine(name, 0)
	if max < 8 || utf8.RuneCountInString(name) <= max {
		return name
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
		name = short
	}
	rs := []rune(strings.TrimPrefix(name, "…"))
	return "…" + string(rs[len(rs)-(max-1):])
}
