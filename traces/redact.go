package traces

import (
	"net/url"
	"strings"
)

// This file keeps literal values out of what spans contribute to a
// report. Statements are fingerprinted (Options.Statement); the rest of a
// span's text — the frame's name and service, the route, database
// operation names and summaries, HTTP URLs, peers — is redacted here
// while the span is decoded, unless Options.ShowLiterals is set. Words
// that name code (main.(*server).handle.func1, /v2/{id}) pass unchanged.

// redactSpan removes literals from a decoded span's frame, call and
// route. name is the span's name; f.Function equal to it means the frame
// was named after the span.
func (d *decoder) redactSpan(name string, f *Frame, call *Call, route *string) {
	database := f.Protocol == ProtocolDatabase
	m := &d.redacted
	if f.Function == name && database {
		// Older instrumentations put the whole statement in the span name.
		f.Function = d.redactStatement(f.System, name)
	} else {
		f.Function = m.function.get(f.Function, redactText)
	}
	// File paths and instrumentation scopes are kept: they locate code, and
	// classification reads module@version and @scope/package in them.
	f.Service, *route = m.service.get(f.Service, redactText), m.route.get(*route, redactText)
	if database {
		call.Summary = d.redactStatement(f.System, call.Summary)
		call.Operation = d.redactStatement(f.System, call.Operation)
	} else {
		call.Operation = m.operation.get(call.Operation, redactText)
	}
	call.Peer = m.peer.get(call.Peer, redactPeer)
}

// redactMemo keeps, per field, the texts that redactSpan last redacted
// and their results: a job's spans repeat a few services, routes, names
// and peers, and comparing with the last ones is cheaper than judging
// every byte again. It refers to job data: the decoder clears it for
// every job.
type redactMemo struct {
	function, service, route, operation, peer lastRedacted
}

// lastRedacted is a field's last 4 texts and their redactions.
type lastRedacted struct {
	in, out [4]string
	next    uint8
}

// get returns redact(s), from the memo when s is one of its texts.
func (l *lastRedacted) get(s string, redact func(string) string) string {
	if s == "" {
		return ""
	}
	for i := range l.in {
		if l.in[i] == s {
			return l.out[i]
		}
	}
	r := redact(s)
	i := l.next % uint8(len(l.in))
	l.in[i], l.out[i] = s, r
	l.next++
	return r
}

// redactStatement fingerprints text that may be a statement: a database
// span's name, operation name or summary. Names without literals or
// comparisons (SELECT, "SELECT orders", pg-pool.connect) are kept as they
// are: a fingerprint would only refold them.
func (d *decoder) redactStatement(system, s string) string {
	if plainWords(s) {
		return s
	}
	// Words first: a fingerprint may split an e-mail address into
	// identifiers it keeps.
	r := redactText(s)
	if r == s && !strings.ContainsAny(s, "=$") {
		return s
	}
	if d.c.opts.Statement != nil {
		r = strings.Clone(d.statement(system, r))
	}
	return r
}

// plainWords reports whether s holds only ASCII letters, '_', '.', '*',
// ',', parentheses and spaces: nothing a literal is written with.
func plainWords(s string) bool {
	for i := 0; i < len(s); i++ {
		if !plainBytes[s[i]] {
			return false
		}
	}
	return true
}

// Byte classes of the redactor, as tables: it runs on every span.
var (
	plainBytes   = byteSet("abcdefghijklmnopqrstuvwxyzABCDEFGHIJKLMNOPQRSTUVWXYZ_.*,() ")
	literalBytes = byteSet("0123456789@'\"?%=#")
	wordSeps     = byteSet("/=,;&:()[]{}<>|\t")
)

func byteSet(s string) (set [256]bool) {
	for i := 0; i < len(s); i++ {
		set[s[i]] = true
	}
	return set
}

// redactPeer drops user information from a host or service name
// ("alice@db.example" → "db.example") and replaces a host that is a bare
// number, which names no machine, by "?". IP addresses are kept.
func redactPeer(s string) string {
	if i := strings.LastIndexByte(s, '@'); i >= 0 {
		s = s[i+1:]
	}
	host, port := s, ""
	if i := strings.LastIndexByte(s, ':'); i > 0 && strings.IndexByte(s[:i], ':') < 0 {
		host, port = s[:i], s[i:]
	}
	if host != "" && allDigits(host) {
		return "?" + port
	}
	return s
}

// allDigits reports whether s holds only the digits 0-9.
func allDigits(s string) bool {
	for i := 0; i < len(s); i++ {
		if s[i] < '0' || s[i] > '9' {
			return false
		}
	}
	return true
}

// mayHoldLiteral reports whether s has a byte that redactText may change.
func mayHoldLiteral(s string) bool {
	for i := 0; i < len(s); i++ {
		if literalBytes[s[i]] {
			return true
		}
	}
	return false
}

// redactText replaces the literal values in free text (a span name, an
// HTTP operation, a message) by "?": quoted strings, numbers, e-mail
// addresses and other words with '@', long hexadecimal IDs and UUIDs,
// path segments holding any of those, and the values of query strings.
// A URL keeps its scheme, host and redacted path; user information,
// query values and the fragment are dropped. Words mixing letters and
// digits (v2, func1, sha256) are kept: they name things.
func redactText(s string) string {
	if !mayHoldLiteral(s) {
		return s
	}
	if strings.ContainsAny(s, "'\"`") {
		s = redactQuotes(s) // quoted strings may hold spaces
	}
	// Build the result only from the first token that changes: most names
	// with digits (v2, pool-1) change nothing and allocate nothing.
	var b strings.Builder
	changed := false
	for at, rest := 0, s; ; {
		tok, more, found := strings.Cut(rest, " ")
		var out string
		switch {
		case strings.Contains(tok, "://"):
			out = redactURL(tok)
		case strings.HasPrefix(tok, "/"):
			path, query, hasQuery := strings.Cut(tok, "?")
			path, _, _ = strings.Cut(path, "#")
			out = redactWords(path)
			if hasQuery {
				out += redactQuery(query)
			}
		default:
			out = redactWords(tok)
		}
		if out != tok && !changed {
			changed = true
			b.WriteString(s[:at])
		}
		if changed {
			b.WriteString(out)
			if found {
				b.WriteByte(' ')
			}
		}
		if !found {
			break
		}
		at += len(tok) + 1
		rest = more
	}
	if !changed {
		return s
	}
	return b.String()
}

// redactURL keeps a URL's scheme, host and port, its path with literal
// segments replaced, and the keys of its query; anything it cannot parse
// becomes "?".
func redactURL(s string) string {
	u, err := url.Parse(s)
	if err != nil || u.Host == "" {
		return "?"
	}
	out := u.Scheme + "://" + u.Host + redactWords(u.Path)
	if u.RawQuery != "" {
		out += redactQuery(u.RawQuery)
	}
	return out
}

// redactQuery renders a query string as "?key=?&key2=?": values dropped,
// keys redacted like words.
func redactQuery(q string) string {
	var b strings.Builder
	for i, kv := range strings.Split(q, "&") {
		b.WriteByte("?&"[min(i, 1)])
		k, _, _ := strings.Cut(kv, "=")
		k, _, _ = strings.Cut(k, "#")
		b.WriteString(redactWords(k))
		b.WriteString("=?")
	}
	return b.String()
}

// isWordSep reports whether c separates the words redactWords judges.
func isWordSep(c byte) bool { return wordSeps[c] }

// redactWords replaces the literal words of s (quotes already gone) by "?".
func redactWords(s string) string {
	if !mayHoldLiteral(s) {
		return s
	}
	var b strings.Builder
	changed := false
	for i := 0; i < len(s); {
		j := i
		for j < len(s) && !isWordSep(s[j]) {
			j++
		}
		lit := j > i && literalWord(s[i:j])
		if lit && !changed {
			changed = true
			b.WriteString(s[:i])
		}
		if changed {
			if lit {
				b.WriteByte('?')
			} else {
				b.WriteString(s[i:j])
			}
			if j < len(s) {
				b.WriteByte(s[j]) // the separator
			}
		}
		i = j + 1
	}
	if !changed {
		return s
	}
	return b.String()
}

// redactQuotes replaces each quoted string of s by "?".
func redactQuotes(s string) string {
	var b strings.Builder
	for i := 0; i < len(s); {
		if c := s[i]; c == '\'' || c == '"' || c == '`' {
			i = closingQuote(s, i)
			b.WriteByte('?')
			continue
		}
		b.WriteByte(s[i])
		i++
	}
	return b.String()
}

// closingQuote returns the index after the quote closing the one at s[i]
// (backslash escapes skipped), or len(s).
func closingQuote(s string, i int) int {
	q := s[i]
	for j := i + 1; j < len(s); j++ {
		switch s[j] {
		case '\\':
			j++
		case q:
			return j + 1
		}
	}
	return len(s)
}

// literalWord reports whether w is a value rather than a name: it holds
// '@', '?', '#' or a percent escape, or it is a number (digits with
// signs, dots, dashes, underscores), or a hexadecimal ID of 16 or more
// characters (UUIDs, trace and span IDs).
func literalWord(w string) bool {
	digits, hex, other := 0, 0, 0
	for i := 0; i < len(w); i++ {
		switch c := w[i]; {
		case c == '@' || c == '?' || c == '#' || c == '%':
			return true
		case '0' <= c && c <= '9':
			digits++
		case 'a' <= c && c <= 'f' || 'A' <= c && c <= 'F':
			hex++
		case c == '-' || c == '.' || c == '+' || c == '_':
		default:
			other++
		}
	}
	if digits == 0 {
		return false
	}
	return hex == 0 && other == 0 || other == 0 && digits+hex >= 16
}
