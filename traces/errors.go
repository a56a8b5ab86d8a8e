package traces

import (
	"errors"
	"fmt"
	"sort"
	"strconv"
	"strings"
)

// Sentinel errors that callers test with errors.Is.
var (
	// ErrFormat means the input is not in any format culprit reads.
	ErrFormat = errors.New("unrecognised input format")
	// ErrLimit means the input exceeds one of the configured Limits.
	ErrLimit = errors.New("input limit exceeded")
	// ErrMismatch means several inputs cannot be merged into one source.
	ErrMismatch = errors.New("inputs do not match")
)

// ParseError reports a problem at a position in one input. Line is
// 1-based and set for line-oriented text input, with Offset the 1-based
// byte column; for binary input Binary is set and Offset is the 0-based
// byte offset, of the decompressed data when Decompressed. A zero Line or
// Offset is unknown, except that a binary offset is always shown.
type ParseError struct {
	File         string
	Line         int
	Offset       int64
	Binary       bool
	Decompressed bool
	Snippet      string // a short, escaped excerpt of the offending input
	Err          error
}

// Error is "FILE:LINE:COLUMN: problem" for text, "FILE: byte N: problem"
// for binary input.
func (e *ParseError) Error() string {
	var b strings.Builder
	b.WriteString(e.File)
	if e.Line > 0 {
		b.WriteString(":")
		b.WriteString(strconv.Itoa(e.Line))
		if e.Offset > 0 {
			b.WriteString(":")
			b.WriteString(strconv.FormatInt(e.Offset, 10))
		}
	}
	b.WriteString(": ")
	b.WriteString(e.Detail())
	return b.String()
}

// Detail is the error without the file name, line and column: the binary
// position, the problem and the excerpt.
func (e *ParseError) Detail() string {
	var b strings.Builder
	if e.Line == 0 && (e.Binary || e.Offset > 0) {
		b.WriteString("byte ")
		b.WriteString(strconv.FormatInt(e.Offset, 10))
		if e.Decompressed {
			b.WriteString(" of the decompressed data")
		}
		b.WriteString(": ")
	}
	b.WriteString(e.Err.Error())
	if e.Snippet != "" {
		b.WriteString(" (near ")
		b.WriteString(strconv.Quote(e.Snippet))
		b.WriteString(")")
	}
	return b.String()
}

func (e *ParseError) Unwrap() error { return e.Err }

// ValueError reports a value type name that the source does not have.
type ValueError struct {
	Name  string
	Valid []string
}

func (e *ValueError) Error() string {
	return fmt.Sprintf("no value type %q; choose one of: %s", e.Name, strings.Join(e.Valid, ", "))
}

// Warning is one repaired or skipped problem in the input.
type Warning struct {
	Kind    string // a short stable identifier, e.g. "orphan-span"
	File    string
	Line    int
	Column  int64 // 1-based byte column in Line; 0 if unknown
	Message string
}

func (w Warning) String() string {
	loc := w.File
	if w.Line > 0 {
		loc += ":" + strconv.Itoa(w.Line)
		if w.Column > 0 {
			loc += ":" + strconv.FormatInt(w.Column, 10)
		}
	}
	if loc == "" {
		return w.Kind + ": " + w.Message
	}
	return loc + ": " + w.Kind + ": " + w.Message
}

// maxWarningExamples is how many examples of each warning kind are kept.
const maxWarningExamples = 3

// Warnings collects repaired problems, counted by kind, keeping only a few
// examples of each so that a badly broken input cannot flood the output.
// The zero value is ready to use.
type Warnings struct {
	counts   map[string]int
	examples map[string][]Warning
}

// Add records w.
func (ws *Warnings) Add(w Warning) {
	if ws.counts == nil {
		ws.counts = map[string]int{}
		ws.examples = map[string][]Warning{}
	}
	ws.counts[w.Kind]++
	if len(ws.examples[w.Kind]) < maxWarningExamples {
		ws.examples[w.Kind] = append(ws.examples[w.Kind], w)
	}
}

// Merge adds all of o's warnings to ws.
func (ws *Warnings) Merge(o Warnings) {
	for kind, n := range o.counts {
		for _, ex := range o.examples[kind] {
			ws.Add(ex)
		}
		ws.counts[kind] += n - len(o.examples[kind])
	}
}

// Len returns the total number of warnings recorded.
func (ws *Warnings) Len() int {
	n := 0
	for _, c := range ws.counts {
		n += c
	}
	return n
}

// WarningSummary is the count and a few examples of one warning kind.
type WarningSummary struct {
	Kind     string
	Count    int
	Examples []Warning
}

// Summary returns one entry per kind, sorted by kind.
func (ws *Warnings) Summary() []WarningSummary {
	out := make([]WarningSummary, 0, len(ws.counts))
	for kind, n := range ws.counts {
		out = append(out, WarningSummary{Kind: kind, Count: n, Examples: ws.examples[kind]})
	}
	sort.Slice(out, func(i, j int) bool { return out[i].Kind < out[j].Kind })
	return out
}

// Strings renders the summary as one line per kind.
func (ws *Warnings) Strings() []string {
	var out []string
	for _, s := range ws.Summary() {
		line := strconv.Itoa(s.Count) + " × " + s.Kind
		if len(s.Examples) > 0 {
			ex := make([]string, len(s.Examples))
			for i, e := range s.Examples {
				// The kind leads the line already.
				ex[i] = strings.TrimPrefix(e.String(), e.Kind+": ")
				if loc, rest, ok := strings.Cut(e.String(), ": "+e.Kind+": "); ok {
					ex[i] = loc + ": " + rest
				}
			}
			line += " (e.g. " + strings.Join(ex, "; ") + ")"
		}
		out = append(out, line)
	}
	return out
}
