package attribute

import (
	"slices"
	"strings"
	"unicode/utf8"
)

// maxStatementInput is the number of bytes of a raw statement that Fingerprint reads (64 KiB).
const maxStatementInput = 64 << 10

// Statement is a fingerprinted statement: literals replaced by "?", comments dropped,
// keywords and unquoted identifiers lower-cased, whitespace folded.
//
// Statements that differ only in literal values, bind-parameter style, comments, spacing, keyword
// case, the length of an IN list or the number of identical rows of a multi-row VALUES clause have
// the same Text and therefore the same ID. The zero value is not the fingerprint of empty input.
type Statement struct {
	Text string // normalised text, safe to show (no literals)
	ID   uint64 // 64-bit FNV-1a hash of Text
}

// Fingerprint normalises raw for the given system (db.system.name values like "postgresql",
// "mysql", "sqlite", "microsoft.sql_server", "oracle.db", "redis", "mongodb", "memcached"; "" = assume SQL).
//
// SQL is split into tokens first and normalised token by token; no regular expression runs over the
// raw text. Comments ("--", "/* */", which nest except for MySQL, MariaDB and SQLite, and "#" for
// MySQL and MariaDB) are dropped. String literals ('…' with doubled quotes, backslash escapes for
// MySQL, MariaDB and E'…', N'…', X'…', B'…', U&'…', PostgreSQL dollar quotes $$…$$ and $tag$…$tag$,
// Oracle q'[…]'), numbers (decimals, exponents, 0x…, 0b…, with any letters glued to them such as
// Oracle's 2.5F), TRUE and FALSE become "?"; NULL is kept. MySQL's "…" is a string, elsewhere it is a
// quoted identifier. A sign joins the number after it only after an operator, "(", ",", a keyword
// or at the start, so "a-1" becomes "a - ?" and "= -3" becomes "= ?". Bind parameters $1, ?, ?NNN,
// :name, :1, @p1, $name, %s and %(name)s become "?". An IN list made only of literals and
// placeholders becomes "in (?)", and repeated identical rows of a VALUES list keep one row, so its
// arity stays. Unquoted keywords and identifiers are lower-cased (ASCII letters only); quoted ones
// ("Foo", `Foo`, and [Foo] for SQL Server and SQLite) stay as written. Tokens are joined by single
// spaces, except none before ",", ")", "]", ";", "." and "::" and none after "(", "[", "." and "::".
//
// Unterminated strings, quoted identifiers and comments run to the end of the input and become "?"
// or vanish, so nothing inside them is shown. Redis and Memcached commands keep the command word
// lower-cased (for Redis also the subcommand of container commands such as CLIENT SETNAME) and turn
// every argument into "?"; Redis commands on separate lines stay one per line, and Memcached keeps
// only the first line because later lines are data blocks. MongoDB text, and text for any other
// system not named above that starts with "{" or "[", is read as JSON or shell syntax: keys (quoted
// strings or words followed by ":") and structure stay in their original order, every string,
// number and boolean becomes ?, null is kept as in SQL, and an array of scalars becomes [?].
//
// Only the first 64 KiB of raw are read (cut back to a UTF-8 boundary), which bounds the work:
// Fingerprint runs in time linear in that prefix. Text is at most twice as long as the part read,
// is valid UTF-8 when raw is, and Fingerprint(system, s.Text) == s for any result s whose Text fits
// in the limit. Empty or all-comment input gives Text "".
func Fingerprint(system, raw string) Statement {
	if len(raw) > maxStatementInput {
		cut := maxStatementInput
		for k := 1; k < utf8.UTFMax && !utf8.RuneStart(raw[cut]); k++ {
			cut--
		}
		raw = raw[:cut]
	}
	var text string
	switch system = strings.ToLower(system); system {
	case "redis", "memcached":
		text = fingerprintCommand(raw, system == "redis")
	case "mongodb":
		text = fingerprintDocument(raw)
	default:
		d, known := dialectFor(system)
		if j := skipSpace(raw, 0); !known && j < len(raw) && (raw[j] == '{' || raw[j] == '[') {
			text = fingerprintDocument(raw)
		} else {
			text = fingerprintSQL(d, raw)
		}
	}
	h := uint64(14695981039346656037) // FNV-1a, 64-bit offset basis and prime
	for i := 0; i < len(text); i++ {
		h = (h ^ uint64(text[i])) * 1099511628211
	}
	return Statement{Text: text, ID: h}
}

// dialect holds the lexical differences between SQL systems.
type dialect struct {
	hashComment  bool // '#' starts a line comment (MySQL, MariaDB)
	backslash    bool // backslash escapes inside '…' and "…" strings (MySQL, MariaDB)
	dquoteString bool // "…" is a string literal, not an identifier (MySQL, MariaDB)
	brackets     bool // […] is a quoted identifier (SQL Server, SQLite)
	flatComments bool // /* */ comments do not nest (MySQL, MariaDB, SQLite)
	qQuote       bool // q'[…]' alternative quoting (Oracle)
}

// dialectFor returns the dialect of system and whether system is a SQL system known here ("" is).
func dialectFor(system string) (dialect, bool) {
	switch system {
	case "mysql", "mariadb":
		return dialect{hashComment: true, backslash: true, dquoteString: true, flatComments: true}, true
	case "microsoft.sql_server":
		return dialect{brackets: true}, true
	case "sqlite":
		return dialect{brackets: true, flatComments: true}, true
	case "oracle.db":
		return dialect{qQuote: true}, true
	}
	return dialect{}, system == "postgresql" || system == ""
}

type kind uint8

const (
	kWord    kind = iota // unquoted keyword or identifier, lower-cased
	kQuoted              // quoted identifier or document key, verbatim
	kNumber              // numeric literal, still able to absorb a sign
	kLiteral             // any other literal or bind parameter; text "?"
	kOp                  // operator or punctuation
)

type token struct {
	kind kind
	text string
}

// qmark returns the placeholder token that replaces every literal.
func qmark() token { return token{kLiteral, "?"} }

// lexer splits SQL text into tokens, skipping whitespace and comments.
type lexer struct {
	d dialect
	s string
	i int
}

// at returns the byte k positions ahead, or 0 past the end.
func (l *lexer) at(k int) byte {
	if l.i+k < len(l.s) {
		return l.s[l.i+k]
	}
	return 0
}

// skipPast moves l.i just past the first end at or after from, or to the end of the input.
func (l *lexer) skipPast(end string, from int) {
	if k := strings.Index(l.s[min(from, len(l.s)):], end); k >= 0 {
		l.i = from + k + len(end)
	} else {
		l.i = len(l.s)
	}
}

func (l *lexer) skipWhile(f func(byte) bool) {
	for l.i < len(l.s) && f(l.s[l.i]) {
		l.i++
	}
}

// next returns the next token, or false at the end of the input.
func (l *lexer) next() (token, bool) {
	for l.i < len(l.s) {
		c, start := l.s[l.i], l.i
		switch {
		case isSpace(c):
			l.i++
			continue
		case c == '-' && l.at(1) == '-', c == '#' && l.d.hashComment:
			l.skipPast("\n", l.i)
			continue
		case c == '/' && l.at(1) == '*':
			l.skipBlockComment()
			continue
		case c == '\'', c == '"' && l.d.dquoteString:
			l.i, _ = skipQuoted(l.s, l.i+1, c, l.d.backslash)
		case c == '"', c == '`', c == '[' && l.d.brackets:
			closer := c
			if c == '[' {
				closer = ']'
			}
			end, ok := skipQuoted(l.s, l.i+1, closer, false)
			if l.i = end; ok { // an unterminated identifier becomes a literal: its text is not shown
				return token{kQuoted, l.s[start:end]}, true
			}
		case isDigit(c), c == '.' && isDigit(l.at(1)):
			l.number()
			return token{kNumber, "?"}, true
		case isIdentStart(c):
			return l.word(), true
		case c == '$':
			j := l.i + 1
			for j < len(l.s) && isIdentChar(l.s[j]) && l.s[j] != '$' {
				j++
			}
			switch {
			case j < len(l.s) && l.s[j] == '$' && !isDigit(l.at(1)): // $$…$$ or $tag$…$tag$
				l.skipPast(l.s[l.i:j+1], j+1)
			case j > l.i+1: // $1 or $name
				l.i = j
			default:
				return l.operator(), true
			}
		case c == '?': // ? or ?NNN
			l.i++
			l.skipWhile(isDigit)
		case c == ':' && isIdentChar(l.at(1)) && l.at(1) != '$', c == '@' && isIdentStart(l.at(1)):
			l.i++ // :name, :1, @p1
			l.skipWhile(isIdentChar)
		case c == '@' && l.at(1) == '@' && isIdentStart(l.at(2)): // system variable such as @@ROWCOUNT
			l.i += 2
			l.skipWhile(isIdentChar)
			return token{kWord, lowerASCII(l.s[start:l.i])}, true
		case c == '%' && l.percentBind():
		default:
			return l.operator(), true
		}
		return qmark(), true
	}
	return token{}, false
}

// skipBlockComment skips a /* */ comment, nested unless the dialect says otherwise.
func (l *lexer) skipBlockComment() {
	for depth := 0; l.i < len(l.s); l.i++ {
		if l.s[l.i] == '/' && l.at(1) == '*' && (depth == 0 || !l.d.flatComments) {
			depth++
			l.i++
		} else if l.s[l.i] == '*' && l.at(1) == '/' {
			depth--
			if l.i++; depth == 0 {
				l.i++
				return
			}
		}
	}
}

// skipQuoted returns the index just past the closing quote q of a run that starts at i, just after
// the opening quote; qq stands for q, and if backslash is set a backslash escapes the next byte.
// It returns len(s), false when the run is unterminated.
func skipQuoted(s string, i int, q byte, backslash bool) (int, bool) {
	for ; i < len(s); i++ {
		switch {
		case s[i] == '\\' && backslash, s[i] == q && i+1 < len(s) && s[i+1] == q:
			i++
		case s[i] == q:
			return i + 1, true
		}
	}
	return len(s), false
}

// number scans a numeric literal: digits, fraction and exponent, then any identifier bytes glued
// to it (0x1F, 0b101, 1_000, 2.5F).
func (l *lexer) number() {
	l.skipWhile(isDigit)
	if l.at(0) == '.' {
		l.i++
		l.skipWhile(isDigit)
	}
	if l.at(0)|0x20 == 'e' {
		j := 1
		if l.at(1) == '+' || l.at(1) == '-' {
			j = 2
		}
		if isDigit(l.at(j)) {
			l.i += j
		}
	}
	l.skipWhile(isIdentChar)
}

// word scans a keyword or identifier, or a prefixed string such as E'…', N'…', X'…', B'…', U&'…'
// or Oracle's q'[…]', and turns TRUE and FALSE into literals.
func (l *lexer) word() token {
	start := l.i
	l.skipWhile(isIdentChar)
	w := lowerASCII(l.s[start:l.i])
	switch {
	case l.at(0) == '\'' && (w == "e" || w == "n" || w == "x" || w == "b"):
		l.i, _ = skipQuoted(l.s, l.i+1, '\'', l.d.backslash || w == "e")
	case l.at(0) == '\'' && l.d.qQuote && (w == "q" || w == "nq"):
		closer := l.at(1)
		switch closer {
		case '[', '{', '<':
			closer += 2 // ']', '}', '>'
		case '(':
			closer = ')'
		}
		l.skipPast(string(closer)+"'", l.i+2)
	case w == "u" && l.at(0) == '&' && l.at(1) == '\'':
		l.i, _ = skipQuoted(l.s, l.i+2, '\'', false)
	case w != "true" && w != "false":
		return token{kWord, w}
	}
	return qmark()
}

// percentBind reports whether a %s or %(name)s parameter starts at l.i and, if so, skips it.
func (l *lexer) percentBind() bool {
	j := l.i + 1
	if j < len(l.s) && l.s[j] == '(' {
		for j++; j < len(l.s) && isIdentChar(l.s[j]); j++ {
		}
		if j >= len(l.s) || l.s[j] != ')' {
			return false
		}
		j++
	}
	if j < len(l.s) && l.s[j] == 's' && (j+1 == len(l.s) || !isIdentChar(l.s[j+1])) {
		l.i = j + 1
		return true
	}
	return false
}

// operator scans the longest known operator at l.i, else one byte of punctuation.
func (l *lexer) operator() token {
	for _, op := range [...]string{"->>", "#>>", "!~*", "::", ":=", "<=", ">=", "<>", "!=", "==",
		"||", "&&", "<<", ">>", "->", "#>", "@>", "<@", "~*", "!~", "=>"} {
		if !isOpByte(l.at(1)) { // every operator above is made of operator bytes
			break
		}
		if strings.HasPrefix(l.s[l.i:], op) {
			l.i += len(op)
			return token{kOp, op}
		}
	}
	l.i++
	return token{kOp, l.s[l.i-1 : l.i]}
}

// normaliser builds the output token list, joining signs to numbers and collapsing IN lists and
// repeated VALUES rows as their groups close.
type normaliser struct {
	out   []token
	opens []int  // indexes in out of unmatched "("
	row   [2]int // out[row[0]:row[1]] is the last VALUES row kept
}

func (n *normaliser) add(t token) {
	switch {
	case t.kind == kNumber:
		if n.unarySign() {
			n.out = n.out[:len(n.out)-1]
		}
		t = qmark()
	case t == (token{kOp, "("}):
		n.opens = append(n.opens, len(n.out))
	case t == (token{kOp, ")"}) && len(n.opens) > 0:
		o := n.opens[len(n.opens)-1]
		n.opens = n.opens[:len(n.opens)-1]
		n.out = append(n.out, t)
		n.closeGroup(o)
		return
	}
	n.out = append(n.out, t)
}

// unarySign reports whether the last token is a sign that belongs to the number that follows:
// one at the start or after an operator, "(", "," or a keyword.
func (n *normaliser) unarySign() bool {
	k := len(n.out)
	if k == 0 || n.out[k-1] != (token{kOp, "-"}) && n.out[k-1] != (token{kOp, "+"}) {
		return false
	}
	if k == 1 {
		return true
	}
	switch p := n.out[k-2]; p.kind {
	case kOp:
		return p.text != ")" && p.text != "]"
	case kWord:
		return isSignKeyword(p.text)
	}
	return false
}

// isSignKeyword reports whether a sign after keyword w belongs to the number that follows.
func isSignKeyword(w string) bool {
	switch w {
	case "all", "and", "any", "as", "between", "by", "case", "distinct", "else", "escape", "exists",
		"from", "having", "ilike", "in", "into", "is", "like", "limit", "not", "offset", "on", "or",
		"return", "returning", "select", "set", "some", "then", "top", "values", "when", "where", "with":
		return true
	}
	return false
}

// closeGroup handles the group out[o:] that a ")" has just closed.
func (n *normaliser) closeGroup(o int) {
	out := n.out
	switch {
	case o > 0 && out[o-1] == (token{kWord, "in"}) && isPlaceholderList(out[o+1:len(out)-1]):
		n.out = append(out[:o+1], qmark(), out[len(out)-1])
	case o > 0 && out[o-1] == (token{kWord, "values"}):
		n.row = [2]int{o, len(out)}
	case o > 1 && n.row[1] == o-1 && out[o-1] == (token{kOp, ","}): // another row of the same VALUES
		if slices.Equal(out[n.row[0]:n.row[1]], out[o:]) {
			n.out = out[:o-1]
		} else {
			n.row = [2]int{o, len(out)}
		}
	}
}

// isPlaceholderList reports whether ts is "?" or "?, ?, …".
func isPlaceholderList(ts []token) bool {
	for k, t := range ts {
		if k%2 == 0 && t != qmark() || k%2 == 1 && t != (token{kOp, ","}) {
			return false
		}
	}
	return len(ts)%2 == 1
}

func fingerprintSQL(d dialect, raw string) string {
	l := lexer{d: d, s: raw}
	n := normaliser{out: make([]token, 0, len(raw)/4)}
	for t, ok := l.next(); ok; t, ok = l.next() {
		n.add(t)
	}
	return joinTokens(n.out, func(a, b token) bool {
		after := a.kind == kOp && (a.text == "(" || a.text == "[" || a.text == "." || a.text == "::")
		before := b.kind == kOp && strings.Contains(",)];.[", b.text) || b == (token{kOp, "::"})
		// Keep a space where two operator bytes or "]" and "]" would touch (as in "[x] ]"), so that
		// the text lexes into the same tokens.
		x, y := a.text[len(a.text)-1], b.text[0]
		return (after || before) && !(isOpByte(x) && isOpByte(y)) && !(x == ']' && y == ']')
	})
}

// joinTokens writes ts separated by single spaces, except where glue(a, b) says none.
func joinTokens(ts []token, glue func(a, b token) bool) string {
	var b strings.Builder
	size := len(ts)
	for _, t := range ts {
		size += len(t.text)
	}
	b.Grow(size)
	for k, t := range ts {
		if k > 0 && !glue(ts[k-1], t) {
			b.WriteByte(' ')
		}
		b.WriteString(t.text)
	}
	return b.String()
}

// fingerprintDocument normalises JSON or MongoDB shell text: keys, words and punctuation stay,
// strings, numbers and booleans become "?", and arrays of scalars become "[?]".
func fingerprintDocument(s string) string {
	var out []token
	var opens []int // indexes in out of unmatched "["
	for i := 0; i < len(s); {
		c, start, t := s[i], i, qmark()
		switch {
		case isSpace(c):
			i++
			continue
		case c == '"' || c == '\'':
			i, _ = skipQuoted(s, i+1, c, true)
			if j := skipSpace(s, i); j < len(s) && s[j] == ':' {
				t = token{kQuoted, s[start:i]} // a key
			}
		case isDigit(c) || c == '-' && i+1 < len(s) && isDigit(s[i+1]):
			for i++; i < len(s) && (isIdentChar(s[i]) || s[i] == '.' || (s[i] == '+' || s[i] == '-') && s[i-1]|0x20 == 'e'); i++ {
			}
		case c == '?':
			i++
		case isIdentStart(c) || c == '$':
			for i++; i < len(s) && isIdentChar(s[i]); i++ {
			}
			if w := s[start:i]; w != "true" && w != "false" {
				t = token{kWord, w}
			}
		default:
			i++
			t = token{kOp, s[start:i]}
			if c == '[' {
				opens = append(opens, len(out))
			} else if c == ']' && len(opens) > 0 {
				o := opens[len(opens)-1]
				if opens = opens[:len(opens)-1]; isPlaceholderList(out[o+1:]) {
					out = append(out[:o+1], qmark())
				}
			}
		}
		out = append(out, t)
	}
	return joinTokens(out, func(a, b token) bool {
		if a.kind == kOp {
			return a.text != "," && a.text != ":"
		}
		return b.kind == kOp
	})
}

// fingerprintCommand normalises Redis (if redis is set) or Memcached text: the command word, and
// for Redis container commands the subcommand, are lower-cased and every argument becomes "?".
func fingerprintCommand(s string, redis bool) string {
	var b strings.Builder
	pos, container := 0, false // pos: index of the next word within the current command
	for i := 0; i < len(s); {
		c, start := s[i], i
		switch {
		case c == '\n' && !redis:
			return b.String()
		case c == '\n':
			pos = 0
			i++
			continue
		case isSpace(c):
			i++
			continue
		case redis && (c == '"' || c == '\''):
			i, _ = skipQuoted(s, i+1, c, true)
		default:
			for i < len(s) && !isSpace(s[i]) {
				i++
			}
		}
		w := "?"
		if isCommandWord(s[start:i]) && (pos == 0 || pos == 1 && container) {
			w = lowerASCII(s[start:i])
		}
		if pos == 0 {
			container = redis && isContainerCommand(w)
			if b.Len() > 0 {
				b.WriteByte('\n')
			}
		} else {
			b.WriteByte(' ')
		}
		b.WriteString(w)
		pos++
	}
	return b.String()
}

// isCommandWord reports whether w looks like a command name such as GET, JSON.SET or SETNAME.
func isCommandWord(w string) bool {
	if len(w) == 0 || len(w) > 64 || !isLetter(w[0]) {
		return false
	}
	for i := 1; i < len(w); i++ {
		if c := w[i]; !isLetter(c) && !isDigit(c) && !strings.ContainsRune("_-.|", rune(c)) {
			return false
		}
	}
	return true
}

// isContainerCommand reports whether Redis command w takes a subcommand as its first argument.
func isContainerCommand(w string) bool {
	switch w {
	case "acl", "client", "cluster", "command", "config", "debug", "function", "latency", "memory",
		"module", "object", "pubsub", "script", "slowlog", "xgroup", "xinfo":
		return true
	}
	return false
}

// skipSpace returns the index of the first byte at or after i that is not a space or control byte.
func skipSpace(s string, i int) int {
	for i < len(s) && isSpace(s[i]) {
		i++
	}
	return i
}

func isSpace(c byte) bool      { return c <= ' ' || c == 0x7f }
func isDigit(c byte) bool      { return '0' <= c && c <= '9' }
func isLetter(c byte) bool     { return 'a' <= c|0x20 && c|0x20 <= 'z' }
func isIdentStart(c byte) bool { return isLetter(c) || c == '_' || c >= 0x80 }
func isIdentChar(c byte) bool  { return isIdentStart(c) || isDigit(c) || c == '$' }
func isOpByte(c byte) bool     { return strings.IndexByte("!#%&*+-/:<=>@^|~", c) >= 0 }

// sqlKeywords holds common SQL keywords, lower case, so that lowerASCII
// can return them without allocating (most statements spell them in
// upper case).
var sqlKeywords = func() map[string]string {
	m := map[string]string{}
	for _, k := range strings.Fields(`select from where and or not in is null as on join left right inner outer
		cross full group by order having limit offset insert into values update set delete create table
		index drop alter distinct union all exists between like case when then else end asc desc count
		sum avg min max returning with for share nowait skip locked top fetch next rows only coalesce
		lower upper cast interval now current_timestamp primary key default conflict do nothing`) {
		m[k] = k
	}
	return m
}()

// lowerASCII lower-cases the ASCII letters of s and leaves every other byte alone.
func lowerASCII(s string) string {
	i := -1
	for j := 0; j < len(s); j++ {
		if 'A' <= s[j] && s[j] <= 'Z' {
			i = j
			break
		}
	}
	if i < 0 {
		return s
	}
	if len(s) <= 32 {
		var buf [32]byte
		n := copy(buf[:], s)
		for j := i; j < n; j++ {
			if 'A' <= buf[j] && buf[j] <= 'Z' {
				buf[j] += 'a' - 'A'
			}
		}
		if k, ok := sqlKeywords[string(buf[:n])]; ok { // no allocation for the lookup
			return k
		}
		return string(buf[:n])
	}
	b := []byte(s)
	for ; i < len(b); i++ {
		if 'A' <= b[i] && b[i] <= 'Z' {
			b[i] += 'a' - 'A'
		}
	}
	return string(b)
}
