package traces

import (
	"bytes"
	"errors"
	"fmt"
	"math"
	"slices"
	"strings"
)

// ParseKind reads the name of a kind of input as --source takes it:
// "traces" (or "spans"), "profiles" (or "profile") or "exectraces" (Go
// execution traces); "" is 0, any kind.
func ParseKind(s string) (Kind, error) {
	switch s {
	case "":
		return 0, nil
	case "traces", "spans":
		return Spans, nil
	case "profiles", "profile":
		return Profile, nil
	case "exectraces", "exectrace":
		return ExecTrace, nil
	}
	return 0, fmt.Errorf("unknown source %q: want traces, profiles or exectraces", s)
}

// plural names a kind of input for users.
func (k Kind) plural() string {
	switch k {
	case Spans:
		return "traces"
	case ExecTrace:
		return "exectraces"
	}
	return "profiles"
}

// admit decides whether input name, of kind k, is read. With
// Options.Source set, inputs of the other kind are skipped with a note.
// Without it, inputs of a second kind are only listed: Source then fails
// naming the inputs of each kind and the flag that chooses.
func (l *Loader) admit(k Kind, name string) bool {
	if l.opts.Source != 0 && k != l.opts.Source {
		l.notes = append(l.notes, fmt.Sprintf("%s skipped: %s input (--source %s)", name, k.plural()[:len(k.plural())-1], l.opts.Source.plural()))
		return false
	}
	if l.byKind == nil {
		l.byKind = map[Kind][]string{}
	}
	l.byKind[k] = append(l.byKind[k], name)
	return len(l.byKind) == 1
}

// mixError returns the error for inputs of both kinds, or nil.
func (l *Loader) mixError() error {
	if len(l.byKind) < 2 {
		return nil
	}
	list := func(names []string) string {
		if len(names) > 3 {
			return strings.Join(names[:3], ", ") + fmt.Sprintf(" and %d more", len(names)-3)
		}
		return strings.Join(names, ", ")
	}
	var held, choose []string
	for _, k := range []Kind{Profile, Spans, ExecTrace} {
		if names := l.byKind[k]; len(names) > 0 {
			held = append(held, fmt.Sprintf("%s (%s)", k.plural(), list(names)))
			choose = append(choose, "--source "+k.plural())
		}
	}
	return fmt.Errorf("the inputs hold %s; culprit analyses one kind per run: choose one with %s: %w",
		strings.Join(held, " and "), strings.Join(choose, " or "), ErrMismatch)
}

// nothingRead returns the error for a run in which no input yielded a
// span or a sample, saying what was skipped and why.
func (l *Loader) nothingRead(src *Source) error {
	msg := "no input yielded any span or sample"
	var why []string
	if src != nil && src.Kind == Spans && l.opts.Service != "" {
		msg = fmt.Sprintf("no spans of service %q in the inputs", l.opts.Service)
		var names []string
		for _, si := range src.Services {
			names = append(names, si.Name)
		}
		if len(names) > 0 {
			why = append(why, "services found: "+strings.Join(names, ", "))
		}
	}
	why = append(why, l.notes...)
	why = append(why, l.warnings.Strings()...)
	if src != nil {
		why = append(why, src.Warnings.Strings()...)
	}
	if len(why) > 0 {
		msg += " (" + strings.Join(why, "; ") + ")"
	}
	return errors.New(msg)
}

// checkSums fails when the magnitudes of a value type over all paths add
// up to more than an int64 holds: every total and share culprit computes
// sums a subset of them, so below that bound none can overflow (turn
// negative, or make shares of several times 100%).
func (s *Source) checkSums() error {
	for v, vt := range s.ValueTypes {
		var sum uint64
		for i := range s.Paths.Len() {
			x := s.Paths.Value(i, v)
			m := uint64(x)
			if x < 0 {
				m = uint64(-(x + 1)) + 1 // |MinInt64| without overflow
			}
			if sum += m; sum < m || sum > math.MaxInt64 {
				what := "sample values"
				if s.Kind == Spans {
					what = "span values"
				}
				return fmt.Errorf("%w: the %s of type %s add up to more than %d, which culprit cannot total; "+
					"a writer may have recorded them in another unit (times in milliseconds beside nanoseconds, say)",
					ErrLimit, what, vt, int64(math.MaxInt64))
			}
		}
	}
	return nil
}

// foreignJSON reports whether a JSON input is some other JSON document
// than OTLP trace data (a snapshot, a rules file, a test's truth file),
// judging by the first key of its first object, and returns that key.
// OTLP/JSON trace data starts with "resourceSpans" (writers put the only
// field of TracesData first); an empty object is taken as OTLP.
func foreignJSON(prefix []byte) (string, bool) {
	prefix = bytes.TrimLeft(bytes.TrimPrefix(prefix, []byte(utf8BOM)), " \t\r\n")
	if len(prefix) == 0 || prefix[0] != '{' {
		return "", false
	}
	rest := bytes.TrimLeft(prefix[1:], " \t\r\n")
	if len(rest) == 0 || rest[0] != '"' {
		return "", false // empty object or cut short: read it as OTLP
	}
	end := bytes.IndexByte(rest[1:], '"')
	if end < 0 {
		return "", false
	}
	key := string(rest[1 : 1+end])
	if slices.Contains([]string{"resourceSpans", "resource_spans"}, key) {
		return "", false
	}
	return key, true
}
