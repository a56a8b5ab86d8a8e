package statement

// This file keeps the previous implementation of Fingerprint's SQL path, every identifier renamed
// with an "oracle" prefix, as a differential oracle: FuzzFingerprintOracle requires the current
// implementation to give the same Text and ID for every input. The document (MongoDB) and command
// (Redis, Memcached) paths were not rewritten, so the oracle calls the production code for them.
// It is test-only and not maintained beyond that role; the contract lives in the doc comment of
// Fingerprint.

import (
	"encoding/json"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"testing"
	"unicode/utf8"
)

// oracleMaxStatementInput is the number of bytes of a raw statement that Fingerprint reads (64 KiB).
const oracleMaxStatementInput = 64 << 10

// oracleFingerprint is Fingerprint as it was before the single-pass SQL writer.
func oracleFingerprint(system, raw string) Fingerprint {
	if len(raw) > oracleMaxStatementInput {
		cut := oracleMaxStatementInput
		for k := 1; k < utf8.UTFMax && !utf8.RuneStart(raw[cut]); k++ {
			cut--
		}
		raw = raw[:cut]
	}
	var text string
	switch system = strings.ToLower(system); system {
	case "redis", "memcached":
		text = fingerprintCommand(raw, system == "redis") // not rewritten: the production code
	case "mongodb":
		text = fingerprintDocument(raw) // not rewritten: the production code
	default:
		d, known := dialectFor(system) // dialects were not rewritten
		if j := skipSpace(raw, 0); !known && j < len(raw) && (raw[j] == '{' || raw[j] == '[') {
			text = fingerprintDocument(raw)
		} else {
			text = oracleFingerprintSQL(d, raw)
		}
	}
	return statementOf(text) // the plain FNV-1a loop: the writer hashes as it goes
}

type oracleKind uint8

const (
	oracleKWord    oracleKind = iota // unquoted keyword or identifier, lower-cased
	oracleKQuoted                    // quoted identifier or document key, verbatim
	oracleKNumber                    // numeric literal, still able to absorb a sign
	oracleKLiteral                   // any other literal or bind parameter; text "?"
	oracleKOp                        // operator or punctuation
)

type oracleToken struct {
	kind oracleKind
	text string
}

// qmark returns the placeholder token that replaces every literal.
func oracleQmark() oracleToken { return oracleToken{oracleKLiteral, "?"} }

// lexer splits SQL text into tokens, skipping whitespace and comments.
type oracleLexer struct {
	d dialect
	s string
	i int
}

// at returns the byte k positions ahead, or 0 past the end.
func (l *oracleLexer) at(k int) byte {
	if l.i+k < len(l.s) {
		return l.s[l.i+k]
	}
	return 0
}

// skipPast moves l.i just past the first end at or after from, or to the end of the input.
func (l *oracleLexer) skipPast(end string, from int) {
	if k := strings.Index(l.s[min(from, len(l.s)):], end); k >= 0 {
		l.i = from + k + len(end)
	} else {
		l.i = len(l.s)
	}
}

func (l *oracleLexer) skipWhile(f func(byte) bool) {
	for l.i < len(l.s) && f(l.s[l.i]) {
		l.i++
	}
}

// next returns the next token, or false at the end of the input.
func (l *oracleLexer) next() (oracleToken, bool) {
	for l.i < len(l.s) {
		c, start := l.s[l.i], l.i
		switch {
		case oracleIsSpace(c):
			l.i++
			continue
		case c == '-' && l.at(1) == '-', c == '#' && l.d.hashComment:
			l.skipPast("\n", l.i)
			continue
		case c == '/' && l.at(1) == '*':
			l.skipBlockComment()
			continue
		case c == '\'', c == '"' && l.d.dquoteString:
			l.i, _ = oracleSkipQuoted(l.s, l.i+1, c, l.d.backslash)
		case c == '"', c == '`', c == '[' && l.d.brackets:
			closer := c
			if c == '[' {
				closer = ']'
			}
			end, ok := oracleSkipQuoted(l.s, l.i+1, closer, false)
			if l.i = end; ok { // an unterminated identifier becomes a literal: its text is not shown
				return oracleToken{oracleKQuoted, l.s[start:end]}, true
			}
		case oracleIsDigit(c), c == '.' && oracleIsDigit(l.at(1)):
			l.number()
			return oracleToken{oracleKNumber, "?"}, true
		case oracleIsIdentStart(c):
			return l.word(), true
		case c == '$':
			j := l.i + 1
			for j < len(l.s) && oracleIsIdentChar(l.s[j]) && l.s[j] != '$' {
				j++
			}
			switch {
			case j < len(l.s) && l.s[j] == '$' && !oracleIsDigit(l.at(1)): // $$…$$ or $tag$…$tag$
				l.skipPast(l.s[l.i:j+1], j+1)
			case j > l.i+1: // $1 or $name
				l.i = j
			default:
				return l.operator(), true
			}
		case c == '?': // ? or ?NNN
			l.i++
			l.skipWhile(oracleIsDigit)
		case c == ':' && oracleIsIdentChar(l.at(1)) && l.at(1) != '$', c == '@' && oracleIsIdentStart(l.at(1)):
			l.i++ // :name, :1, @p1
			l.skipWhile(oracleIsIdentChar)
		case c == '@' && l.at(1) == '@' && oracleIsIdentStart(l.at(2)): // system variable such as @@ROWCOUNT
			l.i += 2
			l.skipWhile(oracleIsIdentChar)
			return oracleToken{oracleKWord, oracleLowerASCII(l.s[start:l.i])}, true
		case c == '%' && l.percentBind():
		default:
			return l.operator(), true
		}
		return oracleQmark(), true
	}
	return oracleToken{}, false
}

// skipBlockComment skips a /* */ comment, nested unless the dialect says otherwise.
func (l *oracleLexer) skipBlockComment() {
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
func oracleSkipQuoted(s string, i int, q byte, backslash bool) (int, bool) {
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
func (l *oracleLexer) number() {
	l.skipWhile(oracleIsDigit)
	if l.at(0) == '.' {
		l.i++
		l.skipWhile(oracleIsDigit)
	}
	if l.at(0)|0x20 == 'e' {
		j := 1
		if l.at(1) == '+' || l.at(1) == '-' {
			j = 2
		}
		if oracleIsDigit(l.at(j)) {
			l.i += j
		}
	}
	l.skipWhile(oracleIsIdentChar)
}

// word scans a keyword or identifier, or a prefixed string such as E'…', N'…', X'…', B'…', U&'…'
// or Oracle's q'[…]', and turns TRUE and FALSE into literals.
func (l *oracleLexer) word() oracleToken {
	start := l.i
	l.skipWhile(oracleIsIdentChar)
	w := oracleLowerASCII(l.s[start:l.i])
	switch {
	case l.at(0) == '\'' && (w == "e" || w == "n" || w == "x" || w == "b"):
		l.i, _ = oracleSkipQuoted(l.s, l.i+1, '\'', l.d.backslash || w == "e")
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
		l.i, _ = oracleSkipQuoted(l.s, l.i+2, '\'', false)
	case w != "true" && w != "false":
		return oracleToken{oracleKWord, w}
	}
	return oracleQmark()
}

// percentBind reports whether a %s or %(name)s parameter starts at l.i and, if so, skips it.
func (l *oracleLexer) percentBind() bool {
	j := l.i + 1
	if j < len(l.s) && l.s[j] == '(' {
		for j++; j < len(l.s) && oracleIsIdentChar(l.s[j]); j++ {
		}
		if j >= len(l.s) || l.s[j] != ')' {
			return false
		}
		j++
	}
	if j < len(l.s) && l.s[j] == 's' && (j+1 == len(l.s) || !oracleIsIdentChar(l.s[j+1])) {
		l.i = j + 1
		return true
	}
	return false
}

// operator scans the longest known operator at l.i, else one byte of punctuation.
func (l *oracleLexer) operator() oracleToken {
	for _, op := range [...]string{"->>", "#>>", "!~*", "::", ":=", "<=", ">=", "<>", "!=", "==",
		"||", "&&", "<<", ">>", "->", "#>", "@>", "<@", "~*", "!~", "=>"} {
		if !oracleIsOpByte(l.at(1)) { // every operator above is made of operator bytes
			break
		}
		if strings.HasPrefix(l.s[l.i:], op) {
			l.i += len(op)
			return oracleToken{oracleKOp, op}
		}
	}
	l.i++
	return oracleToken{oracleKOp, l.s[l.i-1 : l.i]}
}

// normaliser builds the output token list, joining signs to numbers and collapsing IN lists and
// repeated VALUES rows as their groups close.
type oracleNormaliser struct {
	out   []oracleToken
	opens []int  // indexes in out of unmatched "("
	row   [2]int // out[row[0]:row[1]] is the last VALUES row kept
}

func (n *oracleNormaliser) add(t oracleToken) {
	n.endCast(t)
	switch {
	case t.kind == oracleKNumber:
		if n.unarySign() {
			n.out = n.out[:len(n.out)-1]
		}
		n.literal()
		return
	case t.kind == oracleKLiteral:
		n.literal()
		return
	case t == (oracleToken{oracleKOp, "("}):
		n.opens = append(n.opens, len(n.out))
	case t == (oracleToken{oracleKOp, ")"}) && len(n.opens) > 0:
		o := n.opens[len(n.opens)-1]
		n.opens = n.opens[:len(n.opens)-1]
		n.out = append(n.out, t)
		n.closeGroup(o)
		return
	}
	n.out = append(n.out, t)
}

// endCast drops a cast of a literal ("?", "::", type word) unless t continues the type name.
func (n *oracleNormaliser) endCast(t oracleToken) {
	k := len(n.out)
	if k >= 3 && n.out[k-2] == (oracleToken{oracleKOp, "::"}) && n.out[k-1].kind == oracleKWord && n.out[k-3] == oracleQmark() &&
		!(t.kind == oracleKOp && (t.text == "(" || t.text == "[" || t.text == ".")) {
		n.out = n.out[:k-2]
	}
}

// literal appends "?", dropping the type word of a typed literal (date '…') before it.
func (n *oracleNormaliser) literal() {
	if k := len(n.out); k > 0 && n.out[k-1].kind == oracleKWord && (k == 1 || n.out[k-2] != (oracleToken{oracleKOp, "."})) {
		switch n.out[k-1].text {
		case "date", "time", "timestamp", "timestamptz":
			n.out = n.out[:k-1]
		}
	}
	n.out = append(n.out, oracleQmark())
}

// unarySign reports whether the last token is a sign that belongs to the number that follows:
// one at the start or after an operator, "(", "," or a keyword.
func (n *oracleNormaliser) unarySign() bool {
	k := len(n.out)
	if k == 0 || n.out[k-1] != (oracleToken{oracleKOp, "-"}) && n.out[k-1] != (oracleToken{oracleKOp, "+"}) {
		return false
	}
	if k == 1 {
		return true
	}
	switch p := n.out[k-2]; p.kind {
	case oracleKOp:
		return p.text != ")" && p.text != "]"
	case oracleKWord:
		return oracleIsSignKeyword(p.text)
	}
	return false
}

// isSignKeyword reports whether a sign after keyword w belongs to the number that follows.
func oracleIsSignKeyword(w string) bool {
	switch w {
	case "all", "and", "any", "as", "between", "by", "case", "distinct", "else", "escape", "exists",
		"from", "having", "ilike", "in", "into", "is", "like", "limit", "not", "offset", "on", "or",
		"return", "returning", "select", "set", "some", "then", "top", "values", "when", "where", "with":
		return true
	}
	return false
}

// closeGroup handles the group out[o:] that a ")" has just closed.
func (n *oracleNormaliser) closeGroup(o int) {
	out := n.out
	switch {
	case o > 0 && out[o-1] == (oracleToken{oracleKWord, "in"}) && oracleIsPlaceholderList(out[o+1:len(out)-1]):
		switch {
		case len(out)-o > 3:
			n.out = append(out[:o+1], oracleQmark(), oracleToken{oracleKOp, ","}, oracleToken{oracleKWord, "…"}, out[len(out)-1])
		case o > 1 && out[o-2] == (oracleToken{oracleKWord, "not"}):
			n.out = append(out[:o-2], oracleToken{oracleKOp, "<>"}, oracleQmark())
		default:
			n.out = append(out[:o-1], oracleToken{oracleKOp, "="}, oracleQmark())
		}
	case o > 0 && out[o-1] == (oracleToken{oracleKWord, "cast"}) && len(out)-o == 5 && out[o+1] == oracleQmark() &&
		out[o+2] == (oracleToken{oracleKWord, "as"}) && out[o+3].kind == oracleKWord:
		n.out = out[:o-1]
		n.literal()
	case o > 0 && out[o-1] == (oracleToken{oracleKWord, "values"}):
		n.row = [2]int{o, len(out)}
	case o > 1 && n.row[1] == o-1 && out[o-1] == (oracleToken{oracleKOp, ","}): // another row of the same VALUES
		if slices.Equal(out[n.row[0]:n.row[1]], out[o:]) {
			n.out = out[:o-1]
		} else {
			n.row = [2]int{o, len(out)}
		}
	}
}

// isPlaceholderList reports whether ts is "?" or "?, ?, …".
func oracleIsPlaceholderList(ts []oracleToken) bool {
	for k, t := range ts {
		if k%2 == 0 && t != oracleQmark() || k%2 == 1 && t != (oracleToken{oracleKOp, ","}) {
			return false
		}
	}
	return len(ts)%2 == 1
}

func oracleFingerprintSQL(d dialect, raw string) string {
	l := oracleLexer{d: d, s: raw}
	n := oracleNormaliser{out: make([]oracleToken, 0, len(raw)/4)}
	for t, ok := l.next(); ok; t, ok = l.next() {
		n.add(t)
	}
	n.endCast(oracleToken{}) // the input may end with the type of a cast
	return oracleJoinTokens(n.out, func(a, b oracleToken) bool {
		after := a.kind == oracleKOp && (a.text == "(" || a.text == "[" || a.text == "." || a.text == "::")
		before := b.kind == oracleKOp && strings.Contains(",)];.[", b.text) || b == (oracleToken{oracleKOp, "::"})
		// Keep a space where two operator bytes or "]" and "]" would touch (as in "[x] ]"), so that
		// the text lexes into the same tokens.
		x, y := a.text[len(a.text)-1], b.text[0]
		return (after || before) && !(oracleIsOpByte(x) && oracleIsOpByte(y)) && !(x == ']' && y == ']')
	})
}

// joinTokens writes ts separated by single spaces, except where glue(a, b) says none.
func oracleJoinTokens(ts []oracleToken, glue func(a, b oracleToken) bool) string {
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

func oracleIsSpace(c byte) bool      { return c <= ' ' || c == 0x7f }
func oracleIsDigit(c byte) bool      { return '0' <= c && c <= '9' }
func oracleIsLetter(c byte) bool     { return 'a' <= c|0x20 && c|0x20 <= 'z' }
func oracleIsIdentStart(c byte) bool { return oracleIsLetter(c) || c == '_' || c >= 0x80 }
func oracleIsIdentChar(c byte) bool  { return oracleIsIdentStart(c) || oracleIsDigit(c) || c == '$' }
func oracleIsOpByte(c byte) bool     { return strings.IndexByte("!#%&*+-/:<=>@^|~", c) >= 0 }

// sqlKeywords holds common SQL keywords, lower case, so that lowerASCII
// can return them without allocating (most statements spell them in
// upper case).
var oracleSqlKeywords = func() map[string]string {
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
func oracleLowerASCII(s string) string {
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
		if k, ok := oracleSqlKeywords[string(buf[:n])]; ok { // no allocation for the lookup
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

// oracleSystems are the systems the differential checks run under: every dialect, the non-SQL
// systems, an unknown one, and names in other case.
var oracleSystems = []string{"", "postgresql", "mysql", "mariadb", "sqlite", "microsoft.sql_server",
	"oracle.db", "redis", "memcached", "mongodb", "elasticsearch", "MySQL", "Microsoft.SQL_Server"}

// oracleSeeds returns inputs for the differential checks: every test case, the inputs of the
// FuzzFingerprint corpus, and statements that exercise signs, IN lists and VALUES rows.
func oracleSeeds(tb testing.TB) []string {
	var seeds []string
	for _, tc := range allCases() {
		seeds = append(seeds, tc.raw)
	}
	files, err := filepath.Glob(filepath.Join("testdata", "fuzz", "FuzzFingerprint", "*"))
	if err != nil {
		tb.Fatal(err)
	}
	for _, name := range files {
		data, err := os.ReadFile(name)
		if err != nil {
			tb.Fatal(err)
		}
		for line := range strings.Lines(string(data)) {
			if lit, ok := strings.CutPrefix(strings.TrimSpace(line), "string("); ok {
				s, err := strconv.Unquote(strings.TrimSuffix(lit, ")"))
				if err != nil {
					tb.Fatalf("%s: %v", name, err)
				}
				seeds = append(seeds, s)
			}
		}
	}
	// The statements PostgreSQL grouped (pgss_test.go).
	pgss, err := os.ReadFile(filepath.Join("testdata", "pgss", "pg15.jsonl"))
	if err != nil {
		tb.Fatal(err)
	}
	for line := range strings.Lines(string(pgss)) {
		var r pgssRecord
		if json.Unmarshal([]byte(line), &r) == nil && r.Statement != "" {
			seeds = append(seeds, r.Statement)
		}
	}
	return append(seeds,
		"SELECT id, name FROM plants WHERE id IN (1, 2, 3) AND x IN ((1), 2) AND y IN (-1, +2, $3, ?, :a)",
		"INSERT INTO t (a, b) VALUES (1, 'x'), (2, 'y'), (3, now()), (4, now()), (-5, +6)",
		"INSERT INTO t VALUES (1),(1),(2),(1) ; VALUES (1, (2)), (3, (4)) , (5 , (6))",
		"SELECT a-1, a - -1, -2, (+3), x * -4, 5-6, [1]-2, t.-3, ::-4, in -5, IN -(6), NOT -7 FROM t",
		"select - - 1, + + 2, -(3), a-- c\n-4, b/* c */-5, -1e-3, -.5, - 0x1F, -'s'",
		"SELECT \"A\".\"B\"::TEXT, [x] ], `y`.`z`, a[1:2], @@Version, @x, :=, ->> ,#>> , !~* ,<=>",
		"SELECT E'x', N'y', X'1', B'0', U&'z', Q'[q]', nq'{w}', q'<v>', q'(u)', q'!t!', u&x, e 'a'",
		"SELECT ?::int::text, $1::int[], '1'::numeric(8,2), x::date, cast(? as int), CAST (- 1 AS bigint), cast(? as int(4))",
		"SELECT date '2024-01-01', t.date '1', date -1, timestamp ?, TIMESTAMPTZ true, time, interval '1 day'",
		"SELECT * FROM t WHERE a IN (1) AND b NOT IN (?) AND c IN (1, 2) AND d NOT IN ((1)) AND e IN (cast(? as int)) AND f IN ('1'::int, 2)",
		"VALUES (1) in (2), (3) not in (4); SELECT ?::",
	)
}

// TestFingerprintMatchesOracle checks that Fingerprint gives the Text and ID of the previous
// implementation for every seed under every system.
func TestFingerprintMatchesOracle(t *testing.T) {
	for _, raw := range oracleSeeds(t) {
		for _, system := range oracleSystems {
			if got, want := Of(system, raw), oracleFingerprint(system, raw); got != want {
				t.Errorf("Of(%q, %q)\n got %q (%#x)\nwant %q (%#x)", system, raw, got.Text, got.ID, want.Text, want.ID)
			}
		}
	}
}

// FuzzFingerprintOracle requires Fingerprint to give the same Text and ID as the previous
// implementation, which is kept in this file as a differential oracle.
func FuzzFingerprintOracle(f *testing.F) {
	for _, raw := range oracleSeeds(f) {
		for i := range oracleSystems {
			f.Add(uint8(i), raw)
		}
	}
	f.Fuzz(func(t *testing.T, sys uint8, raw string) {
		system := oracleSystems[int(sys)%len(oracleSystems)]
		if got, want := Of(system, raw), oracleFingerprint(system, raw); got != want {
			t.Fatalf("Of(%q, %q)\n got %q (%#x)\nwant %q (%#x)", system, raw, got.Text, got.ID, want.Text, want.ID)
		}
	})
}
