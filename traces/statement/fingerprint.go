package statement

import (
	"slices"
	"strings"
	"sync"
	"unicode/utf8"
)

// maxStatementInput is the number of bytes of a raw statement that Fingerprint reads (64 KiB).
const maxStatementInput = 64 << 10

// Fingerprint is a fingerprinted statement: literals replaced by "?", comments dropped,
// keywords and unquoted identifiers lower-cased, whitespace folded.
//
// Statements that differ only in literal values, bind-parameter style, comments, spacing, keyword
// case, casts of literals, the length of an IN list of two or more elements or the number of
// identical rows of a multi-row VALUES clause have the same Text and therefore the same ID. The zero value is not the fingerprint of empty input.
type Fingerprint struct {
	Text string // normalised text, safe to show (no literals)
	ID   uint64 // 64-bit FNV-1a hash of Text
}

// Of normalises raw for the given system (db.system.name values like "postgresql",
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
// placeholders becomes "in (?, …)", except a list of one, which becomes the equality it means
// ("= ?", and "<> ?" for NOT IN, as PostgreSQL parses it), and repeated identical rows of a
// VALUES list keep one row, so its arity stays. A cast of a literal or placeholder, "?::int" or
// CAST(? AS integer), and the type of a typed literal (DATE '…', TIME, TIMESTAMP, TIMESTAMPTZ)
// are dropped: PostgreSQL folds them into the constant. A cast whose type name goes on with "(",
// "[" or "." (numeric(8,2), int[], pg_catalog.int4) is kept. Unquoted keywords and identifiers
// are lower-cased (ASCII letters only); quoted ones ("Foo", `Foo`, and [Foo] for SQL Server and
// SQLite) stay as written. Tokens are joined by single
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
// is valid UTF-8 when raw is, and Of(system, s.Text) == s for any result s whose Text fits
// in the limit. Empty or all-comment input gives Text "".
func Of(system, raw string) Fingerprint {
	b := textBufferPool.Get().(*[]byte)
	*b = AppendText((*b)[:0], system, raw)
	st := statementOf(string(*b))
	textBufferPool.Put(b)
	return st
}

// textBufferPool keeps the buffers that Fingerprint writes text into.
var textBufferPool = sync.Pool{New: func() any { return new([]byte) }}

// AppendText appends Of(system, raw).Text to dst and returns the extended
// slice. For SQL, given a dst with room, it allocates nothing: it is the form for hot loops
// that need only the text.
func AppendText(dst []byte, system, raw string) []byte {
	if len(raw) > maxStatementInput {
		cut := maxStatementInput
		for k := 1; k < utf8.UTFMax && !utf8.RuneStart(raw[cut]); k++ {
			cut--
		}
		raw = raw[:cut]
	}
	switch system = strings.ToLower(system); system {
	case "redis", "memcached":
		return append(dst, fingerprintCommand(raw, system == "redis")...)
	case "mongodb":
		return append(dst, fingerprintDocument(raw)...)
	}
	d, known := dialectFor(system)
	if j := skipSpace(raw, 0); !known && j < len(raw) && (raw[j] == '{' || raw[j] == '[') {
		return append(dst, fingerprintDocument(raw)...)
	}
	return appendSQL(dst, d, raw)
}

// FNV-1a, 64-bit: offset basis and prime.
const (
	fnvOffset uint64 = 14695981039346656037
	fnvPrime  uint64 = 1099511628211
)

// statementOf returns the Fingerprint with Text text.
func statementOf(text string) Fingerprint {
	h := fnvOffset
	for i := 0; i < len(text); i++ {
		h = (h ^ uint64(text[i])) * fnvPrime
	}
	return Fingerprint{Text: text, ID: h}
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
	kWord    kind = iota // unquoted keyword or identifier
	kQuoted              // quoted identifier or document key, verbatim
	kLiteral             // literal or placeholder; text "?"
	kOp                  // operator or punctuation
)

// token is a token of a document (fingerprintDocument).
type token struct {
	kind kind
	text string
}

// qmark returns the placeholder token that replaces every literal.
func qmark() token { return token{kLiteral, "?"} }

// tag says what an SQL token written to the output is, as far as the rules for signs, IN lists,
// VALUES rows and spacing need to know. Equal tokens have equal tags.
type tag uint8

const (
	tagWord     tag = iota // keyword or identifier not listed below
	tagSignKW              // keyword after which a sign belongs to the number that follows
	tagIn                  // the keyword "in" (also a tagSignKW keyword)
	tagValues              // the keyword "values" (also a tagSignKW keyword)
	tagNot                 // the keyword "not" (also a tagSignKW keyword)
	tagAs                  // the keyword "as" (also a tagSignKW keyword)
	tagCastKW              // the keyword "cast"
	tagTypeKW              // a type that prefixes a typed literal: date, time, timestamp, timestamptz
	tagQuoted              // quoted identifier
	tagLiteral             // literal or bind parameter, written "?"
	tagOpen                // "("
	tagClose               // ")"
	tagComma               // ","
	tagMinus               // "-"
	tagPlus                // "+"
	tagLBracket            // "["
	tagRBracket            // "]"
	tagDot                 // "."
	tagSemi                // ";"
	tagCast                // "::"
	tagOp                  // any other operator or punctuation
)

const (
	// glueAfter: no space after these tokens (unless operator bytes would touch).
	glueAfter uint64 = 1<<tagOpen | 1<<tagLBracket | 1<<tagDot | 1<<tagCast
	// glueBefore: no space before these tokens (unless operator bytes would touch).
	glueBefore uint64 = 1<<tagComma | 1<<tagClose | 1<<tagRBracket | 1<<tagSemi | 1<<tagDot | 1<<tagLBracket | 1<<tagCast
	// signAfter: a sign after these tokens belongs to the number that follows.
	signAfter uint64 = 1<<tagSignKW | 1<<tagIn | 1<<tagValues | 1<<tagNot | 1<<tagAs | 1<<tagOpen | 1<<tagComma | 1<<tagMinus |
		1<<tagPlus | 1<<tagLBracket | 1<<tagDot | 1<<tagSemi | 1<<tagCast | 1<<tagOp
	// wordTagSet: the tags of keywords and identifiers.
	wordTagSet uint64 = 1<<tagWord | 1<<tagSignKW | 1<<tagIn | 1<<tagValues | 1<<tagNot | 1<<tagAs | 1<<tagCastKW | 1<<tagTypeKW
)

// sqlToken is a token already written to the output of an sqlWriter.
type sqlToken struct {
	at  int32 // length of the output before the token and the space written in front of it
	tag tag
}

// sqlWriter lexes SQL and writes its fingerprint in the same pass. It
// keeps the tokens written so far (as positions in out) so that a sign can join the number after
// it and a closing ")" can collapse an IN list or a repeated VALUES row; what those rules remove is
// always at the end of out.
type sqlWriter struct {
	d     dialect
	s     string
	i     int
	out   []byte
	toks  []sqlToken
	opens []int32  // indexes in toks of unmatched "("
	row   [2]int32 // toks[row[0]:row[1]] is the last VALUES row kept
}

// Properties of bytes in SQL text, as bits of sqlBytes.
const (
	bSpace      = 1 << iota // space or control byte, skipped
	bDigit                  // 0-9
	bIdentStart             // ASCII letter, '_' or any byte of a multi-byte UTF-8 sequence
	bIdentChar              // identifier start, digit or '$'
	bOp                     // operator byte: no space is dropped between two of them
)

// bUpper marks the ASCII upper-case letters. It is the bit 'a' - 'A' (0x20, above the bits
// before), so c|sqlBytes[c]&bUpper lower-cases c.
const bUpper = 'a' - 'A'

// sqlBytes holds the properties of every byte value, a lookup table built once.
var sqlBytes = func() (t [256]uint8) {
	for c := range 256 {
		b := byte(c)
		for _, p := range [...]struct {
			has  bool
			flag uint8
		}{
			{isSpace(b), bSpace}, {isDigit(b), bDigit}, {isIdentStart(b), bIdentStart},
			{isIdentChar(b), bIdentChar}, {strings.IndexByte("!#%&*+-/:<=>@^|~", b) >= 0, bOp},
			{'A' <= b && b <= 'Z', bUpper},
		} {
			if p.has {
				t[c] |= p.flag
			}
		}
	}
	return t
}()

// at returns the byte k positions ahead, or 0 past the end.
func (w *sqlWriter) at(k int) byte {
	if w.i+k < len(w.s) {
		return w.s[w.i+k]
	}
	return 0
}

// skipPast moves w.i just past the first end at or after from, or to the end of the input.
func (w *sqlWriter) skipPast(end string, from int) {
	if k := strings.Index(w.s[min(from, len(w.s)):], end); k >= 0 {
		w.i = from + k + len(end)
	} else {
		w.i = len(w.s)
	}
}

// skipIdent moves w.i past identifier bytes.
func (w *sqlWriter) skipIdent() {
	for w.i < len(w.s) && sqlBytes[w.s[w.i]]&bIdentChar != 0 {
		w.i++
	}
}

// skipDigits moves w.i past decimal digits.
func (w *sqlWriter) skipDigits() {
	for w.i < len(w.s) && isDigit(w.s[w.i]) {
		w.i++
	}
}

// begin records a token with tag t whose text starts with byte y and writes the space in front
// of it if one is due; the caller writes the text.
func (w *sqlWriter) begin(t tag, y byte) {
	if n := len(w.toks); n >= 3 && w.toks[n-2].tag == tagCast && t != tagOpen && t != tagLBracket && t != tagDot {
		w.dropCast()
	}
	if n := len(w.toks); t == tagLiteral && n > 0 && w.toks[n-1].tag == tagTypeKW && (n == 1 || w.toks[n-2].tag != tagDot) {
		w.drop(n - 1) // a typed literal, date '2024-01-31', is the literal
	}
	space := false
	if n := len(w.toks); n > 0 {
		x := w.out[len(w.out)-1] // the last byte of the previous token
		glue := (glueAfter>>(w.toks[n-1].tag&63)|glueBefore>>(t&63))&1 != 0
		// Keep a space where two operator bytes or "]" and "]" would touch (as in "[x] ]"), so
		// that the text lexes into the same tokens.
		space = !glue || sqlBytes[x]&sqlBytes[y]&bOp != 0 || x == ']' && y == ']'
	}
	w.toks = append(w.toks, sqlToken{int32(len(w.out)), t})
	if space {
		w.put(' ')
	}
}

// dropCast drops a cast of a literal, "?::int" → "?", once the token after the type name shows
// that the name is all of the type (no "(", "[" or "." follows). PostgreSQL folds such a cast
// into the constant, so that id = 5 and id = '5'::int are one statement to it.
func (w *sqlWriter) dropCast() {
	if n := len(w.toks); wordTagSet>>(w.toks[n-1].tag&63)&1 != 0 && w.toks[n-3].tag == tagLiteral {
		w.drop(n - 2)
	}
}

// put appends c to w.out.
func (w *sqlWriter) put(c byte) {
	w.out = append(w.out, c)
}

// literal writes "?".
func (w *sqlWriter) literal() {
	w.begin(tagLiteral, '?')
	w.put('?')
}

// drop removes the tokens from index k on.
func (w *sqlWriter) drop(k int) {
	w.out = w.out[:w.toks[k].at]
	w.toks = w.toks[:k]
}

// run writes the fingerprint of w.s to w.out.
func (w *sqlWriter) run() {
	for w.i < len(w.s) {
		c := w.s[w.i]
		switch f := sqlBytes[c]; {
		case f&bSpace != 0:
			i := w.i + 1
			for i < len(w.s) && sqlBytes[w.s[i]]&bSpace != 0 {
				i++
			}
			w.i = i
		case f&bDigit != 0:
			w.number()
		case f&bIdentStart != 0:
			w.word()
		default:
			w.punct(c)
		}
	}
	if len(w.toks) >= 3 && w.toks[len(w.toks)-2].tag == tagCast {
		w.dropCast()
	}
}

// punct scans what starts with the punctuation byte c at w.i: a comment, a string, a quoted
// identifier, a number such as .5, a bind parameter, a system variable or an operator.
func (w *sqlWriter) punct(c byte) {
	switch c {
	case '-':
		if w.at(1) == '-' {
			w.skipLine()
			return
		}
	case '#':
		if w.d.hashComment {
			w.skipLine()
			return
		}
	case '/':
		if w.at(1) == '*' {
			w.skipBlockComment()
			return
		}
	case '\'':
		w.i, _ = skipQuoted(w.s, w.i+1, c, w.d.backslash)
		w.literal()
		return
	case '"':
		if w.d.dquoteString {
			w.i, _ = skipQuoted(w.s, w.i+1, c, w.d.backslash)
			w.literal()
		} else {
			w.quoted('"')
		}
		return
	case '`':
		w.quoted('`')
		return
	case '[':
		if w.d.brackets {
			w.quoted(']')
			return
		}
	case '.':
		if isDigit(w.at(1)) {
			w.number()
			return
		}
	case '$':
		j := w.i + 1
		for j < len(w.s) && sqlBytes[w.s[j]]&bIdentChar != 0 && w.s[j] != '$' {
			j++
		}
		switch {
		case j < len(w.s) && w.s[j] == '$' && !isDigit(w.at(1)): // $$…$$ or $tag$…$tag$
			w.skipPast(w.s[w.i:j+1], j+1)
			w.literal()
			return
		case j > w.i+1: // $1 or $name
			w.i = j
			w.literal()
			return
		}
	case '?': // ? or ?NNN
		w.i++
		w.skipDigits()
		w.literal()
		return
	case ':':
		if d := w.at(1); sqlBytes[d]&bIdentChar != 0 && d != '$' { // :name, :1
			w.i++
			w.skipIdent()
			w.literal()
			return
		}
	case '@':
		if sqlBytes[w.at(1)]&bIdentStart != 0 { // @p1
			w.i++
			w.skipIdent()
			w.literal()
			return
		}
		if w.at(1) == '@' && sqlBytes[w.at(2)]&bIdentStart != 0 { // system variable such as @@ROWCOUNT
			start := w.i
			w.i += 2
			w.skipIdent()
			w.begin(tagWord, '@')
			w.write(w.s[start:w.i], true)
			return
		}
	case '%':
		if w.percentBind() {
			w.literal()
			return
		}
	}
	w.operator()
}

// skipLine moves w.i past the end of the line, or to the end of the input.
func (w *sqlWriter) skipLine() {
	if k := strings.IndexByte(w.s[w.i:], '\n'); k >= 0 {
		w.i += k + 1
	} else {
		w.i = len(w.s)
	}
}

// quoted scans an identifier quoted up to closer and writes it as it is, or "?" if it is
// unterminated, so that its text is not shown.
func (w *sqlWriter) quoted(closer byte) {
	start := w.i
	end, ok := skipQuoted(w.s, w.i+1, closer, false)
	if w.i = end; !ok {
		w.literal()
		return
	}
	w.begin(tagQuoted, w.s[start])
	w.write(w.s[start:end], false)
}

// write appends s to w.out, with its ASCII letters lower-cased if lower is set. (It extends
// w.out by reslicing, which unlike append(w.out, s...) does not store the slice's pointer again
// unless it grows.)
func (w *sqlWriter) write(s string, lower bool) {
	k := len(w.out)
	if cap(w.out)-k < len(s) {
		w.out = slices.Grow(w.out, len(s))
	}
	w.out = w.out[:k+len(s)]
	dst := w.out[k:]
	for i := range len(s) {
		c := s[i]
		if lower {
			c |= sqlBytes[c] & bUpper
		}
		dst[i] = c
	}
}

// skipBlockComment skips a /* */ comment, nested unless the dialect says otherwise.
func (w *sqlWriter) skipBlockComment() {
	for depth := 0; w.i < len(w.s); w.i++ {
		if w.s[w.i] == '/' && w.at(1) == '*' && (depth == 0 || !w.d.flatComments) {
			depth++
			w.i++
		} else if w.s[w.i] == '*' && w.at(1) == '/' {
			depth--
			if w.i++; depth == 0 {
				w.i++
				return
			}
		}
	}
}

// skipQuoted returns the index just past the closing quote q of a run that starts at i, just after
// the opening quote; qq stands for q, and if backslash is set a backslash escapes the next byte.
// It returns len(s), false when the run is unterminated.
func skipQuoted(s string, i int, q byte, backslash bool) (int, bool) {
	if !backslash {
		for i < len(s) {
			k := strings.IndexByte(s[i:], q)
			if k < 0 {
				break
			}
			if i += k + 1; i == len(s) || s[i] != q {
				return i, true
			}
			i++ // qq
		}
		return len(s), false
	}
	for ; i < len(s); i++ {
		switch {
		case s[i] == '\\', s[i] == q && i+1 < len(s) && s[i+1] == q:
			i++
		case s[i] == q:
			return i + 1, true
		}
	}
	return len(s), false
}

// number scans a numeric literal: digits, fraction and exponent, then any identifier bytes glued
// to it (0x1F, 0b101, 1_000, 2.5F). It writes "?", taking in a sign just before it that belongs to
// it: one at the start or after an operator, "(", "," or a keyword.
func (w *sqlWriter) number() {
	w.skipDigits()
	if w.at(0) == '.' {
		w.i++
		w.skipDigits()
	}
	if w.at(0)|0x20 == 'e' {
		j := 1
		if w.at(1) == '+' || w.at(1) == '-' {
			j = 2
		}
		if isDigit(w.at(j)) {
			w.i += j
		}
	}
	w.skipIdent()
	if n := len(w.toks); n > 0 {
		if t := w.toks[n-1].tag; (t == tagMinus || t == tagPlus) && (n == 1 || signAfter>>(w.toks[n-2].tag&63)&1 != 0) {
			w.drop(n - 1)
		}
	}
	w.literal()
}

// word scans a keyword or identifier, or a prefixed string such as E'…', N'…', X'…', B'…', U&'…'
// or Oracle's q'[…]', and writes it lower-cased, or "?" for a string, TRUE or FALSE.
func (w *sqlWriter) word() {
	s, start := w.s, w.i
	if c := w.at(1); (c == '\'' || c == '&' || c|0x20 == 'q') && w.prefixedString() {
		w.literal()
		return
	}
	w.begin(tagWord, s[start])
	k := len(w.out)
	if cap(w.out)-k < len(s)-start {
		w.out = slices.Grow(w.out, len(s)-start)
	}
	dst := w.out[k:cap(w.out)]
	var key uint64 // the lower-cased word, a byte a byte; complete for words of up to 8 bytes
	n := 0
	for ; start+n < len(s); n++ {
		c := s[start+n]
		f := sqlBytes[c]
		if f&bIdentChar == 0 {
			break
		}
		c |= f & bUpper
		dst[n] = c
		key = key<<8 | uint64(c)
	}
	w.out = w.out[:k+n] // extend by reslicing, as in write
	w.i = start + n
	t := tagWord
	if n <= 8 {
		t = lookupWordTag(key)
	} else if n == 9 && string(dst[:n]) == "returning" {
		t = tagSignKW
	} else if n == 9 && string(dst[:n]) == "timestamp" || n == 11 && string(dst[:n]) == "timestamptz" {
		t = tagTypeKW
	}
	if t == tagLiteral { // true or false
		w.out = w.out[:k]
		w.put('?')
	}
	w.toks[len(w.toks)-1].tag = t
	if n := len(w.toks); t == tagLiteral && n >= 2 && w.toks[n-2].tag == tagTypeKW && (n == 2 || w.toks[n-3].tag != tagDot) {
		w.drop(n - 2) // as begin does for other literals
		w.literal()
	}
}

// prefixedString reports whether a prefixed string (E'…', N'…', X'…', B'…', U&'…' or Oracle's
// q'[…]') starts at w.i and, if so, skips it.
func (w *sqlWriter) prefixedString() bool {
	a, next := w.s[w.i]|0x20, w.at(1)
	switch {
	case next == '\'' && (a == 'e' || a == 'n' || a == 'x' || a == 'b'):
		w.i, _ = skipQuoted(w.s, w.i+2, '\'', w.d.backslash || a == 'e')
	case w.d.qQuote && (a == 'q' && next == '\'' || a == 'n' && next|0x20 == 'q' && w.at(2) == '\''):
		quote := w.i + 1
		if a == 'n' {
			quote++
		}
		closer := byte(0) // past the end: never found
		if quote+1 < len(w.s) {
			closer = w.s[quote+1]
		}
		switch closer {
		case '[', '{', '<':
			closer += 2 // ']', '}', '>'
		case '(':
			closer = ')'
		}
		end := [2]byte{closer, '\''}
		w.skipPast(string(end[:]), quote+2)
	case a == 'u' && next == '&' && w.at(2) == '\'':
		w.i, _ = skipQuoted(w.s, w.i+3, '\'', false)
	default:
		return false
	}
	return true
}

// wordTagEntry is a slot of the open-addressing table that lookupWordTag reads.
type wordTagEntry struct {
	key uint64 // a word packed as in sqlWriter.word; 0 for an empty slot
	tag tag
}

// wordTags is a hash table, built once, of the words that are not plain tagWord words: TRUE and
// FALSE (tagLiteral), IN, VALUES and the other keywords after which a sign belongs to the number
// that follows, CAST and the types of typed literals ("returning", "timestamp" and "timestamptz",
// the words longer than 8 bytes, are checked by word).
var wordTags = func() (table [128]wordTagEntry) {
	add := func(t tag, words string) {
		for _, w := range strings.Fields(words) {
			var key uint64
			for i := range len(w) {
				key = key<<8 | uint64(w[i])
			}
			i := wordTagSlot(key)
			for table[i].key != 0 {
				i = (i + 1) % len(table)
			}
			table[i] = wordTagEntry{key, t}
		}
	}
	add(tagLiteral, "true false")
	add(tagIn, "in")
	add(tagValues, "values")
	add(tagNot, "not")
	add(tagAs, "as")
	add(tagCastKW, "cast")
	add(tagTypeKW, "date time")
	add(tagSignKW, `all and any between by case distinct else escape exists from having ilike into is
		like limit offset on or return select set some then top when where with`)
	return table
}()

// wordTagSlot returns the first slot of wordTags to probe for key.
func wordTagSlot(key uint64) int { return int(key * 0x9e3779b97f4a7c15 >> 57) }

// lookupWordTag returns the tag of the word packed in key (see sqlWriter.word).
func lookupWordTag(key uint64) tag {
	for i := wordTagSlot(key); ; i = (i + 1) % len(wordTags) {
		switch e := wordTags[i]; e.key {
		case key:
			return e.tag
		case 0:
			return tagWord
		}
	}
}

// percentBind reports whether a %s or %(name)s parameter starts at w.i and, if so, skips it.
func (w *sqlWriter) percentBind() bool {
	j := w.i + 1
	if j < len(w.s) && w.s[j] == '(' {
		for j++; j < len(w.s) && sqlBytes[w.s[j]]&bIdentChar != 0; j++ {
		}
		if j >= len(w.s) || w.s[j] != ')' {
			return false
		}
		j++
	}
	if j < len(w.s) && w.s[j] == 's' && (j+1 == len(w.s) || sqlBytes[w.s[j+1]]&bIdentChar == 0) {
		w.i = j + 1
		return true
	}
	return false
}

// operator scans the longest known operator at w.i, else one byte of punctuation, and writes it.
// A ")" that closes a "(" may collapse the group.
func (w *sqlWriter) operator() {
	c, d, n := w.s[w.i], w.at(1), 1
	switch {
	case sqlBytes[d]&bOp == 0: // every operator longer than a byte is made of operator bytes
	case d == '>' && (c == '-' || c == '#'):
		n = 2
		if w.at(2) == '>' { // ->> or #>>
			n = 3
		}
	case c == '!' && d == '~':
		n = 2
		if w.at(2) == '*' { // !~*
			n = 3
		}
	case c == ':' && (d == ':' || d == '='),
		c == '<' && (d == '=' || d == '>' || d == '<' || d == '@'),
		c == '>' && (d == '=' || d == '>'),
		c == '!' && d == '=',
		c == '=' && (d == '=' || d == '>'),
		c == '|' && d == '|', c == '&' && d == '&', c == '@' && d == '>', c == '~' && d == '*':
		n = 2
	}
	t := tagOp
	if n == 1 {
		switch c {
		case '(':
			t = tagOpen
		case ')':
			t = tagClose
		case ',':
			t = tagComma
		case '-':
			t = tagMinus
		case '+':
			t = tagPlus
		case '[':
			t = tagLBracket
		case ']':
			t = tagRBracket
		case '.':
			t = tagDot
		case ';':
			t = tagSemi
		}
	} else if c == ':' && d == ':' {
		t = tagCast
	}
	w.begin(t, c)
	if n == 1 {
		w.put(c)
	} else {
		w.write(w.s[w.i:w.i+n], false)
	}
	w.i += n
	switch {
	case t == tagOpen:
		w.opens = append(w.opens, int32(len(w.toks)-1))
	case t == tagClose && len(w.opens) > 0:
		o := int(w.opens[len(w.opens)-1])
		w.opens = w.opens[:len(w.opens)-1]
		w.closeGroup(o)
	}
}

// closeGroup handles the group toks[o:] that a ")" has just closed: an IN list of literals and
// placeholders becomes "= ?" (one element; NOT IN: "<> ?") or "in (?, …)", a cast of a literal,
// CAST(? AS type), becomes "?", and a VALUES row equal to the row before it is dropped.
func (w *sqlWriter) closeGroup(o int) {
	toks := w.toks
	switch {
	case o > 0 && toks[o-1].tag == tagIn && isPlaceholderRun(toks[o+1:len(toks)-1]):
		switch {
		case len(toks)-o > 3:
			w.drop(o + 1)
			w.literal()
			w.begin(tagComma, ',')
			w.put(',')
			w.begin(tagWord, "…"[0])
			w.write("…", false)
			w.begin(tagClose, ')')
			w.put(')')
		case o > 1 && toks[o-2].tag == tagNot: // x NOT IN (?) is x <> ?, as PostgreSQL parses it
			w.drop(o - 2)
			w.begin(tagOp, '<')
			w.write("<>", false)
			w.literal()
		default: // x IN (?) is x = ?, as PostgreSQL parses it
			w.drop(o - 1)
			w.begin(tagOp, '=')
			w.put('=')
			w.literal()
		}
	case o > 0 && toks[o-1].tag == tagCastKW && len(toks)-o == 5 && toks[o+1].tag == tagLiteral && toks[o+2].tag == tagAs &&
		wordTagSet>>(toks[o+3].tag&63)&1 != 0:
		w.drop(o - 1)
		w.literal()
	case o > 0 && toks[o-1].tag == tagValues:
		w.row = [2]int32{int32(o), int32(len(toks))}
	case o > 1 && int(w.row[1]) == o-1 && toks[o-1].tag == tagComma: // another row of the same VALUES
		if w.sameRow(o) {
			w.drop(o - 1)
		} else {
			w.row = [2]int32{int32(o), int32(len(toks))}
		}
	}
}

// isPlaceholderRun reports whether ts is "?" or "?, ?, …".
func isPlaceholderRun(ts []sqlToken) bool {
	for k, t := range ts {
		if k%2 == 0 && t.tag != tagLiteral || k%2 == 1 && t.tag != tagComma {
			return false
		}
	}
	return len(ts)%2 == 1
}

// sameRow reports whether the group toks[o:] is the same token sequence as the last VALUES row:
// the same tags at the same offsets over the same output bytes. Both groups start with "(", so
// they are compared from there on, leaving out the space in front of them.
func (w *sqlWriter) sameRow(o int) bool {
	a, b := w.toks[w.row[0]:w.row[1]], w.toks[o:]
	if len(a) != len(b) {
		return false
	}
	startA, startB := w.textStart(a[0]), w.textStart(b[0])
	endA := w.toks[w.row[1]].at // the "," after the row
	if string(w.out[startA:endA]) != string(w.out[startB:]) {
		return false
	}
	for k := 1; k < len(a); k++ {
		if a[k].tag != b[k].tag || a[k].at-startA != b[k].at-startB {
			return false
		}
	}
	return true
}

// textStart returns the index in w.out of the first byte of t, after any space written before it
// (no token starts with a space).
func (w *sqlWriter) textStart(t sqlToken) int32 {
	if w.out[t.at] == ' ' {
		return t.at + 1
	}
	return t.at
}

// sqlBuffers holds the token buffers of an sqlWriter between statements.
type sqlBuffers struct {
	toks  []sqlToken
	opens []int32
}

// sqlBufferPool keeps sqlBuffers for reuse, so that fingerprinting a statement allocates at most
// its output.
var sqlBufferPool = sync.Pool{New: func() any { return new(sqlBuffers) }}

// appendSQL appends the fingerprint of SQL raw in dialect d to dst.
func appendSQL(dst []byte, d dialect, raw string) []byte {
	buf := sqlBufferPool.Get().(*sqlBuffers)
	w := sqlWriter{d: d, s: raw, out: dst, toks: buf.toks[:0], opens: buf.opens[:0]}
	w.run()
	buf.toks, buf.opens = w.toks, w.opens
	sqlBufferPool.Put(buf)
	return w.out
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

// lowerASCII lower-cases the ASCII letters of s and leaves every other byte alone.
func lowerASCII(s string) string {
	for i := 0; i < len(s); i++ {
		if s[i]-'A' < 26 {
			b := []byte(s)
			for ; i < len(b); i++ {
				if b[i]-'A' < 26 {
					b[i] += 'a' - 'A'
				}
			}
			return string(b)
		}
	}
	return s
}
