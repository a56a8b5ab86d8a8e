package attribute

import (
	"fmt"
	"slices"
	"strings"

	"github.com/culprithq/culprit/callgraph"
	"github.com/culprithq/culprit/traces"
)

// HelperMode says whether shared access helpers are detected. Helpers
// named in the rules (Rules.Helpers) are seen through in every mode.
type HelperMode uint8

// Helper modes.
const (
	// HelpersAuto detects shared helpers (see SharedHelper) and sees
	// through them and the named ones. The default.
	HelpersAuto HelperMode = iota
	// HelpersOff sees through the named helpers only.
	HelpersOff
)

// HelperModes are the names of the helper modes, for flags.
var HelperModes = []string{"auto", "off"}

// ParseHelperMode parses "auto" or "off".
func ParseHelperMode(s string) (HelperMode, error) {
	for i, n := range HelperModes {
		if s == n {
			return HelperMode(i), nil
		}
	}
	return 0, fmt.Errorf("unknown helper mode %q; valid: %s", s, strings.Join(HelperModes, ", "))
}

// Detection thresholds of shared helpers (common practice, chosen for
// this tool: a function that one package's code calls is that package's
// design; one that several packages go through is plumbing).
const (
	helperMinCallers  = 3
	helperMinPackages = 2
)

// SharedHelper is an application function that the attribution saw
// through: the service's own access layer (an instrumented SQL wrapper, a
// repository base type) right above database or network calls. Its
// callers are charged instead, and the call's detail names it ("via").
//
// A function is detected as a shared helper when it is the nearest
// application frame above a boundary on some path and is called, on the
// paths that reach a boundary through it, by at least 3 distinct
// application functions (not entry points such as routes or main) of at
// least 2 packages other than its own, and it is right above the
// boundary at least as often (in the calling-context tree) as it calls
// other application functions: a helper calls out itself. A
// function called from one package's code stays a root cause.
type SharedHelper struct {
	Function string `json:"function"`
	// Named is set when the rules (or --helper) named it; it was not
	// necessarily detected.
	Named bool `json:"named,omitempty"`
	// Callers and Packages count the application functions of other
	// packages that call it on paths reaching a boundary, and their
	// packages.
	Callers  int `json:"callers"`
	Packages int `json:"packages"`
	// Cost is the cost charged through it to its callers.
	Cost int64 `json:"cost"`
}

// helperInfo is what the walk knows of one helper function.
type helperInfo struct {
	named             bool
	callers, packages int
}

// isNamedHelper reports whether function fn is named by one of the
// helper names: the whole function name, or a prefix of it that ends at
// an identifier boundary ('.' or '/' follows or ends the name).
func isNamedHelper(fn string, names []string) bool {
	for _, h := range names {
		if !strings.HasPrefix(fn, h) || h == "" {
			continue
		}
		if len(fn) == len(h) || strings.HasSuffix(h, ".") || strings.HasSuffix(h, "/") || fn[len(h)] == '.' {
			return true
		}
	}
	return false
}

// packageOf returns the package (Go import path, JVM/Python package,
// module) of frame f's function: what tells callers of different parts
// of a code base apart.
func packageOf(f *traces.Frame) string {
	fn := f.Function
	if strings.IndexByte(fn, '.') < 0 {
		return "" // a bare name (a JavaScript function, a span name)
	}
	if lang(f) == langGo || strings.IndexByte(fn, '/') >= 0 {
		return goPackage(fn)
	}
	// Dotted names: drop the function, then a class or receiver type.
	i := strings.LastIndexByte(fn, '.')
	if i < 0 {
		return ""
	}
	pkg := fn[:i]
	if j := strings.LastIndexByte(pkg, '.'); j >= 0 && j+1 < len(pkg) {
		if c := pkg[j+1]; c == '(' || (c >= 'A' && c <= 'Z') {
			pkg = pkg[:j]
		}
	}
	return pkg
}

// findHelpers returns the shared helpers of the tree by classifier
// function index (nil when there are none). w must have its first pass
// done: lastApp is still the nearest application node.
func findHelpers(t *callgraph.Tree, c *Classifier, w *walkState, mode HelperMode) map[int32]*helperInfo {
	out := map[int32]*helperInfo{}
	if names := c.rules.Helpers; len(names) > 0 {
		for fn, name := range c.fnNames {
			if isNamedHelper(name, names) {
				out[int32(fn)] = &helperInfo{named: true}
			}
		}
	}
	if mode == HelpersAuto {
		for hf, found := range detectHelpers(t, c, w) {
			if hi := out[hf]; hi != nil {
				hi.callers, hi.packages = found.callers, found.packages
			} else {
				out[hf] = found
			}
		}
	}
	if len(out) == 0 {
		return nil
	}
	return out
}

// detectHelpers returns the application functions that the walk state
// w shows to be shared helpers (see SharedHelper), by classifier
// function index.
func detectHelpers(t *callgraph.Tree, c *Classifier, w *walkState) map[int32]*helperInfo {
	src := t.Source()
	// Packages are numbered as they are met (from 1): pkgs holds each
	// function's, 0 while not yet known.
	pkgs := make([]int32, len(c.fnNames))
	pkgIDs := map[string]int32{}
	pkgOf := func(n callgraph.NodeID) int32 {
		fn := c.fn[t.Frame(n)]
		if pkgs[fn] == 0 {
			name := packageOf(&src.Frames[t.Frame(n)])
			id, ok := pkgIDs[name]
			if !ok {
				id = int32(len(pkgIDs) + 1)
				pkgIDs[name] = id
			}
			pkgs[fn] = id
		}
		return pkgs[fn]
	}
	// The caller of each application node right above a boundary: the
	// nearest application node above it of another function, as
	// helper<<32 | caller (classifier function indices). Distinct pairs
	// are few (helpers times their callers) next to the boundary nodes
	// that yield them: they are kept once each. near counts, per
	// function, its nodes right above a boundary.
	var pairs []uint64
	seen := newEdgeSet(len(c.fnNames))
	done := make([]uint64, (t.Len()+63)/64) // bit set of helper nodes seen
	near := make([]int32, len(c.fnNames))
	for i := 1; i < t.Len(); i++ {
		n := callgraph.NodeID(i)
		if w.at[n].boundary != n {
			continue
		}
		h := w.at[n].lastApp
		if h == 0 || done[h/64]&(1<<(h%64)) != 0 {
			continue
		}
		done[h/64] |= 1 << (h % 64)
		hf := c.fn[t.Frame(h)]
		near[hf]++
		p := w.at[t.Parent(h)].lastApp
		for p != 0 && c.fn[t.Frame(p)] == hf {
			p = w.at[t.Parent(p)].lastApp
		}
		if p == 0 || isEntry(c, t, p) || pkgOf(p) == pkgOf(h) {
			continue
		}
		pf := c.fn[t.Frame(p)]
		if pair := uint64(uint32(hf))<<32 | uint64(uint32(pf)); seen.add(hf, pf, pair) {
			pairs = append(pairs, pair)
		}
	}
	// Candidates: callers and their packages, per function (a run of
	// pairs).
	slices.Sort(pairs)
	found := map[int32]*helperInfo{}
	pkgSeen := make([]int32, len(pkgIDs)+1) // by package ID: the run (from 1) that last counted it
	for i, run := 0, int32(1); i < len(pairs); run++ {
		hf := int32(pairs[i] >> 32)
		j, np := i, 0
		for ; j < len(pairs) && int32(pairs[j]>>32) == hf; j++ {
			if pk := pkgs[int32(uint32(pairs[j]))]; pkgSeen[pk] != run {
				pkgSeen[pk] = run
				np++
			}
		}
		callers := j - i
		i = j
		if callers >= helperMinCallers && np >= helperMinPackages {
			found[hf] = &helperInfo{callers: callers, packages: np}
		}
	}
	if len(found) == 0 {
		return nil // the common case: no second pass
	}
	// How often each candidate calls another application function above a
	// boundary (once per calling node and callee node), against how often
	// it is right above one: an access helper calls out itself, it does
	// not merely end some paths of code that calls further.
	candidate := make([]bool, len(c.fnNames))
	for hf := range found {
		candidate[hf] = true
	}
	calling := make([]int32, len(c.fnNames))
	for i := 1; i < t.Len(); i++ {
		n := callgraph.NodeID(i)
		if nw := &w.at[n]; nw.boundary != 0 || nw.lastApp != n {
			continue // not an application node above every boundary
		}
		if p := w.at[t.Parent(n)].lastApp; p != 0 {
			if pf := c.fn[t.Frame(p)]; candidate[pf] && pf != c.fn[t.Frame(n)] {
				calling[pf]++
			}
		}
	}
	for hf := range found {
		if calling[hf] > near[hf] {
			delete(found, hf)
		}
	}
	return found
}

// seeThroughHelpers moves each boundary's root cause from a chain of
// helpers right above it to the nearest application node above them
// that is not a helper, and records the nearest helper in w.via. A
// boundary with no such node above the helpers, or only an entry point
// (a route), keeps its nearest helper as the root cause. Nodes below a
// boundary take their boundary's.
func (w *walkState) seeThroughHelpers(c *Classifier, helpers map[int32]*helperInfo) {
	t := w.t
	w.helpers = helpers
	isHelper := make([]bool, len(c.fnNames))
	for fn := range helpers {
		isHelper[fn] = true
	}
	helper := func(n callgraph.NodeID) bool { return isHelper[c.fn[t.Frame(n)]] }
	// top is, per node above a boundary, the nearest application node at
	// or above it that is not a helper: where a chain of helpers right
	// above a boundary ends. One pass in ID order (parents first).
	top := make([]callgraph.NodeID, t.Len())
	for i := 1; i < t.Len(); i++ {
		id := callgraph.NodeID(i)
		b := w.at[id].boundary
		if b == 0 {
			top[id] = top[t.Parent(id)]
			if class, _ := c.class(t.Frame(id)); class == Application && !isHelper[c.fn[t.Frame(id)]] {
				top[id] = id
			}
			continue
		}
		if b != id {
			if w.via != nil {
				w.at[id].lastApp, w.via[id] = w.at[b].lastApp, w.via[b]
			}
			continue
		}
		h := w.at[b].lastApp
		if h == 0 || !helper(h) {
			continue
		}
		if n := top[t.Parent(b)]; n != 0 && !isEntry(c, t, n) {
			if w.via == nil {
				// The first helper seen through: nodes before b hold none.
				w.via = make([]callgraph.NodeID, t.Len())
			}
			w.at[b].lastApp, w.via[b] = n, h
		}
	}
}

// isEntry reports whether node n is an entry point (a route span, main):
// never a caller a helper is seen through to.
func isEntry(c *Classifier, t *callgraph.Tree, n callgraph.NodeID) bool {
	_, entry := c.class(t.Frame(n))
	return entry
}

// sharedHelpers lists the helpers seen through, with the cost charged
// through each (cost by classifier function index), by cost descending,
// then name.
func sharedHelpers(c *Classifier, helpers map[int32]*helperInfo, cost map[int32]int64) []SharedHelper {
	var out []SharedHelper
	for fn, v := range cost {
		hi := helpers[fn]
		out = append(out, SharedHelper{Function: c.fnNames[fn], Named: hi.named, Callers: hi.callers, Packages: hi.packages, Cost: v})
	}
	slices.SortFunc(out, func(a, b SharedHelper) int {
		if a.Cost != b.Cost {
			if a.Cost > b.Cost {
				return -1
			}
			return 1
		}
		return strings.Compare(a.Function, b.Function)
	})
	return out
}
