package attribute

import (
	"cmp"
	"math"
	"math/bits"
	"slices"

	"github.com/culprithq/culprit/attribute/stats"
	"github.com/culprithq/culprit/traces"
)

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
		*pd = dk.newDetail()
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
		if n == 0 && dk.kind != KindConnection {
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
		c.ShareMargin = 1.96 * stats.BinomialSE(int(k), int(boundarySamples))
	}
	c.Requests = len(a.perReq)
	if keep && len(a.perReq) > 0 {
		c.requestCosts = make([]float64, 0, len(a.perReq))
		for _, v := range a.perReq {
			c.requestCosts = append(c.requestCosts, float64(v.cost))
		}
		slices.Sort(c.requestCosts)
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
	slices.SortFunc(c.CallSites, func(x, y CallSite) int {
		return cmp.Or(cmp.Compare(y.Cost, x.Cost), cmp.Compare(x.File, y.File), cmp.Compare(x.Line, y.Line))
	})
	if len(c.CallSites) > 0 {
		c.File, c.Line = c.CallSites[0].File, c.CallSites[0].Line
	}
	for _, d := range a.details {
		if d != nil {
			c.Statements = append(c.Statements, *d)
		}
	}
	SortDetails(c.Statements)
	for _, e := range a.entries {
		if e != nil {
			c.EntryPoints = append(c.EntryPoints, *e)
		}
	}
	slices.SortFunc(c.EntryPoints, func(x, y EntryShare) int {
		return cmp.Or(cmp.Compare(y.Cost, x.Cost), cmp.Compare(x.Entry, y.Entry))
	})
	return c
}
