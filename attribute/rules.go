package attribute

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"regexp"
	"strings"

	"github.com/culprithq/culprit/traces"
)

// Class is what a frame is, for attribution.
type Class uint8

// Classes, in the order reports list them.
const (
	Library     Class = iota // third-party or runtime code that is neither a boundary nor an entry
	Application              // code the team owns
	Entry                    // framework code that dispatches a request (server handler, consumer, main)
	Database                 // a database client: the frame where a database call starts
	Network                  // any other outbound call: HTTP, RPC, messaging, cloud SDKs
)

var classNames = [...]string{"library", "application", "entry", "database", "network"}

func (c Class) String() string {
	if int(c) < len(classNames) {
		return classNames[c]
	}
	return "unknown"
}

// IsBoundary reports whether frames of class c start an outbound call.
func (c Class) IsBoundary() bool { return c == Database || c == Network }

// ParseClass parses a class name as written in rules files.
func ParseClass(s string) (Class, error) {
	for i, n := range classNames {
		if n == s {
			return Class(i), nil
		}
	}
	return 0, fmt.Errorf("unknown class %q; valid classes: %s", s, strings.Join(classNames[:], ", "))
}

// MarshalText implements encoding.TextMarshaler.
func (c Class) MarshalText() ([]byte, error) { return []byte(c.String()), nil }

// UnmarshalText implements encoding.TextUnmarshaler.
func (c *Class) UnmarshalText(b []byte) error {
	v, err := ParseClass(string(b))
	*c = v
	return err
}

// Rule classifies the frames it matches. Exactly one of Function, Contains,
// Regexp, File or Span is set.
type Rule struct {
	Class Class `json:"class"`
	// Function matches function names that start with it at an
	// identifier boundary (see matchFunction): net/http.Head matches
	// net/http.Head but not net/http.Header.Set.
	Function string `json:"function,omitempty"`
	// Contains matches function names that contain it.
	Contains string `json:"contains,omitempty"`
	// Regexp matches function names (RE2 syntax, unanchored).
	Regexp string `json:"regexp,omitempty"`
	// File matches source file paths that contain it ('/' separators;
	// site-packages/ also matches Debian's dist-packages/).
	File string `json:"file,omitempty"`
	// Span matches span frames: "client:database", "client:rpc",
	// "client:http", "client:messaging" (client or producer spans with
	// those semantic-convention attributes), "server" or "consumer".
	Span string `json:"span,omitempty"`
	// System names the database or network system, e.g. "postgresql",
	// "redis", "http", "grpc". Span rules take it from the span instead.
	System string `json:"system,omitempty"`
	// Family groups built-in rules for display: go, jvm, python, node, otel, user.
	Family string `json:"family,omitempty"`

	re *regexp.Regexp
}

// Pattern returns the rule's match kind and pattern, e.g. ("function", "database/sql.").
func (r *Rule) Pattern() (kind, pattern string) {
	switch {
	case r.Function != "":
		return "function", r.Function
	case r.Contains != "":
		return "contains", r.Contains
	case r.Regexp != "":
		return "regexp", r.Regexp
	case r.File != "":
		return "file", r.File
	case r.Span != "":
		return "span", r.Span
	}
	return "", ""
}

func (r *Rule) compile() error {
	n := 0
	for _, s := range []string{r.Function, r.Contains, r.Regexp, r.File, r.Span} {
		if s != "" {
			n++
		}
	}
	if n != 1 {
		return errors.New(`a rule needs exactly one of "function", "contains", "regexp", "file" or "span"`)
	}
	if r.Regexp != "" {
		re, err := regexp.Compile(r.Regexp)
		if err != nil {
			return fmt.Errorf("bad regexp: %w", err)
		}
		r.re = re
	}
	if r.Span != "" {
		switch r.Span {
		case "client:database", "client:rpc", "client:http", "client:messaging", "server", "consumer":
		default:
			return fmt.Errorf("unknown span pattern %q; valid: client:database, client:rpc, client:http, client:messaging, server, consumer", r.Span)
		}
	}
	return nil
}

// Matches reports whether the rule matches frame f.
func (r *Rule) Matches(f *traces.Frame) bool {
	switch {
	case r.Function != "":
		return matchFunction(r.Function, f.Function)
	case r.Contains != "":
		return strings.Contains(f.Function, r.Contains)
	case r.re != nil:
		return r.re.MatchString(f.Function)
	case r.File != "":
		return f.File != "" && strings.Contains(rulePath(slashPath(f.File)), r.File)
	case r.Span != "":
		if !f.Span {
			return false
		}
		switch r.Span {
		case "server":
			return f.SpanKind == traces.SpanKindServer
		case "consumer":
			return f.SpanKind == traces.SpanKindConsumer
		}
		if f.SpanKind != traces.SpanKindClient && f.SpanKind != traces.SpanKindProducer {
			return false
		}
		return "client:"+f.Protocol.String() == r.Span
	}
	return false
}

func slashPath(p string) string {
	if strings.IndexByte(p, '\\') >= 0 {
		return strings.ReplaceAll(p, `\`, "/")
	}
	return p
}

// Rules is an ordered rule list plus the application prefixes; the first
// matching rule wins. User rules come before the built-in ones so that
// they override them.
type Rules struct {
	// App lists function-name or file-path prefixes of application code.
	// Empty means auto-detect (see Classifier).
	App []string `json:"app,omitempty"`
	// Rules are tried in order.
	Rules []Rule `json:"rules"`
	// Helpers names shared access helpers to see through (function names,
	// or prefixes ending at a '.' or '/'; see SharedHelper).
	Helpers []string `json:"helpers,omitempty"`
	// Files names the rules files that were merged in, for reports.
	Files []string `json:"-"`
}

// DefaultRules returns a fresh copy of the built-in rule table.
func DefaultRules() *Rules {
	rs := &Rules{Rules: append([]Rule(nil), builtinRules...)}
	for i := range rs.Rules {
		if err := rs.Rules[i].compile(); err != nil {
			panic(fmt.Sprintf("built-in rule %d: %v", i, err)) // programmer error, caught by tests
		}
	}
	return rs
}

// RulesFileError reports a problem in a rules file at a line and column.
type RulesFileError struct {
	File   string
	Line   int
	Column int
	Err    error
}

func (e *RulesFileError) Error() string {
	return fmt.Sprintf("%s:%d:%d: %v", e.File, e.Line, e.Column, e.Err)
}

func (e *RulesFileError) Unwrap() error { return e.Err }

// rulesFile is the JSON schema of a user rules file.
type rulesFile struct {
	App     []string          `json:"app"`
	Rules   []json.RawMessage `json:"rules"`
	Helpers []string          `json:"helpers"`
}

// ParseRulesFile reads a user rules file (JSON; schema in the README):
//
//	{"app": ["example.com/shop/"],
//	 "rules": [{"class": "database", "function": "example.com/shop/db.(*Pool).", "system": "postgresql"}]}
//
// Errors carry the line and column of the offending rule or token.
func ParseRulesFile(name string, r io.Reader) (*Rules, error) {
	var f rulesFile
	data, posErr, err := decodeFile(name, r, &f)
	if err != nil {
		return nil, err
	}
	out := &Rules{App: f.App, Helpers: f.Helpers, Files: []string{name}}
	// Locate each rule's start for error positions.
	offsets := arrayOffsets(data, "rules", len(f.Rules))
	for i, raw := range f.Rules {
		var r Rule
		d := json.NewDecoder(bytes.NewReader(raw))
		d.DisallowUnknownFields()
		if err := d.Decode(&r); err != nil {
			return nil, posErr(offsets[i], fmt.Errorf("rule %d: %w", i+1, err))
		}
		if err := r.compile(); err != nil {
			return nil, posErr(offsets[i], fmt.Errorf("rule %d: %w", i+1, err))
		}
		if r.Family == "" {
			r.Family = "user"
		}
		out.Rules = append(out.Rules, r)
	}
	for i, p := range out.App {
		if strings.TrimSpace(p) == "" {
			return nil, &RulesFileError{File: name, Line: 1, Column: 1, Err: fmt.Errorf("app prefix %d is empty", i+1)}
		}
	}
	return out, nil
}

// decodeFile reads one JSON object from r into v, strictly: unknown
// fields and trailing data are errors, and every error is a
// *RulesFileError with its line and column. It returns the data read and
// a function that positions later (semantic) errors at a byte offset.
func decodeFile(name string, r io.Reader, v any) ([]byte, func(int64, error) error, error) {
	data, err := io.ReadAll(io.LimitReader(r, 16<<20))
	if err != nil {
		return nil, nil, fmt.Errorf("reading %s: %w", name, err)
	}
	posErr := func(off int64, err error) error {
		line, col := lineCol(data, off)
		return &RulesFileError{File: name, Line: line, Column: col, Err: err}
	}
	dec := json.NewDecoder(bytes.NewReader(data))
	dec.DisallowUnknownFields()
	if err := dec.Decode(v); err != nil {
		return nil, nil, decodeError(name, data, dec, err)
	}
	if err := expectEnd(name, data, dec); err != nil {
		return nil, nil, err
	}
	return data, posErr, nil
}

// expectEnd fails when anything but white space follows the JSON value
// dec has decoded (a second object, or a half-pasted one).
func expectEnd(name string, data []byte, dec *json.Decoder) error {
	if _, err := dec.Token(); err == io.EOF {
		return nil
	}
	off := dec.InputOffset()
	for off > 0 && off <= int64(len(data)) && strings.IndexByte(" \t\r\n", data[off-1]) < 0 {
		off-- // back to the start of the offending token
	}
	line, col := lineCol(data, off)
	return &RulesFileError{File: name, Line: line, Column: col, Err: errors.New("unexpected data after the JSON object")}
}

// decodeError positions a JSON decoding error of file name at the
// offending byte (a syntax error), value (a type error) or key (an
// unknown field).
func decodeError(name string, data []byte, dec *json.Decoder, err error) error {
	off := dec.InputOffset()
	var se *json.SyntaxError
	var te *json.UnmarshalTypeError
	switch {
	case errors.As(err, &se):
		off = se.Offset - 1 // Offset is just past the bad byte
	case errors.As(err, &te):
		off = te.Offset
	case strings.HasPrefix(err.Error(), "json: unknown field "):
		key := strings.TrimPrefix(err.Error(), "json: unknown field ")
		if i := bytes.Index(data, []byte(key)); i >= 0 {
			off = int64(i)
		}
	}
	line, col := lineCol(data, off)
	return &RulesFileError{File: name, Line: line, Column: col, Err: err}
}

func lineCol(data []byte, off int64) (line, col int) {
	if off > int64(len(data)) {
		off = int64(len(data))
	}
	line, col = 1, 1
	for _, b := range data[:off] {
		if b == '\n' {
			line++
			col = 1
		} else {
			col++
		}
	}
	return line, col
}

// Merge returns a rule set with user's rules first (they override), then
// base's, and the union of app prefixes.
func Merge(base, user *Rules) *Rules {
	out := &Rules{}
	out.App = append(append(out.App, user.App...), base.App...)
	out.Helpers = append(append(out.Helpers, user.Helpers...), base.Helpers...)
	out.Rules = append(append(out.Rules, user.Rules...), base.Rules...)
	out.Files = append(append(out.Files, base.Files...), user.Files...)
	return out
}
