package attribute

import (
	"github.com/culprithq/culprit/callgraph"
	"github.com/culprithq/culprit/traces"
	"github.com/culprithq/culprit/traces/statement"
)

// This file is the attribution walk: the one place where the contract
// ("What attribution means" in the product design) is applied to paths.
// Every consumer — the ranking (charger.go), Explain, ChargeGraph and,
// next, a latency view over spans — reads the charge records it emits
// and never re-derives boundary, root cause, entry point or detail.

// chargeState says what a path is to the attribution.
type chargeState uint8

const (
	// chargeOther: the path reaches no database or network frame. Its
	// value is "other" cost (CPU work, idle, an application span's own
	// time); charge.app names the nearest application function on it.
	chargeOther chargeState = iota
	// chargeBoundary: the path's leaf is a boundary (profiles: the path
	// reaches a boundary frame; spans: the path is the client span
	// itself). Its value is charged to charge.causes.
	chargeBoundary
	// chargeInside: a span below a boundary span (a span the called
	// service or library made inside the outbound call). Its time is
	// already in the boundary span's; it is charged nowhere.
	chargeInside
)

// charge is the walk's verdict on one path of the source. The walk fills
// one per path (walker.next); a consumer adds it up. Fields that refer to
// tables (entry, detail) index the walker that filled it, so records of
// different walkers are only comparable through those tables.
//
// For a latency view over spans: a span path's record says whose time the
// span is — a boundary span's time goes to causes with detail; an
// application span's own time (its duration minus its children's) to
// app; any other span's own time to the entry point — under the same
// contract as the ranking, so the pieces of a request's critical path can
// be charged record by record.
type charge struct {
	path    int              // index of the path in the source
	request traces.RequestID // the path's request, 0 when unknown
	// entry is the path's entry point: an index into walker.entryNames.
	entry int32
	// total is set when the path's value is part of the source's total
	// cost: every profile sample; for spans, a request's outermost span
	// (its descendants' time lies inside it).
	total bool
	state chargeState

	// boundary is the first database or network node on the path (from
	// the root), 0 when state is chargeOther.
	boundary callgraph.NodeID
	// kind is KindDatabase or KindNetwork (state chargeBoundary only),
	// from the boundary frame's class.
	kind Kind
	// detail is the boundary's detail (system, statement fingerprint or
	// library function, peer, shared helper seen through): an index into
	// walker.details (state chargeBoundary only).
	detail int32
	// causes are the root-cause nodes (state chargeBoundary only): the
	// nearest application node above the boundary that is not a shared
	// helper, or, in the inclusive view, every distinct application
	// function above it, outermost first, one node each (the nearest to
	// the boundary). Empty: no application frame; the cost goes to the
	// bucket NoAppFramePrefix + the entry point's name. The slice belongs
	// to the walker and is valid until its next call; do not modify it.
	causes []callgraph.NodeID
	// via is the shared helper seen through (the application node right
	// above the boundary whose callers are the root causes), 0 if none.
	via callgraph.NodeID
	// app is the nearest application node on the path (above its boundary
	// if it has one), 0 if none: for chargeOther the function whose own
	// cost the path is.
	app callgraph.NodeID

	// cost is the path's value of the charged value type; samples its
	// sample count (1 per span, or per sample of a profile without a
	// count value); calls its outbound calls (spans: the calls value,
	// 1 per client span; 0 for profiles, which cannot count calls).
	cost, samples, calls int64
}

// walkState is what the walk knows at each tree node about the path from
// the root to it, computed in one pass. Slices are indexed by tree node.
type walkState struct {
	t *callgraph.Tree
	// at holds each node's nodeWalk: one array, so that a path's lookups
	// share a cache line (a million paths reach their leaves in no order
	// a cache keeps up with).
	at []nodeWalk
	// refined holds, for nodes below a boundary whose generic system
	// ("sql") a more specific driver frame names, that frame. Trees cut at
	// boundaries have no such nodes, so it is mostly empty.
	refined map[callgraph.NodeID]traces.FrameID
	// helpers are the shared helpers, by classifier function index (nil:
	// none); via holds, per node at or below a boundary, the helper seen
	// through there (0: none; nil when none is). Without helpers seen
	// through, lastApp is the nearest application node above the boundary.
	helpers map[int32]*helperInfo
	via     []callgraph.NodeID
}

// nodeWalk is what the walk knows at one node about the path from the
// root to it. A node below a boundary has its boundary's nodeWalk.
type nodeWalk struct {
	boundary callgraph.NodeID // first database/network node on the path, 0 if none
	lastApp  callgraph.NodeID // nearest application node above the boundary
	entry    callgraph.NodeID // deepest entry-point node above the boundary
	entryApp callgraph.NodeID // first application node below entry (or from the root)
}

func newWalkState(t *callgraph.Tree, c *Classifier, helpers HelperMode) *walkState {
	n := t.Len()
	w := &walkState{
		t:       t,
		at:      make([]nodeWalk, n),
		refined: map[callgraph.NodeID]traces.FrameID{},
	}
	// A child's ID is always greater than its parent's, so one pass in ID
	// order sees every parent before its children.
	for i := 1; i < n; i++ {
		id := callgraph.NodeID(i)
		p := t.Parent(id)
		f := t.Frame(id)
		class, entry := c.class(f)
		nw := w.at[p]
		if nw.boundary != 0 {
			w.at[id] = nw
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
			nw.boundary = id
		case entry:
			nw.entry, nw.entryApp = id, 0
		}
		if class == Application {
			nw.lastApp = id
			if nw.entryApp == 0 {
				nw.entryApp = id
			}
		}
		w.at[id] = nw
	}
	if hs := findHelpers(t, c, w, helpers); hs != nil {
		w.seeThroughHelpers(c, hs)
	}
	return w
}

// system returns the boundary system at node n ("" above any boundary):
// the boundary frame's, or a more specific driver's below it.
func (w *walkState) system(c *Classifier, n callgraph.NodeID) string {
	if f, ok := w.refined[n]; ok {
		return c.verdicts[f].System
	}
	if b := w.at[n].boundary; b != 0 {
		return c.verdicts[w.t.Frame(b)].System
	}
	return ""
}

func isGenericSystem(s string) bool { return s == "" || s == "sql" }

// walk holds what every walker of one attribution shares, read only.
type walk struct {
	t            *callgraph.Tree
	c            *Classifier
	src          *traces.Source
	w            *walkState
	vi, sampleIx int
	callsIx      int // calls/count of an execution trace, else -1
	spans        bool
	inclusive    bool
	literals     bool
	entryLabels  []string
	// reqs holds each path's request when profile labels name it
	// (requestIDs): numbered before the paths are shared out, so that all
	// walkers agree. Nil for span sources, whose paths carry theirs.
	reqs []traces.RequestID
}

// newWalk prepares the walk of t's source under opts. Request labels are
// numbered only when withRequests is set (the ranking needs them; Explain
// and ChargeGraph do not).
func newWalk(t *callgraph.Tree, c *Classifier, opts *Options, withRequests bool) *walk {
	src := t.Source()
	vi, err := src.ValueIndex(opts.Value)
	if err != nil {
		vi = src.DefaultValue
	}
	wk := &walk{
		t: t, c: c, src: src, w: newWalkState(t, c, opts.Helpers), vi: vi, sampleIx: sampleIndex(src, vi),
		callsIx: callsIndex(src), spans: src.Kind == traces.Spans, inclusive: opts.Inclusive, literals: opts.ShowLiterals,
		entryLabels: opts.EntryLabels,
	}
	if wk.entryLabels == nil {
		wk.entryLabels = DefaultEntryLabels
	}
	if !wk.spans && withRequests {
		keys := opts.RequestLabels
		if keys == nil {
			keys = DefaultRequestLabels
		}
		wk.reqs = requestIDs(src, keys)
	}
	return wk
}

// walker emits charge records for paths, one goroutine each. It interns
// entry points and details in order of first use, so a walker over a range
// of paths numbers them as a walker over all paths would have up to there
// (merge relies on it).
type walker struct {
	*walk
	entryOf    map[entryKey]int32 // cached entry point per leaf and labels
	lastEK     entryKey           // and the last one looked up
	lastEntry  int32
	entryIDs   map[string]int32 // entry point name → index
	entryNames []string         // index → name
	detailOf   map[uint64]int32 // (boundary frame, call) → detail ID
	detailIDs  map[detailKey]int32
	details    []detailKey                             // ID → detail
	causesOf   map[callgraph.NodeID][]callgraph.NodeID // inclusive causes per boundary
	one        [1]callgraph.NodeID
}

func (wk *walk) newWalker() *walker {
	return &walker{
		walk:      wk,
		entryOf:   map[entryKey]int32{},
		lastEntry: -1,
		entryIDs:  map[string]int32{},
		detailOf:  map[uint64]int32{},
		detailIDs: map[detailKey]int32{},
		causesOf:  map[callgraph.NodeID][]callgraph.NodeID{},
	}
}

type detailKey struct {
	kind      Kind
	system    string
	statement string
	peer      string
	via       string // the shared helper seen through, "" if none
}

// newDetail returns an empty tally of detail k.
func (k *detailKey) newDetail() *Detail {
	return &Detail{Kind: k.kind, System: k.system, Statement: k.statement, Peer: k.peer, Via: k.via}
}

// entryKey caches a path's entry point: it depends only on the entry
// nodes the walk found, the path's first frame (when there are none) and
// its (interned) labels.
type entryKey struct {
	entry, entryApp callgraph.NodeID
	root            traces.FrameID
	labels          *traces.LabelSet
}

// entryID returns the index of the entry point named name, adding it if
// it is new.
func (wr *walker) entryID(name string) int32 {
	id, ok := wr.entryIDs[name]
	if !ok {
		id = int32(len(wr.entryNames))
		wr.entryIDs[name] = id
		wr.entryNames = append(wr.entryNames, name)
	}
	return id
}

// detailID returns the ID of detail dk, adding it if it is new.
func (wr *walker) detailID(dk detailKey) (int32, bool) {
	did, ok := wr.detailIDs[dk]
	if !ok {
		did = int32(len(wr.details))
		wr.detailIDs[dk] = did
		wr.details = append(wr.details, dk)
	}
	return did, ok
}

// next fills r with the charge record of path pi.
func (wr *walker) next(pi int, r *charge) {
	src, t, w := wr.src, wr.t, wr.w
	path := src.Paths.At(pi)
	p := &path
	leaf := t.Leaf(pi)
	nw := w.at[leaf] // below a boundary, the boundary's
	*r = charge{path: pi, request: p.Request, cost: p.Values[wr.vi], samples: 1, app: nw.lastApp}
	if wr.callsIx >= 0 {
		r.samples = 0 // measured waits, not samples: requests count calls
	} else if wr.sampleIx >= 0 {
		r.samples = p.Values[wr.sampleIx]
	}
	if wr.reqs != nil {
		r.request = wr.reqs[pi]
	}
	b := nw.boundary
	ek := entryKey{entry: nw.entry, entryApp: nw.entryApp, labels: p.Labels}
	if ek.entry == 0 && ek.entryApp == 0 {
		// Only then does the first frame name the entry point: not
		// reading it spares a cache miss a path where paths share frames.
		ek.root = p.Frames[0]
	}
	if ek != wr.lastEK || wr.lastEntry < 0 {
		id, ok := wr.entryOf[ek]
		if !ok {
			id = wr.entryID(entryName(src, t, w, p, leaf, wr.entryLabels))
			wr.entryOf[ek] = id
		}
		wr.lastEK, wr.lastEntry = ek, id
	}
	r.entry = wr.lastEntry
	r.total = !wr.spans || len(p.Frames) == 1
	switch {
	case b == 0:
		r.state = chargeOther
		return
	case wr.spans && len(p.Frames) > t.Depth(b):
		r.state = chargeInside
		return
	}
	r.state, r.boundary = chargeBoundary, b
	r.kind = KindDatabase
	if wr.c.Verdict(t.Frame(b)).Class == Network {
		r.kind = KindNetwork
	}
	if wr.spans {
		r.calls = 1
		if len(p.Values) > 1 {
			r.calls = p.Values[1]
		}
	} else if wr.callsIx >= 0 {
		r.calls = p.Values[wr.callsIx]
	}
	sys := pathSystem(wr.c, t, w, p, leaf, b)
	via := ""
	if w.via != nil {
		if r.via = w.via[b]; r.via != 0 {
			via = src.Frames[t.Frame(r.via)].Function
		}
	}
	dkey := uint64(uint32(t.Frame(b)))<<32 | uint64(uint32(p.Call))
	did, ok := wr.detailOf[dkey]
	if !ok || wr.details[did].system != sys || wr.details[did].via != via {
		dk := detail(src, t, p, b, sys, r.kind, wr.literals)
		dk.via = via
		if did, ok = wr.detailID(dk); !ok {
			wr.detailOf[dkey] = did // the first system and helper seen; others are looked up by value
		}
	}
	r.detail = did
	if wr.inclusive {
		causes, ok := wr.causesOf[b]
		if !ok {
			from := t.Parent(b)
			if r.via != 0 {
				from = nw.lastApp // the helpers below the root cause are seen through
			}
			causes = appFrom(t, wr.c, from)
			wr.causesOf[b] = causes
		}
		r.causes = causes
	} else if ra := nw.lastApp; ra != 0 {
		wr.one[0] = ra
		r.causes = wr.one[:]
	}
}

// site returns the call site of root-cause node n: its frame, or 0 when
// the frame knows no file and line (spans without code.* attributes).
func (wk *walk) site(n callgraph.NodeID) traces.FrameID {
	f := wk.t.Frame(n)
	if fr := &wk.src.Frames[f]; fr.File == "" && fr.Line == 0 {
		return 0
	}
	return f
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
	if n := w.entryNode(leaf); n != 0 {
		return src.Frames[t.Frame(n)].Function
	}
	return src.Frames[p.Frames[0]].Function
}

// entryNode returns the node that names the entry point of the path whose
// tree leaf is leaf, labels aside: the application function just below the
// deepest entry-point frame above its boundary, else that frame; 0 if
// there is neither (the path's first frame names it).
func (w *walkState) entryNode(leaf callgraph.NodeID) callgraph.NodeID {
	nw := &w.at[leaf] // below a boundary, the boundary's
	if nw.entryApp != 0 && (nw.entry == 0 || nw.entryApp >= nw.entry) {
		return nw.entryApp
	}
	return nw.entry
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
		dk.statement = statement.Of(call.System, call.Statement).Text
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

// appFrom lists the distinct application functions at node from and
// above it, outermost first (one node per function: the deepest).
func appFrom(t *callgraph.Tree, c *Classifier, from callgraph.NodeID) []callgraph.NodeID {
	src := t.Source()
	seen := map[string]bool{}
	var out []callgraph.NodeID
	for n := from; n != callgraph.Root; n = t.Parent(n) {
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
