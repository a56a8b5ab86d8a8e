package attribute

import (
	"cmp"
	"math"
	"math/bits"
	"runtime"
	"slices"
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

// reqSet is a set of request IDs, which are small dense integers.
type reqSet struct {
	bits []uint64
	n    int
}

// union adds the members of o.
func (s *reqSet) union(o *reqSet) {
	if len(o.bits) > len(s.bits) {
		s.bits = append(s.bits, make([]uint64, len(o.bits)-len(s.bits))...)
	}
	s.n = 0
	for i := range s.bits {
		if i < len(o.bits) {
			s.bits[i] |= o.bits[i]
		}
		s.n += bits.OnesCount64(s.bits[i])
	}
}

func (s *reqSet) add(r traces.RequestID) {
	w := int(r) >> 6
	if w >= len(s.bits) {
		s.bits = append(s.bits, make([]uint64, w+1-len(s.bits)+len(s.bits)/2)...)
	}
	if b := uint64(1) << (r & 63); s.bits[w]&b == 0 {
		s.bits[w] |= b
		s.n++
	}
}

// causeAcc accumulates one root cause while paths are charged.
// reqStat is a root cause's tally in one request: calls (spans) or
// samples, and charged cost.
type reqStat struct{ n, cost int64 }

type causeAcc struct {
	cause   *Cause
	details []*Detail                // by detail ID (see Attribute); nil: none
	entries []*EntryShare            // by entryState.idx; nil: none
	sites   map[traces.FrameID]int64 // the root cause's frame: file and line
	// perReq tallies each request; stmtReq each (detail, request): one
	// entry per run of paths until flush merges them, sorted by request
	// and by detail and request.
	perReq    []reqTally
	stmtReq   [][]stmtTally // by detail ID
	recursion int           // deepest recursion seen, for recursive-access
	recCost   int64

	// The current run of paths of one request and one call site, added to
	// the maps when the request or the site changes (flush): the paths of
	// a trace come together, and a map update per path is what the walk
	// spent most of its time on.
	run      reqStat
	runReq   traces.RequestID
	runStmts []stmtCalls
	runSite  traces.FrameID
	runSiteV int64
}

// reqTally is a root cause's tally in one request (16 bytes: there is
// one per root cause and request).
type reqTally struct {
	cost int64
	req  traces.RequestID
	n    int32 // calls or samples, saturating
}

// stmtTally is the calls of one detail in one request (8 bytes).
type stmtTally struct {
	req   traces.RequestID
	calls int32 // saturating
}

// sat32 converts n to int32, saturating.
func sat32(n int64) int32 { return int32(min(n, math.MaxInt32)) }

// stmtCalls is a detail's call count within one request.
type stmtCalls struct {
	did   int32
	calls int64
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
	}
	shared := &charger{
		t: t, c: c, src: src, w: w, opts: &opts, vi: vi, spans: spans,
		sampleIx: sampleIndex(src, vi), entryLabels: entryLabels, requestLabels: requestLabels,
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

// charger charges paths to root causes. Attribute runs one per shard of
// the paths (a range of whole requests) and merges them in order: IDs are
// given in order of first use, so the merged state is the one a single
// charger over all the paths would have.
type charger struct {
	// Shared, read only.
	t                          *callgraph.Tree
	c                          *Classifier
	src                        *traces.Source
	w                          *walkState
	opts                       *Options
	vi, sampleIx               int
	spans                      bool
	entryLabels, requestLabels []string

	rec           *recursionFinder // a copy per charger (it caches)
	totals        Totals
	accs          map[string]*causeAcc
	accOf         []*causeAcc              // root-cause frame → its accumulator
	entryOf       map[entryKey]*entryState // cached entry point per leaf and labels
	lastEK        entryKey                 // and the last one looked up
	lastES        *entryState
	entries       map[string]*entryState // by name
	entryList     []*entryState          // by idx
	detailOf      map[uint64]int32       // (boundary frame, call) → detail ID
	detailIDs     map[detailKey]int32    // detail → ID
	detailList    []detailKey            // ID → detail
	requests      reqSet
	inclusiveKeys map[callgraph.NodeID][]callgraph.NodeID
	labelReq      map[string]traces.RequestID
	reqNames      []string
}

// fork returns a charger with ch's shared fields and empty state.
func (ch *charger) fork(rec *recursionFinder) *charger {
	return &charger{
		t: ch.t, c: ch.c, src: ch.src, w: ch.w, opts: ch.opts, vi: ch.vi, sampleIx: ch.sampleIx, spans: ch.spans,
		entryLabels: ch.entryLabels, requestLabels: ch.requestLabels,
		rec:           rec.fork(),
		accs:          map[string]*causeAcc{},
		accOf:         make([]*causeAcc, len(ch.src.Frames)),
		entryOf:       map[entryKey]*entryState{},
		entries:       map[string]*entryState{},
		detailOf:      map[uint64]int32{},
		detailIDs:     map[detailKey]int32{},
		inclusiveKeys: map[callgraph.NodeID][]callgraph.NodeID{},
		labelReq:      map[string]traces.RequestID{},
	}
}

// newEntry adds the entry point named name.
func (ch *charger) newEntry(name string) *entryState {
	es := &entryState{name: name, idx: len(ch.entryList), total: &EntryTotal{Entry: name}}
	ch.entries[name] = es
	ch.entryList = append(ch.entryList, es)
	return es
}

// detailID returns the ID of detail dk, adding it if it is new.
func (ch *charger) detailID(dk detailKey) (int32, bool) {
	did, ok := ch.detailIDs[dk]
	if !ok {
		did = int32(len(ch.detailList))
		ch.detailIDs[dk] = did
		ch.detailList = append(ch.detailList, dk)
	}
	return did, ok
}

// merge adds the state of o, which charged the paths after ch's, to ch.
// Details and entry points new to ch get the next IDs in o's order of
// first use, as if ch had charged o's paths itself.
func (ch *charger) merge(o *charger) {
	t := &ch.totals
	t.Cost += o.totals.Cost
	t.Samples += o.totals.Samples
	t.Database += o.totals.Database
	t.Network += o.totals.Network
	t.Unattributed += o.totals.Unattributed
	t.BoundarySamples += o.totals.BoundarySamples
	ch.requests.union(&o.requests)
	didMap := make([]int32, len(o.detailList))
	for i, dk := range o.detailList {
		didMap[i], _ = ch.detailID(dk)
	}
	idxMap := make([]int, len(o.entryList))
	for i, oe := range o.entryList {
		es := ch.entries[oe.name]
		if es == nil {
			es = ch.newEntry(oe.name)
		}
		es.total.Cost += oe.total.Cost
		es.total.Database += oe.total.Database
		es.total.Network += oe.total.Network
		es.reqs.union(&oe.reqs)
		idxMap[i] = es.idx
	}
	for name, oa := range o.accs {
		oa.flushSite()
		oa.flushRequest()
		a := ch.accs[name]
		if a == nil {
			a = accFor(ch.accs, name, oa.cause.NoAppFrame)
			a.cause.Kind = oa.cause.Kind
		}
		a.mergeFrom(oa, didMap, idxMap)
	}
}

// run charges paths lo to hi-1.
func (ch *charger) run(lo, hi int) {
	for pi := lo; pi < hi; pi++ {
		ch.charge(pi)
	}
}

// chargeShards splits the paths into ranges of whole requests, one per
// core for large span sources (whose paths come request by request), else
// one: it returns the ranges' bounds.
func chargeShards(src *traces.Source, spans bool, want int) []int {
	n := src.Paths.Len()
	k := want
	if k == 0 {
		k = min(runtime.GOMAXPROCS(0), 8)
		if n < 100_000 {
			k = 1
		}
	}
	if !spans || k < 2 {
		return []int{0, n}
	}
	bounds := []int{0}
	for i := 1; i < k; i++ {
		at := max(n*i/k, bounds[len(bounds)-1])
		for at < n && at > 0 && src.Paths.At(at).Request == src.Paths.At(at-1).Request {
			at++
		}
		bounds = append(bounds, at)
	}
	return append(bounds, n)
}

// charge charges path pi.
func (ch *charger) charge(pi int) {
	src, t, w, c, opts, spans := ch.src, ch.t, ch.w, ch.c, ch.opts, ch.spans
	vi, sampleIx, rec := ch.vi, ch.sampleIx, ch.rec
	path := src.Paths.At(pi)
	p := &path
	leaf := t.Leaf(pi)
	val := p.Values[vi]
	samples := int64(1)
	if sampleIx >= 0 {
		samples = p.Values[sampleIx]
	}
	req := p.Request
	if req == 0 && !spans {
		req = requestFromLabels(p.Labels, ch.requestLabels, ch.labelReq, &ch.reqNames)
	}
	if req != 0 {
		ch.requests.add(req)
	}
	at := leaf
	if b := w.boundary[leaf]; b != 0 {
		at = b
	}
	ek := entryKey{w.entry[at], w.entryApp[at], p.Frames[0], p.Labels}
	es := ch.lastES
	if ek != ch.lastEK || es == nil {
		es = ch.entryOf[ek]
	}
	if es == nil {
		name := entryName(src, t, w, p, leaf, ch.entryLabels)
		if es = ch.entries[name]; es == nil {
			es = ch.newEntry(name)
		}
		ch.entryOf[ek] = es
	}
	ch.lastEK, ch.lastES = ek, es
	et := es.total
	if req != 0 {
		es.reqs.add(req)
	}
	rootPath := len(p.Frames) == 1
	if !spans || rootPath {
		ch.totals.Cost += val
		ch.totals.Samples += samples
		if !spans || rootPath {
			et.Cost += val
		}
	}
	b := w.boundary[leaf]
	if b == 0 || (spans && len(p.Frames) > t.Depth(b)) {
		// No boundary (other cost), or a span inside an outbound call.
		return
	}
	kind := KindDatabase
	if c.Verdict(t.Frame(b)).Class == Network {
		kind = KindNetwork
	}
	if kind == KindDatabase {
		ch.totals.Database += val
		et.Database += val
	} else {
		ch.totals.Network += val
		et.Network += val
	}
	ch.totals.BoundarySamples += samples
	calls := int64(0)
	if spans {
		calls = 1
		if len(p.Values) > 1 {
			calls = p.Values[1]
		}
	}
	sys := pathSystem(c, t, w, p, leaf, b)
	dkey := uint64(uint32(t.Frame(b)))<<32 | uint64(uint32(p.Call))
	did, ok := ch.detailOf[dkey]
	if !ok || ch.detailList[did].system != sys {
		if did, ok = ch.detailID(detail(src, t, p, b, sys, kind, opts.ShowLiterals)); !ok {
			ch.detailOf[dkey] = did // the first system seen; others are looked up by value
		}
	}
	dk := &ch.detailList[did]

	var causes []callgraph.NodeID
	if opts.Inclusive {
		var ok bool
		if causes, ok = ch.inclusiveKeys[b]; !ok {
			causes = appAbove(t, c, b)
			ch.inclusiveKeys[b] = causes
		}
	} else if ra := w.lastApp[b]; ra != 0 {
		causes = []callgraph.NodeID{ra}
	}
	if len(causes) == 0 {
		ch.totals.Unattributed += val
		acc := accFor(ch.accs, NoAppFramePrefix+es.name, true)
		acc.add(val, samples, calls, kind, did, dk, es, 0, req)
		return
	}
	recFn, depth := rec.at(b)
	for _, ra := range causes {
		acc := ch.accOf[t.Frame(ra)]
		if acc == nil {
			acc = accFor(ch.accs, src.Frames[t.Frame(ra)].Function, false)
			ch.accOf[t.Frame(ra)] = acc
		}
		site := t.Frame(ra)
		if fr := &src.Frames[site]; fr.File == "" && fr.Line == 0 {
			site = 0 // no call site known (spans without code.* attributes)
		}
		acc.add(val, samples, calls, kind, did, dk, es, site, req)
		if recFn != "" && recFn == acc.cause.Function {
			acc.recCost += val
			if depth > acc.recursion {
				acc.recursion = depth
			}
		}
	}
	if recFn != "" && !containsFunc(src, t, causes, recFn) {
		// The recursive function is above the root cause: credit it too.
		acc := ch.accs[recFn]
		if acc == nil {
			acc = accFor(ch.accs, recFn, false)
			acc.cause.Kind = kind
		}
		acc.recCost += val
		if depth > acc.recursion {
			acc.recursion = depth
		}
	}
}

func containsFunc(src *traces.Source, t *callgraph.Tree, ns []callgraph.NodeID, fn string) bool {
	for _, n := range ns {
		if src.Frames[t.Frame(n)].Function == fn {
			return true
		}
	}
	return false
}

func accFor(accs map[string]*causeAcc, fn string, noApp bool) *causeAcc {
	acc := accs[fn]
	if acc == nil {
		acc = &causeAcc{
			cause: &Cause{Function: fn, NoAppFrame: noApp},
			sites: map[traces.FrameID]int64{},
		}
		accs[fn] = acc
	}
	return acc
}

// add charges one path: detail ID did (dk), entry point es, and the root
// cause's frame site (0 for a no-application-frame bucket).
func (a *causeAcc) add(val, samples, calls int64, kind Kind, did int32, dk *detailKey, es *entryState, site traces.FrameID, req traces.RequestID) {
	c := a.cause
	c.Cost += val
	c.Samples += samples
	c.Calls += calls
	if kind == KindDatabase {
		c.Database += val
	} else {
		c.Network += val
	}
	pd := slot(&a.details, int(did))
	if *pd == nil {
		*pd = &Detail{Kind: dk.kind, System: dk.system, Statement: dk.statement, Peer: dk.peer}
	}
	d := *pd
	d.Cost += val
	d.Calls += calls
	d.Samples += samples
	pe := slot(&a.entries, es.idx)
	if *pe == nil {
		*pe = &EntryShare{Entry: es.name}
	}
	e := *pe
	e.Cost += val
	e.Calls += calls
	if site != 0 {
		if site != a.runSite {
			a.flushSite()
			a.runSite = site
		}
		a.runSiteV += val
	}
	if req != 0 {
		if req != a.runReq {
			a.flushRequest()
			a.runReq = req
		}
		n := calls
		if n == 0 {
			n = samples
		}
		a.run.n += n
		a.run.cost += val
		for i := range a.runStmts {
			if a.runStmts[i].did == did {
				a.runStmts[i].calls += calls
				return
			}
		}
		a.runStmts = append(a.runStmts, stmtCalls{did, calls})
	}
}

// mergeFrom adds o, an accumulator of another charger whose detail IDs
// and entry indices map to a's through didMap and idxMap.
func (a *causeAcc) mergeFrom(o *causeAcc, didMap []int32, idxMap []int) {
	a.flushSite()
	a.flushRequest()
	c, oc := a.cause, o.cause
	c.Cost += oc.Cost
	c.Samples += oc.Samples
	c.Calls += oc.Calls
	c.Database += oc.Database
	c.Network += oc.Network
	mergeSlots(&a.details, o.details, func(i int) int { return int(didMap[i]) }, func(into, from *Detail) {
		into.Cost += from.Cost
		into.Calls += from.Calls
		into.Samples += from.Samples
	})
	mergeSlots(&a.entries, o.entries, func(i int) int { return idxMap[i] }, func(into, from *EntryShare) {
		into.Cost += from.Cost
		into.Calls += from.Calls
	})
	for site, v := range o.sites {
		a.sites[site] += v
	}
	a.perReq = append(a.perReq, o.perReq...)
	for did, sts := range o.stmtReq {
		p := &a.stmtReq
		if nd := int(didMap[did]); nd < len(*p) {
			(*p)[nd] = append((*p)[nd], sts...)
		} else if len(sts) > 0 {
			*p = append(*p, make([][]stmtTally, nd+1-len(*p))...)
			(*p)[nd] = sts
		}
	}
	a.recursion = max(a.recursion, o.recursion)
	a.recCost += o.recCost
}

// slot returns element i of *s, growing *s with nils as needed.
func slot[T any](s *[]*T, i int) **T {
	if i >= len(*s) {
		*s = append(*s, make([]*T, i+1-len(*s))...)
	}
	return &(*s)[i]
}

// mergeSlots adds each non-nil element i of src to element index(i) of
// *dst with add, or puts a copy there when it is nil.
func mergeSlots[T any](dst *[]*T, src []*T, index func(int) int, add func(into, from *T)) {
	for i, x := range src {
		if x == nil {
			continue
		}
		p := slot(dst, index(i))
		if *p == nil {
			c := *x
			*p = &c
			continue
		}
		add(*p, x)
	}
}

// flush ends the current runs and merges the tallies of each request
// (the runs of a request are apart when its paths are: profiles).
func (a *causeAcc) flush() {
	a.flushSite()
	a.flushRequest()
	// Span paths come request by request: the tallies are mostly sorted.
	if !slices.IsSortedFunc(a.perReq, func(x, y reqTally) int { return cmp.Compare(x.req, y.req) }) {
		slices.SortStableFunc(a.perReq, func(x, y reqTally) int { return cmp.Compare(x.req, y.req) })
	}
	a.perReq = mergeRuns(a.perReq, func(x, y *reqTally) bool {
		if x.req != y.req {
			return false
		}
		x.n, x.cost = sat32(int64(x.n)+int64(y.n)), x.cost+y.cost
		return true
	})
	for did, sts := range a.stmtReq {
		byReq := func(x, y stmtTally) int { return cmp.Compare(x.req, y.req) }
		if !slices.IsSortedFunc(sts, byReq) {
			slices.SortStableFunc(sts, byReq)
		}
		a.stmtReq[did] = mergeRuns(sts, func(x, y *stmtTally) bool {
			if x.req != y.req {
				return false
			}
			x.calls = sat32(int64(x.calls) + int64(y.calls))
			return true
		})
	}
}

// mergeRuns merges each element into the one before it where merge
// agrees to (adding it up), in place.
func mergeRuns[T any](s []T, merge func(into, from *T) bool) []T {
	out := s[:0]
	for i := range s {
		if len(out) > 0 && merge(&out[len(out)-1], &s[i]) {
			continue
		}
		out = append(out, s[i])
	}
	return out
}

func (a *causeAcc) flushSite() {
	if a.runSite != 0 {
		a.sites[a.runSite] += a.runSiteV
	}
	a.runSite, a.runSiteV = 0, 0
}

func (a *causeAcc) flushRequest() {
	if a.runReq == 0 {
		return
	}
	a.perReq = append(a.perReq, reqTally{cost: a.run.cost, req: a.runReq, n: sat32(a.run.n)})
	for _, sc := range a.runStmts {
		if int(sc.did) >= len(a.stmtReq) {
			a.stmtReq = append(a.stmtReq, make([][]stmtTally, int(sc.did)+1-len(a.stmtReq))...)
		}
		a.stmtReq[sc.did] = append(a.stmtReq[sc.did], stmtTally{a.runReq, sat32(sc.calls)})
	}
	a.run, a.runReq, a.runStmts = reqStat{}, 0, a.runStmts[:0]
}

// finish completes the cause: kind, shares, per-request distributions
// (the vectors kept when keep is set, else counted in *scratch), call
// sites, statements and entry points, sorted.
func (a *causeAcc) finish(src *traces.Source, denom, boundarySamples int64, sampled, knowsCalls, keep bool, scratch *[]float64) *Cause {
	c := a.cause
	switch {
	case c.Database > 0 && c.Network > 0:
		c.Kind = KindMixed
	case c.Network > 0:
		c.Kind = KindNetwork
	case c.Database > 0:
		c.Kind = KindDatabase
	}
	if denom > 0 {
		c.Share = float64(c.Cost) / float64(denom)
	}
	if sampled && boundarySamples > 0 {
		// In the inclusive view a sample counts for several causes; cap k at n.
		k := min(c.Samples, boundarySamples)
		c.ShareMargin = 1.96 * BinomialSE(int(k), int(boundarySamples))
	}
	c.Requests = len(a.perReq)
	if keep && len(a.perReq) > 0 {
		c.requestCosts = make([]float64, 0, len(a.perReq))
		for _, v := range a.perReq {
			c.requestCosts = append(c.requestCosts, float64(v.cost))
		}
		sort.Float64s(c.requestCosts)
	}
	if knowsCalls && len(a.perReq) > 0 {
		counts := (*scratch)[:0]
		if keep {
			counts = make([]float64, 0, len(a.perReq))
		}
		for _, st := range a.perReq {
			counts = append(counts, float64(st.n))
		}
		c.CallsPerRequest = distribution(counts)
		if keep {
			c.requestCalls = counts // sorted by distribution
		} else {
			*scratch = counts
		}
	}
	for f, cost := range a.sites {
		fr := &src.Frames[f]
		c.CallSites = append(c.CallSites, CallSite{File: fr.File, Line: fr.Line, Cost: cost})
	}
	sort.Slice(c.CallSites, func(i, j int) bool {
		x, y := c.CallSites[i], c.CallSites[j]
		if x.Cost != y.Cost {
			return x.Cost > y.Cost
		}
		if x.File != y.File {
			return x.File < y.File
		}
		return x.Line < y.Line
	})
	if len(c.CallSites) > 0 {
		c.File, c.Line = c.CallSites[0].File, c.CallSites[0].Line
	}
	for _, d := range a.details {
		if d != nil {
			c.Statements = append(c.Statements, *d)
		}
	}
	sortDetails(c.Statements)
	for _, e := range a.entries {
		if e != nil {
			c.EntryPoints = append(c.EntryPoints, *e)
		}
	}
	sort.Slice(c.EntryPoints, func(i, j int) bool {
		x, y := c.EntryPoints[i], c.EntryPoints[j]
		if x.Cost != y.Cost {
			return x.Cost > y.Cost
		}
		return x.Entry < y.Entry
	})
	return c
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

func requestFromLabels(ls *traces.LabelSet, keys []string, ids map[string]traces.RequestID, names *[]string) traces.RequestID {
	for _, k := range keys {
		if v, ok := ls.Get(k); ok && v != "" {
			id, ok := ids[v]
			if !ok {
				id = traces.RequestID(len(ids) + 1)
				ids[v] = id
				*names = append(*names, v)
			}
			return id
		}
	}
	return 0
}

// distribution returns the median, p95 and max of xs (linear
// interpolation between order statistics).
func distribution(xs []float64) *Distribution {
	sort.Float64s(xs)
	return &Distribution{Median: Quantile(xs, 0.5), P95: Quantile(xs, 0.95), Max: xs[len(xs)-1]}
}

func itoa(n int64) string { return strconv.FormatInt(n, 10) }
