package attribute

import (
	"runtime"

	"github.com/culprithq/culprit/callgraph"
	"github.com/culprithq/culprit/traces"
)

// charger adds up the charge records of the ranking. Attribute runs one
// per shard of the paths (a range of whole requests) and merges them in
// order: IDs are given in order of first use, so the merged state is the
// one a single charger over all the paths would have.
type charger struct {
	wr  *walker
	rec *recursionFinder // a copy per charger (it caches)

	totals    Totals
	accs      map[string]*causeAcc
	accOf     []*causeAcc   // root-cause frame → its accumulator
	entryList []*entryState // by the walker's entry index
	requests  reqSet
	viaCost   map[int32]int64 // cost charged through each shared helper (classifier function)
	r         charge          // the record being charged, reused
}

// entryState is one entry point being totalled.
type entryState struct {
	name  string
	idx   int // the walker's entry index
	total *EntryTotal
	reqs  reqSet
}

func newCharger(wk *walk, rec *recursionFinder) *charger {
	return &charger{
		wr:      wk.newWalker(),
		rec:     rec.fork(),
		accs:    map[string]*causeAcc{},
		viaCost: map[int32]int64{},
		accOf:   make([]*causeAcc, len(wk.src.Frames)),
	}
}

// entry returns the state of the walker's entry point id.
func (ch *charger) entry(id int32) *entryState {
	for int(id) >= len(ch.entryList) {
		i := len(ch.entryList)
		name := ch.wr.entryNames[i]
		ch.entryList = append(ch.entryList, &entryState{name: name, idx: i, total: &EntryTotal{Entry: name}})
	}
	return ch.entryList[id]
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
	for fn, v := range o.viaCost {
		ch.viaCost[fn] += v
	}
	didMap := make([]int32, len(o.wr.details))
	for i, dk := range o.wr.details {
		didMap[i], _ = ch.wr.detailID(dk)
	}
	idxMap := make([]int, len(o.entryList))
	for i, oe := range o.entryList {
		es := ch.entry(ch.wr.entryID(oe.name))
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
		ch.wr.next(pi, &ch.r)
		ch.charge(&ch.r)
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

// charge adds the record r to the totals, its entry point and its root
// causes.
func (ch *charger) charge(r *charge) {
	val, samples, req := r.cost, r.samples, r.request
	if req != 0 {
		ch.requests.add(req)
	}
	es := ch.entry(r.entry)
	et := es.total
	if req != 0 {
		es.reqs.add(req)
	}
	if r.total {
		ch.totals.Cost += val
		ch.totals.Samples += samples
		et.Cost += val
	}
	if r.state != chargeBoundary {
		return
	}
	kind := r.kind
	if kind == KindDatabase {
		ch.totals.Database += val
		et.Database += val
	} else {
		ch.totals.Network += val
		et.Network += val
	}
	ch.totals.BoundarySamples += samples
	if r.via != 0 {
		ch.viaCost[ch.wr.c.fn[ch.wr.t.Frame(r.via)]] += val
	}
	did := r.detail
	dk := &ch.wr.details[did]
	if len(r.causes) == 0 {
		ch.totals.Unattributed += val
		acc := accFor(ch.accs, NoAppFramePrefix+es.name, true)
		acc.add(val, samples, r.calls, kind, did, dk, es, 0, req)
		return
	}
	t, src := ch.wr.t, ch.wr.src
	recFn, depth := ch.rec.at(r.boundary)
	for _, ra := range r.causes {
		f := t.Frame(ra)
		acc := ch.accOf[f]
		if acc == nil {
			acc = accFor(ch.accs, src.Frames[f].Function, false)
			ch.accOf[f] = acc
		}
		acc.add(val, samples, r.calls, kind, did, dk, es, ch.wr.site(ra), req)
		if recFn != "" && recFn == acc.cause.Function {
			acc.recCost += val
			if depth > acc.recursion {
				acc.recursion = depth
			}
		}
	}
	if recFn != "" && !containsFunc(src, t, r.causes, recFn) {
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
