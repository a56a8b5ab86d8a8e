package report

import (
	"bytes"
	"encoding/csv"
	"io"
	"strconv"
	"strings"
	"unicode"
	"unicode/utf16"
	"unicode/utf8"

	json "github.com/goccy/go-json"
)

// This file holds the escaping that every renderer shares. Names,
// statements and peers come from whoever can send a request to the
// service under test, so each is treated as hostile text.

// isInvisible reports whether r is a format character (Unicode category
// Cf): the bidirectional controls (U+061C, U+200E–200F, U+202A–202E,
// U+2066–2069), zero-width characters (U+200B–200D, U+2060–2064), the
// byte-order mark U+FEFF, tag characters and the like. They are invisible,
// and the bidirectional ones reorder the text around them, numbers
// included (Boucher and Anderson, "Trojan Source: Invisible
// Vulnerabilities", 2021).
func isInvisible(r rune) bool { return r >= 0xAD && unicode.Is(unicode.Cf, r) }

// codePoint writes r as the text \uXXXX (or \UXXXXXXXX past the BMP).
func codePoint(b *strings.Builder, r rune) {
	if r > 0xFFFF {
		b.WriteString(`\U` + pad(strconv.FormatInt(int64(r), 16), 8))
	} else {
		b.WriteString(`\u` + pad(strconv.FormatInt(int64(r), 16), 4))
	}
}

func pad(s string, n int) string { return strings.Repeat("0", max(0, n-len(s))) + s }

// revealInvisible shows each invisible character of s (see isInvisible)
// as its \uXXXX code, so that a reader sees it and it reorders nothing.
func revealInvisible(s string) string {
	if strings.IndexFunc(s, isInvisible) < 0 {
		return s
	}
	var b strings.Builder
	for _, r := range s {
		if isInvisible(r) {
			codePoint(&b, r)
		} else {
			b.WriteRune(r)
		}
	}
	return b.String()
}

// writeJSON writes v as indented JSON. The data is exact, but invisible
// characters inside strings are written as JSON \u escapes (a string can
// hold them only there), so that no reader of the raw file sees text
// reordered. The encoder writes its buffer to w as it is: a full report
// is megabytes, which a copy (and a copy to add the final newline) would
// make fresh memory twice over.
func writeJSON(w io.Writer, v any) error {
	enc := json.NewEncoder(jsonRevealer{w})
	enc.SetIndent("", "  ")
	return enc.Encode(v)
}

// jsonRevealer writes JSON text to w with its invisible characters as
// \u escapes. Each Write must hold whole characters, as the encoder's
// single write of a document does.
type jsonRevealer struct{ w io.Writer }

func (r jsonRevealer) Write(data []byte) (int, error) {
	// Invisible characters are not ASCII: most reports have none to find.
	i := nonASCII(data)
	if i < 0 || bytes.IndexFunc(data[i:], isInvisible) < 0 {
		return r.w.Write(data)
	}
	var b strings.Builder
	for rest := data; len(rest) > 0; {
		c, n := utf8.DecodeRune(rest)
		switch {
		case !isInvisible(c):
			b.Write(rest[:n])
		case c > 0xFFFF:
			c1, c2 := utf16.EncodeRune(c)
			codePoint(&b, c1)
			codePoint(&b, c2)
		default:
			codePoint(&b, c)
		}
		rest = rest[n:]
	}
	if _, err := io.WriteString(r.w, b.String()); err != nil {
		return 0, err
	}
	return len(data), nil
}

// nonASCII returns the index of the first byte of data past ASCII, -1 if
// there is none.
func nonASCII(data []byte) int {
	for i, c := range data {
		if c >= utf8.RuneSelf {
			return i
		}
	}
	return -1
}

// csvWriter is a csv.Writer whose cells are safe to open in a
// spreadsheet: see csvCell.
type csvWriter struct{ *csv.Writer }

func newCSVWriter(w io.Writer) csvWriter { return csvWriter{csv.NewWriter(w)} }

// Write writes one row of cells through csvCell.
func (c csvWriter) Write(row []string) error {
	cells := make([]string, len(row))
	for i, s := range row {
		cells[i] = csvCell(s)
	}
	return c.Writer.Write(cells)
}

// csvCell neutralises a cell that a spreadsheet would run as a formula:
// one starting with '=', '+', '-', '@', a tab or a carriage return gets a
// leading apostrophe (the common practice, OWASP "CSV Injection"), and so
// does one starting with an apostrophe, so that removing one leading
// apostrophe always gives the text back. Cells that are numbers (-0.25,
// +3) are left alone, so numeric columns stay numeric. Invisible
// characters are shown as \uXXXX.
func csvCell(s string) string {
	s = revealInvisible(s)
	if s == "" || strings.IndexByte("=+-@\t\r'", s[0]) < 0 {
		return s
	}
	if _, err := strconv.ParseFloat(s, 64); err == nil {
		return s
	}
	return "'" + s
}

// mdAutolinks breaks the patterns that GitHub-flavoured Markdown turns
// into links without any markup ("extended autolinks": www., http://,
// https://, e-mail addresses), in text already escaped by mdText: '@'
// gets a backslash always, ':' before "//" and '.' after "www".
func mdAutolinks(s string) string {
	if !strings.ContainsAny(s, "@:.") {
		return s
	}
	var b strings.Builder
	for i := 0; i < len(s); i++ {
		c := s[i]
		switch {
		case c == '@',
			c == ':' && strings.HasPrefix(s[i+1:], "//"),
			c == '.' && i >= 3 && strings.EqualFold(s[i-3:i], "www"):
			b.WriteByte('\\')
		}
		b.WriteByte(c)
	}
	return b.String()
}

// htmlNameRunes and htmlTextRunes bound what an HTML cell shows of a name
// and of a statement; the full text is in the cell's title. A browser
// lays out a table cell in time that grows faster than its text with
// overflow-wrap: anywhere (a 30,000-character name took minutes), so
// cells stay short (the bounds are common practice, not measured limits).
const (
	htmlNameRunes = 200
	htmlTextRunes = 2000
)

// htmlFuncs are the template functions for long text: cut shortens a
// name (see Shorten) or, for a statement, keeps its start; long says
// whether it did, so that the template adds the full text as a title.
var htmlFuncs = map[string]any{
	"cut": func(s string) string { return Shorten(s, htmlNameRunes) },
	"cutText": func(s string) string {
		if utf8.RuneCountInString(s) <= htmlTextRunes {
			return s
		}
		return string([]rune(s)[:htmlTextRunes-1]) + "…"
	},
	"long":     func(s string) bool { return utf8.RuneCountInString(s) > htmlNameRunes },
	"longText": func(s string) bool { return utf8.RuneCountInString(s) > htmlTextRunes },
}
