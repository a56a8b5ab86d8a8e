package attribute

import (
	"strings"
	"unsafe"

	"github.com/culprithq/culprit/attribute/internal/gostd"
	"github.com/culprithq/culprit/traces"
)

// matchFunction reports whether a function rule's pattern matches name:
// name starts with pattern at an identifier boundary. A pattern that ends
// in an identifier character (net/http.Head) must be followed in name by
// the end or a character that is not one (net/http.Head, …Head.func1,
// …Head-fm), so that it never matches a longer identifier
// (net/http.Header.Set). A pattern that ends otherwise (database/sql.,
// github.com/jackc/pgx/, example.com/db.(*Pool) matches
// everything under it.
func matchFunction(pattern, name string) bool {
	if !strings.HasPrefix(name, pattern) {
		return false
	}
	if len(name) == len(pattern) || pattern == "" || !identByte(pattern[len(pattern)-1]) {
		return true
	}
	return !identByte(name[len(pattern)])
}

// rulePath returns the form of a '/'-separated file path that file rules
// match: Debian's Python installs packages in dist-packages where pip
// uses site-packages, and the rules name the latter.
func rulePath(file string) string {
	if strings.Contains(file, "/dist-packages/") {
		return strings.ReplaceAll(file, "/dist-packages/", "/site-packages/")
	}
	return file
}

// identByte reports whether c can continue an identifier: an ASCII
// letter, digit or underscore, or a byte of a multi-byte UTF-8 character
// (Go and JVM identifiers may hold Unicode letters).
func identByte(c byte) bool {
	return c == '_' || c >= '0' && c <= '9' || c >= 'a' && c <= 'z' || c >= 'A' && c <= 'Z' || c >= 0x80
}

// matcher evaluates the rules that look at strings once per distinct
// function name and once per distinct file path, and works out the
// ownership facts of each file path once: a profile whose thousands of
// functions share one long file name costs one scan of that name per
// rule, not one per function (time linear in the input's size).
type matcher struct {
	rules []Rule
	app   []string
	words int                   // bitset length, in uint64s
	funcs map[string][]uint64   // function name → bit i set when rule i (a name rule) matches
	files map[string]*fileFacts // file path → its facts
	// byData finds the facts of a file path by where its bytes are, so
	// that the frames of a source, which share each interned path, do
	// not hash a long path once each.
	byData map[stringData]*fileFacts
	// evals counts rule evaluations against a string, and hashed the
	// file paths looked up by content, for tests.
	evals, hashed int
}

// stringData identifies the bytes of a string (never dereferenced).
type stringData struct {
	p *byte
	n int
}

// fileFacts is what classification needs to know of one file path.
type fileFacts struct {
	path  string   // with '/' separators
	rules []uint64 // bit i set when rule i (a file rule) matches
	lang  language // from the suffix; langUnknown for ""
	app   string   // the first --app prefix the path contains
	// goDep says why a Go file is a dependency's (module cache,
	// module@version path, vendor/), "" when it is none of these.
	goDep string
	// goroot: the path lies in a Go installation's source tree;
	// trimmedStd: it is a -trimpath standard-library path (net/http/server.go).
	goroot, trimmedStd bool
	pyLib, nodeLib     bool // Python standard library or installed package; Node.js core or node_modules
	// dir is the path up to its last '/' (inclusive): the detection
	// summary's group for Python and Node.js code.
	dir string
	// det is the detection group of the application functions in this
	// file, once NewClassifier has made it (Python and Node.js).
	det *detectionGroup
}

func newMatcher(rs *Rules) *matcher {
	return &matcher{
		rules:  rs.Rules,
		app:    rs.App,
		words:  (len(rs.Rules) + 63) / 64,
		funcs:  make(map[string][]uint64, 1024),
		files:  make(map[string]*fileFacts, 64),
		byData: make(map[stringData]*fileFacts, 64),
	}
}

// matches reports whether rule i matches f, whose function name matches
// the name rules in fn (m.function) and whose file has the facts ff.
func (m *matcher) matches(i int, f *traces.Frame, fn []uint64, ff *fileFacts) bool {
	r := &m.rules[i]
	switch {
	case r.Span != "":
		return r.Matches(f) // reads span fields only: constant time
	case r.File != "":
		return ff.rules[i/64]&(1<<(i%64)) != 0
	}
	return fn[i/64]&(1<<(i%64)) != 0
}

// function returns the name rules that match fn, evaluating them the
// first time fn is seen.
func (m *matcher) function(fn string) []uint64 {
	if bits, ok := m.funcs[fn]; ok {
		return bits
	}
	bits := make([]uint64, m.words)
	probe := traces.Frame{Function: fn}
	for i := range m.rules {
		r := &m.rules[i]
		if r.Span != "" || r.File != "" {
			continue
		}
		m.evals++
		if r.Matches(&probe) {
			bits[i/64] |= 1 << (i % 64)
		}
	}
	m.funcs[fn] = bits
	return bits
}

// file returns the facts of file path p, working them out the first time
// p is seen.
func (m *matcher) file(p string) *fileFacts {
	key := stringData{unsafe.StringData(p), len(p)}
	if ff, ok := m.byData[key]; ok {
		return ff
	}
	m.hashed++
	if ff, ok := m.files[p]; ok {
		m.byData[key] = ff
		return ff
	}
	ff := newFileFacts(p, m.rules, m.app)
	for i := range m.rules {
		if m.rules[i].File != "" {
			m.evals++
		}
	}
	m.files[p] = ff
	m.byData[key] = ff
	return ff
}

// newFileFacts works out the facts of file path p for rules and --app
// prefixes app.
func newFileFacts(p string, rules []Rule, app []string) *fileFacts {
	file := slashPath(p)
	ff := &fileFacts{path: file, rules: make([]uint64, (len(rules)+63)/64), lang: lang(&traces.Frame{File: p})}
	if file == "" {
		return ff
	}
	ff.dir = file[:strings.LastIndexByte(file, '/')+1]
	match := rulePath(file)
	for i := range rules {
		if r := &rules[i]; r.File != "" && strings.Contains(match, r.File) {
			ff.rules[i/64] |= 1 << (i % 64)
		}
	}
	for _, a := range app {
		if strings.Contains(file, a) {
			ff.app = a
			break
		}
	}
	switch ff.lang {
	case langGo:
		switch {
		case strings.Contains(file, "/pkg/mod/"):
			ff.goDep = "in the Go module cache"
		case modVersionRe.MatchString(file):
			ff.goDep = "a dependency (module@version path)"
		case strings.Contains(file, "/vendor/") || strings.HasPrefix(file, "vendor/"):
			ff.goDep = "vendored"
		}
		ff.goroot = gorootRe.MatchString(file)
		ff.trimmedStd = !strings.HasPrefix(file, "/") && gostd.IsFile(file)
	case langPython:
		ff.pyLib = strings.Contains(file, "site-packages/") || strings.Contains(file, "dist-packages/") || pythonStdRe.MatchString(file) || strings.HasPrefix(file, "<")
	case langNode:
		ff.nodeLib = strings.Contains(file, "node_modules/") || strings.HasPrefix(file, "node:") || strings.HasPrefix(file, "internal/")
	}
	return ff
}
