package attribute

import (
	"regexp"
	"sort"
	"strings"

	"github.com/culprithq/culprit/attribute/internal/gostd"
	"github.com/culprithq/culprit/traces"
)

// Verdict is the classification of one frame and why.
type Verdict struct {
	Class Class
	// EntryPoint marks a frame that starts a request: an entry-class frame,
	// or an application frame matched by an entry rule (main.main, a SERVER span).
	EntryPoint bool
	// System is the database or network system of a boundary frame.
	System string
	// Rule is the rule that decided, nil when ownership alone decided.
	Rule *Rule
	// Reason says in words why the frame is, or is not, application code.
	Reason string
}

// Classifier classifies the frames of one source. It is built once per
// source; Verdict lookups are then constant time.
type Classifier struct {
	rules    *Rules
	m        *matcher  // rule matches and file facts, once per distinct string
	verdicts []Verdict // by FrameID
	// classes holds each frame's Class, with entryBit set for entry
	// points: what the attribution walk reads for every tree node,
	// packed tight for the cache.
	classes []uint8
	// fn numbers each frame's function name (an index into fnNames), so
	// that functions can be told apart without hashing names.
	fn      []int32
	fnNames []string
	// Detected lists what auto-detection took as application code; empty
	// when App prefixes were given.
	Detected []Detection
}

// Detection is one application root found by auto-detection.
type Detection struct {
	// Prefix is a package path (Go: module-like prefix, or "main"), or a
	// class/module prefix for other languages.
	Prefix string `json:"prefix"`
	// Functions is the number of distinct functions under the prefix.
	Functions int `json:"functions"`
	// Reason says why these frames were taken as the application's.
	Reason string `json:"reason"`
}

// NewClassifier classifies every frame of src with rules.
func NewClassifier(src *traces.Source, rules *Rules) *Classifier {
	c := &Classifier{rules: rules, m: newMatcher(rules), verdicts: make([]Verdict, len(src.Frames)), classes: make([]uint8, len(src.Frames))}
	detected := map[string]*detectionGroup{}
	// Rules never look at the line, and a profile has many lines of each
	// function: classify each frame-without-line once. Frames are found
	// by function name first (one string to hash), then by value.
	type class struct {
		key traces.Frame // the frame without its line
		v   Verdict
		fn  int32
	}
	var classes []class
	byName := make(map[string][]int32, 1024) // function name → classes
	c.fn = make([]int32, len(src.Frames))
	for id := 1; id < len(src.Frames); id++ {
		f := &src.Frames[id]
		key := *f
		key.Line = 0
		ci := int32(-1)
		for _, k := range byName[f.Function] {
			if classes[k].key == key {
				ci = k
				break
			}
		}
		if ci < 0 {
			v := c.classify(f)
			fn := int32(len(c.fnNames))
			if ks := byName[f.Function]; len(ks) > 0 {
				fn = classes[ks[0]].fn
			} else {
				c.fnNames = append(c.fnNames, f.Function)
			}
			ci = int32(len(classes))
			classes = append(classes, class{key: key, v: v, fn: fn})
			byName[f.Function] = append(byName[f.Function], ci)
			if v.Class == Application && len(rules.App) == 0 {
				ff := c.m.file(f.File)
				d := ff.det // Python and Node.js group by file: found without hashing the path
				if d == nil {
					root := appRoot(f, ff)
					if d = detected[root]; d == nil {
						d = &detectionGroup{reason: v.Reason, funcs: map[string]bool{}}
						detected[root] = d
					}
					if l := lang(f); !f.Span && (l == langPython || l == langNode) {
						ff.det = d
					}
				}
				d.funcs[f.Function] = true
			}
		}
		cl := &classes[ci]
		c.verdicts[id] = cl.v
		c.fn[id] = cl.fn
		c.classes[id] = uint8(cl.v.Class)
		if cl.v.EntryPoint {
			c.classes[id] |= entryBit
		}
	}
	for root, d := range detected {
		c.Detected = append(c.Detected, Detection{Prefix: root, Functions: len(d.funcs), Reason: d.reason})
	}
	sort.Slice(c.Detected, func(i, j int) bool {
		a, b := c.Detected[i], c.Detected[j]
		if a.Functions != b.Functions {
			return a.Functions > b.Functions
		}
		return a.Prefix < b.Prefix
	})
	return c
}

// detectionGroup gathers the application functions of one Detection.
type detectionGroup struct {
	reason string
	funcs  map[string]bool
}

const entryBit = 0x80

// class returns frame id's Class and whether it is an entry point.
func (c *Classifier) class(id traces.FrameID) (Class, bool) {
	k := c.classes[id]
	return Class(k &^ entryBit), k&entryBit != 0
}

// Keep returns how many leading frames of a path attribution needs; it
// suits callgraph.TreeOptions.Keep. A path that reaches a database or
// network frame is needed down to that frame: everything below belongs
// to the call. A path that reaches none is charged nothing, only counted
// for its entry point, so it is needed down to the frames that name it:
// the deepest entry-point frame and the first application frame below it
// (or, with no entry point, the first application frame). What the walk
// finds at the last kept frame is then what it finds at the path's end.
func (c *Classifier) Keep(frames []traces.FrameID) int {
	entryAt, appAt := -1, -1
	for i, f := range frames {
		class, entry := c.class(f)
		if class.IsBoundary() {
			return i + 1
		}
		if entry {
			entryAt, appAt = i, -1
		}
		if class == Application && appAt < 0 {
			appAt = i
		}
	}
	return max(entryAt, appAt, 0) + 1
}

// Verdict returns the classification of frame id.
func (c *Classifier) Verdict(id traces.FrameID) *Verdict { return &c.verdicts[id] }

func (c *Classifier) classify(f *traces.Frame) Verdict {
	var entryRule *Rule
	fn, ff := c.m.function(f.Function), c.m.file(f.File)
	for i := range c.rules.Rules {
		r := &c.rules.Rules[i]
		if !c.m.matches(i, f, fn, ff) {
			continue
		}
		switch r.Class {
		case Database, Network:
			sys := r.System
			if f.Span && f.System != "" {
				sys = f.System
			}
			return Verdict{Class: r.Class, System: sys, Rule: r, Reason: "rule " + ruleString(r)}
		case Entry:
			if entryRule == nil {
				entryRule = r
			}
			continue
		case Application:
			return Verdict{Class: Application, EntryPoint: entryRule != nil, Rule: r, Reason: "rule " + ruleString(r)}
		case Library:
			return Verdict{Class: Library, Rule: r, Reason: "rule " + ruleString(r)}
		}
	}
	owned, reason := c.owned(f, ff)
	if entryRule != nil && owned && len(c.rules.App) == 0 && !f.Span && !strings.HasPrefix(f.Function, "main.") {
		// A built-in entry rule names framework code: auto-detection must
		// not take it for the application's.
		owned = false
	}
	switch {
	case owned:
		return Verdict{Class: Application, EntryPoint: entryRule != nil, Rule: entryRule, Reason: reason}
	case entryRule != nil:
		return Verdict{Class: Entry, EntryPoint: true, Rule: entryRule, Reason: "rule " + ruleString(entryRule)}
	}
	return Verdict{Class: Library, Reason: reason}
}

func ruleString(r *Rule) string {
	k, p := r.Pattern()
	return r.Family + " " + k + " " + p
}

// owned decides whether f is application code, by the App prefixes when
// given, else by auto-detection.
func (c *Classifier) owned(f *traces.Frame, ff *fileFacts) (bool, string) {
	if len(c.rules.App) > 0 {
		for _, p := range c.rules.App {
			if strings.HasPrefix(f.Function, p) || (f.Span && f.Scope != "" && strings.HasPrefix(f.Scope, p)) {
				return true, "matches --app " + p
			}
		}
		if ff.app != "" {
			return true, "matches --app " + ff.app
		}
		if f.Span && f.SpanKind != traces.SpanKindClient && f.SpanKind != traces.SpanKindProducer && f.File == "" && !looksQualified(f.Function) {
			if lib, reason := librarySpan(f); lib {
				return false, reason
			}
			return true, "the service's own " + f.SpanKind.String() + " span"
		}
		return false, "matches no --app prefix"
	}
	return autoOwned(f, ff)
}

// librarySpan reports whether a span frame was made by an instrumentation
// library for its own layer (framework middleware, a router, a "request
// handler" span) rather than for the application's code: an INTERNAL (or
// unspecified) span from an instrumentation library's scope that names no
// code location. SERVER and CONSUMER spans stand for the request or
// message the service handles and stay the service's own.
func librarySpan(f *traces.Frame) (bool, string) {
	switch {
	case !f.Span, f.Code, f.SpanKind == traces.SpanKindServer, f.SpanKind == traces.SpanKindConsumer:
		return false, ""
	case isInstrumentationScope(f.Scope):
		return true, "made by instrumentation library " + f.Scope
	}
	return false, ""
}

// isInstrumentationScope reports whether an instrumentation scope name is
// that of an instrumentation library rather than of the application's own
// tracer. The OpenTelemetry projects name their instrumentation scopes
// after the instrumentation package: "@opentelemetry/instrumentation-express"
// (JavaScript), "go.opentelemetry.io/contrib/instrumentation/net/http/otelhttp"
// (Go), "io.opentelemetry.spring-webmvc-6.0" (Java agent),
// "opentelemetry.instrumentation.flask" (Python),
// "OpenTelemetry.Instrumentation.AspNetCore" (.NET) and
// "OpenTelemetry::Instrumentation::Rails" (Ruby); third-party
// instrumentation packages follow the same conventions or are named
// otelX (github.com/exaring/otelpgx, github.com/XSAM/otelsql). So: any
// scope under io.opentelemetry., or with an element (split at / . - _ : @)
// that is "instrumentation" or starts with "otel".
func isInstrumentationScope(scope string) bool {
	if scope == "" {
		return false
	}
	if strings.HasPrefix(scope, "io.opentelemetry.") {
		return true
	}
	for _, el := range strings.FieldsFunc(scope, func(r rune) bool {
		return r == '/' || r == '.' || r == '-' || r == '_' || r == ':' || r == '@'
	}) {
		el = strings.ToLower(el)
		if el == "instrumentation" || el == "instrumentations" || strings.HasPrefix(el, "otel") && el != "otel" {
			return true
		}
	}
	return false
}

// looksQualified reports whether a span's frame name looks like a code
// location (a package- or class-qualified function) rather than a free
// operation name.
func looksQualified(name string) bool {
	return strings.Contains(name, "/") && strings.Contains(name, ".") && !strings.Contains(name, " ")
}

var (
	// modVersionRe matches a module path segment with a version: the
	// module cache (…/pkg/mod/host/x@v1.2.3/) and -trimpath builds (host/x@v1.2.3/).
	modVersionRe = regexp.MustCompile(`@v[0-9]+\.[0-9]+\.[0-9]+[^/]*/`)
	// goroot matches a Go installation's source tree in a file path.
	gorootRe = regexp.MustCompile(`(^|/)go[^/]*/src/`)
)

// autoOwned implements application auto-detection (see DESIGN.md); ff
// holds the facts of f.File.
func autoOwned(f *traces.Frame, ff *fileFacts) (bool, string) {
	file := ff.path
	if f.Span {
		switch f.SpanKind {
		case traces.SpanKindClient, traces.SpanKindProducer:
			return false, "client span"
		}
		if f.File != "" {
			// code.file.path says where the span was made: a dependency's
			// span is not the application's, whatever its kind.
			if owned, reason := autoOwned(&traces.Frame{Function: f.Function, File: f.File}, ff); !owned && ff.lang != langUnknown {
				return false, reason
			}
		}
		if lib, reason := librarySpan(f); lib {
			return false, reason
		}
		return true, "the service's own " + f.SpanKind.String() + " span"
	}
	switch lang(f) {
	case langGo:
		switch {
		case ff.goDep != "":
			return false, ff.goDep
		case strings.HasPrefix(f.Function, "main."):
			return true, "package main"
		}
		pkg := goPackage(f.Function)
		switch {
		case gostd.IsPackage(pkg):
			if ff.goroot || file == "" || !strings.Contains(file, "/") || ff.trimmedStd {
				return false, "Go standard library (GOROOT)"
			}
			return false, "Go standard library"
		case otherReleaseStd(pkg, file, ff):
			return false, "Go standard library (GOROOT, a package of another Go release)"
		}
		return true, "Go code outside GOROOT, the module cache and vendor/"
	case langJVM:
		for _, p := range jvmLibraryPrefixes {
			if strings.HasPrefix(f.Function, p) {
				return false, "JVM platform or common library (" + p + ")"
			}
		}
		return true, "JVM code outside the platform and common libraries"
	case langPython:
		if ff.pyLib {
			return false, "Python standard library or installed package"
		}
		return true, "Python code outside site-packages and the standard library"
	case langNode:
		if ff.nodeLib {
			return false, "Node.js core or node_modules"
		}
		return true, "JavaScript outside node_modules and Node.js core"
	}
	return false, "unknown language and no --app prefix"
}

var pythonStdRe = regexp.MustCompile(`/lib/python[0-9.]+/`)

var jvmLibraryPrefixes = []string{
	"java.", "javax.", "jakarta.", "jdk.", "sun.", "com.sun.", "kotlin.", "kotlinx.", "scala.",
	"org.springframework.", "org.apache.", "io.netty.", "com.fasterxml.", "org.hibernate.",
	"com.google.", "io.grpc.", "reactor.", "io.micrometer.", "io.opentelemetry.", "org.eclipse.",
	"okhttp3.", "okio.", "com.zaxxer.", "org.slf4j.", "ch.qos.", "org.postgresql.", "com.mysql.",
}

type language uint8

const (
	langUnknown language = iota
	langGo
	langJVM
	langPython
	langNode
)

func lang(f *traces.Frame) language {
	file := f.File
	switch {
	case strings.HasSuffix(file, ".go") || strings.HasSuffix(file, ".s"):
		return langGo
	case strings.HasSuffix(file, ".java") || strings.HasSuffix(file, ".kt") || strings.HasSuffix(file, ".scala"):
		return langJVM
	case strings.HasSuffix(file, ".py"):
		return langPython
	case strings.HasSuffix(file, ".js") || strings.HasSuffix(file, ".ts") || strings.HasSuffix(file, ".mjs") ||
		strings.HasSuffix(file, ".cjs") || strings.HasPrefix(file, "node:"):
		return langNode
	case file == "":
		// Guess from the name: Go names carry import paths or main.
		if strings.HasPrefix(f.Function, "main.") || strings.Contains(f.Function, "/") || strings.Contains(f.Function, ".(*") || gostd.IsPackage(goPackage(f.Function)) {
			return langGo
		}
	}
	return langUnknown
}

// goPackage returns the import path of a Go function name: everything up
// to the first '.' after the last '/'.
func goPackage(fn string) string {
	if i := strings.IndexByte(fn, '['); i >= 0 {
		fn = fn[:i] // generic instantiation shapes may contain '/' and '.'
	}
	slash := strings.LastIndexByte(fn, '/')
	dot := strings.IndexByte(fn[slash+1:], '.')
	if dot < 0 {
		return fn
	}
	return fn[:slash+1+dot]
}

// otherReleaseStd reports whether pkg, which the list of this Go
// release's standard library lacks, is a standard-library package of
// another release: its file lies in a Go installation's source tree
// (…/go/src/PKG/file.go), is the -trimpath form of one (PKG/file.go) or
// is unknown, and its first element is one the standard library uses
// (crypto, net, internal…). A module path with no dot (permitoffice/…) is never taken
// for one: its first element is not the standard library's.
func otherReleaseStd(pkg, file string, ff *fileFacts) bool {
	first, _, _ := strings.Cut(pkg, "/")
	if pkg == "" || !gostd.IsTopLevel(first) {
		return false
	}
	if file == "" {
		return true // no file to tell by: the first element decides
	}
	dir := file[:max(strings.LastIndexByte(file, '/'), 0)]
	return ff.goroot && strings.HasSuffix(dir, "/src/"+pkg) || dir == pkg
}

// appRoot groups an application function under a readable prefix for the
// detection summary: Go "main" or the first three import path elements of
// a hosted module path; otherwise the first two name components.
func appRoot(f *traces.Frame, ff *fileFacts) string {
	if f.Span {
		if f.Service != "" {
			return "service " + f.Service
		}
		return "spans"
	}
	switch lang(f) {
	case langGo:
		pkg := goPackage(f.Function)
		if pkg == "main" {
			return "main"
		}
		// Common practice: hosted module paths have three elements
		// (host/owner/repo), others two (host/module), and a module
		// path with no dot (permitoffice) one.
		parts := strings.Split(pkg, "/")
		n := 2
		if !strings.Contains(parts[0], ".") {
			n = 1
		}
		switch parts[0] {
		case "github.com", "gitlab.com", "bitbucket.org", "golang.org":
			n = 3
		}
		if len(parts) > n {
			parts = parts[:n]
		}
		return strings.Join(parts, "/")
	case langPython, langNode:
		if ff.dir == "" {
			return ff.path
		}
		return ff.dir
	}
	parts := strings.SplitN(f.Function, ".", 4)
	if len(parts) > 3 {
		parts = parts[:3]
	}
	return strings.Join(parts, ".")
}
