package attribute

import (
	"sort"
	"strconv"
	"sync"

	"github.com/culprithq/culprit/callgraph"
	"github.com/culprithq/culprit/traces"
)

// Options control an attribution. The zero value charges exclusively,
// uses the source's default value and the default label names and
// finding thresholds.
type Options struct {
	// Value names the value type to charge (its type, or type/unit);
	// "" means the source's default. An unknown name also takes the default:
	// callers validate names with traces.Source.ValueIndex first.
	Value string
	// Inclusive charges every distinct application function above the
	// boundary instead of only the nearest one.
	Inclusive bool
	// EntryLabels are the label keys naming a path's entry point, first
	// present wins. Nil means DefaultEntryLabels.
	EntryLabels []string
	// RequestLabels are the label keys naming a profile sample's request.
	// Nil means DefaultRequestLabels.
	RequestLabels []string
	// ShowLiterals reports raw statements instead of fingerprints.
	ShowLiterals bool
	// DropRequestVectors leaves out of each Cause the per-request costs and
	// calls that NewSnapshot keeps for comparisons (16 bytes a root cause
	// and request), for callers that only report. Distributions are still
	// computed.
	DropRequestVectors bool
	// Thresholds for findings; zero fields take their defaults.
	Findings FindingOptions

	// shards, when positive, is how many goroutines charge a span source
	// (tests); 0 picks one per core for large sources.
	shards int
}

// Default label keys.
var (
	DefaultEntryLabels   = []string{"route", "http.route", "endpoint"}
	DefaultRequestLabels = []string{"request_id", "request", "trace_id"}
)

// NoAppFramePrefix starts the name of a bucket for boundary cost with no
// application frame above the boundary.
const NoAppFramePrefix = "(no application frame) "

// walkState is what the attribution walk knows at each tree node about
// the path from the root to it. Slices are indexed by tree node.
type walkState struct {
	t        *callgraph.Tree
	boundary []callgraph.NodeID // first database/network node on the path, 0 if none
	lastApp  []callgraph.NodeID // nearest application node above the boundary
	entry    []callgraph.NodeID // deepest entry-point node above the boundary
	entryApp []callgraph.NodeID // first application node below entry (or from the root)
	// refined holds, for nodes below a boundary whose generic system
	// ("sql") a more specific driver frame names, that frame. Trees cut at
	// boundaries have no such nodes, so it is mostly empty.
	refined map[callgraph.NodeID]traces.FrameID
}

func newWalkState(t *callgraph.Tree, c *Classifier) *walkState {
	n := t.Len()
	w := &walkState{
		t:        t,
		boundary: make([]callgraph.NodeID, n),
		lastApp:  make([]callgraph.NodeID, n),
		entry:    make([]callgraph.NodeID, n),
		entryApp: make([]callgraph.NodeID, n),
		refined:  map[callgraph.NodeID]traces.FrameID{},
	}
	// A child's ID is always greater than its parent's, so one pass in ID
	// order sees every parent before its children.
	for i := 1; i < n; i++ {
		id := callgraph.NodeID(i)
		p := t.Parent(id)
		f := t.Frame(id)
		class, entry := c.class(f)
		w.boundary[id], w.lastApp[id], w.entry[id], w.entryApp[id] =
			w.boundary[p], w.lastApp[p], w.entry[p], w.entryApp[p]
		if w.boundary[p] != 0 {
			// Below the boundary: only refine a generic system ("sql") with the driver's.
			if class == Database && isGenericSystem(w.system(c, p)) && !isGenericSystem(c.verdicts[f].System) {
				w.refined[id] = f
			} else if rf, ok := w.refined[p]; ok {
				w.refined[id] = rf
			}
			continue
		}
		switch {
		case class.IsBoundary():
			w.boundary[id] = id
			continue
		case entry:
			w.entry[id] = id
			w.entryApp[id] = 0
		}
		if class == Application {
			w.lastApp[id] = id
			if w.entryApp[id] == 0 {
				w.entryApp[id] = id
			}
		}
	}
	return w
}

// system returns the boundary system at node n ("" above any boundary):
// the boundary frame's, or a more specific driver's below it.
func (w *walkState) system(c *Classifier, n callgraph.NodeID) string {
	if f, ok := w.refined[n]; ok {
		return c.verdicts[f].System
	}
	if b := w.boundary[n]; b != 0 {
		return c.verdicts[w.t.Frame(b)].System
	}
	return ""
}

func isGenericSystem(s string) bool { return s == "" || s == "sql" }

type detailKey struct {
	kind      Kind
	system    string
	statement string
	peer      string
}

// entryKey caches a path's entry point: it depends only on the entry
// nodes the walk found, the path's first frame and its (interned) labels.
type entryKey struct {
	entry, entryApp callgraph.NodeID
	root            traces.FrameID
	labels          *traces.LabelSet
}

// entryState is one entry point being totalled.
type entryState struct {
	name  string
	idx   int // in order of creation
	total *EntryTotal
	reqs  reqSet
}

// Attribute charges the database and network cost of t's source to root
// causes, as DESIGN.md ("What attribution means") specifies.
func Attribute(t *callgraph.Tree, c *Classifier, opts Options) *Result {
	src := t.Source()
	vi, err := src.ValueIndex(opts.Value)
	if err != nil {
		vi = src.DefaultValue
	}
	entryLabels := opts.EntryLabels
	if entryLabels == nil {
		entryLabels = DefaultEntryLabels
	}
	requestLabels := opts.RequestLabels
	if requestLabels == nil {
		requestLabels = DefaultRequestLabels
	}
	fo := opts.Findings.withDefaults()
	spans := src.Kind == traces.Spans
	w := newWalkState(t, c)
	rec := newRecursionFinder(t, c, w)

	res := &Result{
		Inputs:        src.Inputs,
		Source:        src.Kind.String(),
		ValueType:     src.ValueTypes[vi],
		Sampled:       !spans,
		CPUOnly:       isCPUOnly(src, vi),
		Inclusive:     opts.Inclusive,
		DurationNanos: src.DurationNanos,
		App:           AppInfo{Prefixes: c.rules.App, Detected: c.Detected, RulesFiles: c.rules.Files},
		Warnings:      src.Warnings.Strings(),
		Notes:         inputNotes(src),
	}
	shared := &charger{
		t: t, c: c, src: src, w: w, opts: &opts, vi: vi, spans: spans,
		sampleIx: sampleIndex(src, vi), entryLabels: entryLabels,
	}
	if !spans {
		shared.reqs = requestIDs(src, requestLabels)
	}
	shards := chargeShards(src, spans, opts.shards)
	chs := make([]*charger, len(shards)-1)
	var wg sync.WaitGroup
	for i := range chs {
		chs[i] = shared.fork(rec)
		wg.Add(1)
		go func() {
			defer wg.Done()
			chs[i].run(shards[i], shards[i+1])
		}()
	}
	wg.Wait()
	ch := chs[0]
	for _, o := range chs[1:] {
		ch.merge(o)
	}
	res.Totals = ch.totals
	accs, entries, requests := ch.accs, ch.entries, ch.requests

	res.Totals.Requests = requests.n
	if spans {
		res.Totals.Other = max(0, res.Totals.Cost-res.Totals.Database-res.Totals.Network)
	} else {
		res.Totals.Other = res.Totals.Cost - res.Totals.Database - res.Totals.Network
	}
	denom := res.Totals.Database + res.Totals.Network
	for _, acc := range accs {
		acc.flush()
	}
	var scratch []float64 // per-request calls, when not kept
	for _, acc := range accs {
		if acc.cause.Cost == 0 && acc.recCost == 0 {
			continue
		}
		cs := acc.finish(src, denom, res.Totals.BoundarySamples, !spans, spans, !opts.DropRequestVectors, &scratch)
		if cs.Cost > 0 {
			res.Causes = append(res.Causes, cs)
		}
	}
	sortCauses(res.Causes)
	for _, es := range entries {
		es.total.Requests = es.reqs.n
		res.Entries = append(res.Entries, *es.total)
	}
	sort.Slice(res.Entries, func(i, j int) bool {
		a, b := res.Entries[i], res.Entries[j]
		if a.Database+a.Network != b.Database+b.Network {
			return a.Database+a.Network > b.Database+b.Network
		}
		if a.Cost != b.Cost {
			return a.Cost > b.Cost
		}
		return a.Entry < b.Entry
	})
	res.Findings = findings(res, accs, fo, denom)
	return res
}

func sortCauses(cs []*Cause) {
	sort.Slice(cs, func(i, j int) bool {
		a, b := cs[i], cs[j]
		if a.Cost != b.Cost {
			return a.Cost > b.Cost
		}
		if a.Function != b.Function {
			return a.Function < b.Function
		}
		if a.File != b.File {
			return a.File < b.File
		}
		return a.Line < b.Line
	})
}

// entryName names the entry point of a path: a label if present, else the
// application function just below the deepest entry-point frame, else
// that frame, else the path's first frame.
func entryName(src *traces.Source, t *callgraph.Tree, w *walkState, p *traces.Path, leaf callgraph.NodeID, keys []string) string {
	for _, k := range keys {
		if v, ok := p.Labels.Get(k); ok && v != "" {
			return v
		}
	}
	at := leaf
	if b := w.boundary[leaf]; b != 0 {
		at = b
	}
	switch {
	case w.entryApp[at] != 0 && (w.entry[at] == 0 || w.entryApp[at] >= w.entry[at]):
		return src.Frames[t.Frame(w.entryApp[at])].Function
	case w.entry[at] != 0:
		return src.Frames[t.Frame(w.entry[at])].Function
	}
	return src.Frames[p.Frames[0]].Function
}

// detail describes the boundary of a path: its statement fingerprint,
// operation or library function, and its peer.
func detail(src *traces.Source, t *callgraph.Tree, p *traces.Path, b callgraph.NodeID, system string, kind Kind, literals bool) detailKey {
	bf := &src.Frames[t.Frame(b)]
	dk := detailKey{kind: kind, system: system, statement: bf.Function}
	if p.Call == 0 {
		return dk
	}
	call := &src.Calls[p.Call]
	if call.System != "" {
		dk.system = call.System
	}
	dk.peer = call.Peer
	switch {
	case call.Connection:
		dk.kind = KindConnection
		dk.statement = "connection wait (" + bf.Function + ")"
	case call.Statement != "" && (literals || src.StatementsNormalized):
		dk.statement = call.Statement
	case call.Statement != "":
		dk.statement = Fingerprint(call.System, call.Statement).Text
	case call.Summary != "":
		dk.statement = call.Summary
	case call.Operation != "":
		dk.statement = call.Operation
	}
	return dk
}

// pathSystem is the system of a path's boundary: the walk's, refined by
// the first more specific database driver frame below the boundary on
// the path itself (a tree cut at boundaries holds no frames below them).
func pathSystem(c *Classifier, t *callgraph.Tree, w *walkState, p *traces.Path, leaf, b callgraph.NodeID) string {
	sys := w.system(c, leaf)
	if !isGenericSystem(sys) || p.Call != 0 {
		return sys
	}
	if d := t.Depth(b); d < len(p.Frames) {
		for _, f := range p.Frames[d:] {
			if v := c.Verdict(f); v.Class == Database && !isGenericSystem(v.System) {
				return v.System
			}
		}
	}
	return sys
}

// appAbove lists the distinct application functions above boundary node b,
// outermost first (one node per function: the nearest to the boundary).
func appAbove(t *callgraph.Tree, c *Classifier, b callgraph.NodeID) []callgraph.NodeID {
	src := t.Source()
	seen := map[string]bool{}
	var out []callgraph.NodeID
	for n := t.Parent(b); n != callgraph.Root; n = t.Parent(n) {
		f := t.Frame(n)
		if c.Verdict(f).Class != Application {
			continue
		}
		name := src.Frames[f].Function
		if !seen[name] {
			seen[name] = true
			out = append(out, n)
		}
	}
	for i, j := 0, len(out)-1; i < j; i, j = i+1, j-1 {
		out[i], out[j] = out[j], out[i]
	}
	return out
}

// sampleIndex returns the value index holding sample counts, -1 for spans
// (one span = one sample) or when the source has no count value.
func sampleIndex(src *traces.Source, vi int) int {
	if src.Kind == traces.Spans {
		return -1
	}
	if src.ValueTypes[vi].Unit == "count" {
		return vi
	}
	for i, vt := range src.ValueTypes {
		if vt.Unit == "count" && (vt.Type == "samples" || vt.Type == "goroutine" || vt.Type == "contentions") {
			return i
		}
	}
	return -1
}

func isCPUOnly(src *traces.Source, vi int) bool {
	if src.Kind != traces.Profile {
		return false
	}
	return src.ValueTypes[vi].Type == "cpu" || (src.PeriodType.Type == "cpu" && src.ValueTypes[vi].Type == "samples")
}

// requestIDs numbers the requests that profile labels (keys, first
// present wins) name, in order of first use, and returns each path's;
// paths that carry a request keep it.
func requestIDs(src *traces.Source, keys []string) []traces.RequestID {
	out := make([]traces.RequestID, src.Paths.Len())
	ids := map[string]traces.RequestID{}
	var lastSet *traces.LabelSet
	var lastID traces.RequestID
	for pi := range out {
		p := src.Paths.At(pi)
		switch {
		case p.Request != 0:
			out[pi] = p.Request
			continue
		case p.Labels == nil:
			continue
		case p.Labels == lastSet:
			out[pi] = lastID
			continue
		}
		var id traces.RequestID
		for _, k := range keys {
			if v, ok := p.Labels.Get(k); ok && v != "" {
				var seen bool
				if id, seen = ids[v]; !seen {
					id = traces.RequestID(len(ids) + 1)
					ids[v] = id
				}
				break
			}
		}
		out[pi], lastSet, lastID = id, p.Labels, id
	}
	return out
}

// distribution returns the median, p95 and max of xs (linear
// interpolation between order statistics).
func distribution(xs []float64) *Distribution {
	sort.Float64s(xs)
	return &Distribution{Median: Quantile(xs, 0.5), P95: Quantile(xs, 0.95), Max: xs[len(xs)-1]}
}

func itoa(n int64) string { return strconv.FormatInt(n, 10) }
