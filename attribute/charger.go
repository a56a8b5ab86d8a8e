package attribute

import (
	"runtime"

	"github.com/culprithq/culprit/callgraph"
	"github.com/culprithq/culprit/traces"
)

// charger charges paths to root causes. Attribute runs one per shard of
// the paths (a range of whole requests) and merges them in order: IDs are
// given in order of first use, so the merged state is the one a single
// charger over all the paths would have.
type charger struct {
	// Shared, read only.
	t            *callgraph.Tree
	c            *Classifier
	src          *traces.Source
	w            *walkState
	opts         *Options
	vi, sampleIx int
	callsIx      int // calls/count of an execution trace, else -1
	spans        bool
	entryLabels  []string

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
	// reqs holds each path's request when profile labels name it
	// (requestIDs): numbered before the paths are shared out, so that all
	// chargers agree. Nil for span sources, whose paths carry theirs.
	reqs []traces.RequestID
}

// fork returns a charger with ch's shared fields and empty state.
func (ch *charger) fork(rec *recursionFinder) *charger {
	return &charger{
		t: ch.t, c: ch.c, src: ch.src, w: ch.w, opts: ch.opts, vi: ch.vi, sampleIx: ch.sampleIx, spans: ch.spans, callsIx: ch.callsIx,
		entryLabels:   ch.entryLabels,
		rec:           rec.fork(),
		accs:          map[string]*causeAcc{},
		accOf:         make([]*causeAcc, len(ch.src.Frames)),
		entryOf:       map[entryKey]*entryState{},
		entries:       map[string]*entryState{},
		detailOf:      map[uint64]int32{},
		detailIDs:     map[detailKey]int32{},
		inclusiveKeys: map[callgraph.NodeID][]callgraph.NodeID{},
		reqs:          ch.reqs,
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

// chargeShards splits the paths into ranges, one per core for large
// sources, else one, and returns the ranges' bounds. A span source's
// ranges hold whole requests (its paths come request by request), which
// keeps each charger's per-request runs whole; it is not needed for the
// result.
func chargeShards(src *traces.Source, spans bool, want int) []int {
	n := src.Paths.Len()
	k := want
	if k == 0 {
		k = min(runtime.GOMAXPROCS(0), 8)
		if n < 20_000 {
			k = 1
		}
	}
	if k < 2 {
		return []int{0, n}
	}
	bounds := []int{0}
	for i := 1; i < k; i++ {
		at := max(n*i/k, bounds[len(bounds)-1])
		for spans && at < n && at > 0 && src.Paths.At(at).Request == src.Paths.At(at-1).Request {
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
	if ch.callsIx >= 0 {
		samples = 0 // measured waits, not samples: requests count calls
	} else if sampleIx >= 0 {
		samples = p.Values[sampleIx]
	}
	req := p.Request
	if ch.reqs != nil {
		req = ch.reqs[pi]
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
	} else if ch.callsIx >= 0 {
		calls = p.Values[ch.callsIx]
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
