package attribute

import (
	"regexp"
	"strings"
)

// Patterns Identity rewrites. Each matches a part of a function name that
// a rebuild of unchanged code can change by itself.
var (
	// goClosureRe matches a chain of Go compiler-generated suffixes:
	// closures (.func1, nested .func1.2 or .func1.func2), go/defer
	// statement wrappers (.gowrap1, .deferwrap1) and range-over-func loop
	// bodies (-range1). It must end at a word boundary so that a longer
	// name (.func12x) is left alone.
	goClosureRe = regexp.MustCompile(`(?:\.(?:func|gowrap|deferwrap)[0-9]+|-range[0-9]+)(?:\.(?:func|gowrap|deferwrap)?[0-9]+|-range[0-9]+)*\b`)
	// jvmLambdaRe matches the generated class of a JVM lambda:
	// Foo$$Lambda$123/0x0000000800c0b0 (JDK 9–20), Foo$$Lambda/0x…
	// (JDK 21 hidden classes) and Foo$$Lambda$1/1234567 (JDK 8).
	jvmLambdaRe = regexp.MustCompile(`\$\$Lambda(?:\$[0-9]+)?(?:/(?:0x)?[0-9a-fA-F]+)?`)
	// jvmProxyRe matches a runtime-generated proxy class suffix with a hash:
	// Foo$$EnhancerByX$$1a2b3c4d.
	jvmProxyRe = regexp.MustCompile(`(\$\$[A-Za-z][A-Za-z0-9_]*\$\$)[0-9a-fA-F]+\b`)
	// jvmNumberRe matches the numbered parts of JVM synthetic names:
	// anonymous classes (Foo$1), lambda bodies (lambda$main$0), accessors
	// (access$000) and the like in other JVM languages ($anonfun$run$1).
	jvmNumberRe = regexp.MustCompile(`\$[0-9]+\b`)
	// anonymousRe matches the spellings JavaScript tools use for an
	// anonymous function.
	anonymousRe = regexp.MustCompile(`<anonymous>|\(anonymous function\)|\(anonymous\)`)
)

// Identity returns the name under which a root-cause function is matched
// across two builds: function with the parts that rebuilding unchanged code
// may change by itself replaced by fixed placeholders. Two functions with
// the same Identity are compared as one (their costs add up). The rewrites:
//
//   - Go closures and compiler wrappers: a chain of .funcN, nested .N,
//     .gowrapN, .deferwrapN and -rangeN suffixes becomes ".func*", after
//     the named function that encloses the anonymous code
//     (pkg.outer.func1.2 → pkg.outer.func*). Numbering follows source
//     order, so adding one closure renumbers the others, nesting changes
//     when code moves into or out of a loop body, and inlining puts the
//     inlining path in the name (pkg.outer.callee.outer.func1.func3 is
//     pkg.outer.func1.1 in a build without inlining); all anonymous code
//     of one named function is therefore one identity. The enclosing
//     function is the name right before the last closure chain, with its
//     receiver when written (*T): closures of a value method T.M are
//     grouped under pkg.M.func*. A top-level function that is really
//     named funcN (pkg.func1) is left alone.
//   - Generic instantiations: the contents of a bracket group attached to
//     a name become "…" (pkg.Map[go.shape.int,go.shape.string] →
//     pkg.Map[…]), since shapes depend on the instantiations the build
//     happened to need. Empty brackets and brackets after a space or a
//     slash (a route such as /items/[id]) are kept.
//   - JVM: lambda classes (Foo$$Lambda$12/0x…, Foo$$Lambda/0x…) become
//     Foo$$Lambda, generated proxy hashes ($$Proxy$$1a2b) become $$Proxy$$*,
//     and every numbered synthetic part ($1, lambda$main$0, access$000)
//     becomes $*.
//   - JavaScript: <anonymous>, (anonymous) and (anonymous function) are
//     spelled "(anonymous)". Python's <lambda>, <listcomp> and the like
//     are kept as they are: they carry no numbering.
//
// Line numbers are never part of a function name (a Cause keeps them in
// File and Line), so a function whose code moved keeps its identity.
// Identity is idempotent and trims surrounding spaces; "" stays "".
func Identity(function string) string {
	s := strings.TrimSpace(function)
	if s == "" {
		return ""
	}
	s = collapseBrackets(s)
	s = goClosures(s)
	if strings.IndexByte(s, '$') >= 0 {
		s = jvmLambdaRe.ReplaceAllString(s, "$$$$Lambda")
		s = jvmProxyRe.ReplaceAllString(s, "$1*")
		s = jvmNumberRe.ReplaceAllString(s, "$$*")
	}
	if strings.Contains(s, "anonymous") {
		s = anonymousRe.ReplaceAllString(s, "(anonymous)")
	}
	return s
}

// goClosures rewrites the closure chains of a Go name that occur after its
// package path (everything up to the first '.' after the last '/'), and
// only after some name in it: a package-level function named func1 is a
// real name. A name with a closure chain becomes the named function right
// before its last chain (with its receiver when written (*T) or (T)),
// then ".func*", then whatever followed the chain (-fm): a closure made
// in code the compiler inlined carries the inlining path in its name
// (main.handler.each.handler.func1.func3 where a build without inlining
// says main.handler.func1.1), and both are main.handler.func*.
func goClosures(s string) string {
	slash := strings.LastIndexByte(s, '/')
	dot := strings.IndexByte(s[slash+1:], '.')
	if dot < 0 {
		return s
	}
	start := slash + 1 + dot + 1 // first byte of the name after the package
	rest := s[start:]
	if !strings.Contains(rest, "func") && !strings.Contains(rest, "wrap") && !strings.Contains(rest, "-range") {
		return s
	}
	chains := goClosureRe.FindAllStringIndex(rest, -1)
	if chains == nil || chains[len(chains)-1][0] == 0 {
		return s
	}
	last := chains[len(chains)-1]
	parts := strings.Split(rest[:last[0]], ".")
	named := parts[len(parts)-1]
	if n := len(parts); n >= 2 && strings.HasPrefix(parts[n-2], "(") {
		named = parts[n-2] + "." + named
	}
	if named == "" {
		return s[:start] + goClosureRe.ReplaceAllString(rest, ".func*")
	}
	return s[:start] + named + ".func*" + rest[last[1]:]
}

// collapseBrackets replaces the contents of every non-empty bracket group
// that directly follows a name character ([A-Za-z0-9_] or ')') with "…",
// keeping nested groups inside it balanced. An unbalanced '[' is kept with
// the rest of the string.
func collapseBrackets(s string) string {
	if strings.IndexByte(s, '[') < 0 {
		return s
	}
	var b strings.Builder
	b.Grow(len(s))
	for i := 0; i < len(s); {
		c := s[i]
		if c != '[' || i == 0 || !nameByte(s[i-1]) {
			b.WriteByte(c)
			i++
			continue
		}
		end := matchBracket(s, i)
		if end < 0 || end == i+1 {
			b.WriteByte(c)
			i++
			continue
		}
		b.WriteString("[…]")
		i = end + 1
	}
	return b.String()
}

// matchBracket returns the index of the ']' closing the '[' at s[open], or
// -1 when it is not closed.
func matchBracket(s string, open int) int {
	depth := 0
	for i := open; i < len(s); i++ {
		switch s[i] {
		case '[':
			depth++
		case ']':
			depth--
			if depth == 0 {
				return i
			}
		}
	}
	return -1
}

func nameByte(c byte) bool {
	return c == '_' || c == ')' || c >= '0' && c <= '9' || c >= 'a' && c <= 'z' || c >= 'A' && c <= 'Z'
}
