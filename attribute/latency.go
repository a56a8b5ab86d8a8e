package attribute

import (
	"cmp"
	"errors"
	"slices"

	"github.com/culprithq/culprit/attribute/stats"
	"github.com/culprithq/culprit/callgraph"
	"github.com/culprithq/culprit/traces"
)

// ErrNoTiming is returned by Latency for a source without timing (spans
// or an execution trace not read with traces.Options.Timing): profiles
// have neither requests nor the order of events in time, so they cannot
// say what a request waited on.
var ErrNoTiming = errors.New("latency needs traces: a profile has no requests and no timing order, so it cannot tell what made requests slow; record OpenTelemetry traces or a Go execution trace of the load test and pass those")

// Kinds of critical-path time beside database and network calls.
const (
	// KindApplication is an application span's own time on the path; in
	// an execution trace, a wait that is not a call (a lock, a channel, a
	// sleep) in the application function nearest to it.
	KindApplication Kind = "application"
	// KindUnaccounted is time inside the request's server span that no
	// span covers (queueing, un-instrumented work); in an execution
	// trace, a wait that is not a call with no application function above it.
	KindUnaccounted Kind = "unaccounted"
	// KindRunning is, in an execution trace, a goroutine of the request
	// running or runnable (waiting for a CPU) outside any wait: its own
	// work, charged to the request's entry point for its own goroutine
	// and to the nearest application function of its creation for a
	// child. Without CPU samples, which function ran is not known.
	KindRunning Kind = "running"
)

// DefaultTail is the default quantile at and above which a request is in
// its entry point's tail.
const DefaultTail = 0.95

// LatencyOptions control a latency analysis. The zero value takes the
// defaults of Options and DefaultTail.
type LatencyOptions struct {
	Options
	// Tail is the quantile (0 < Tail < 1) at or above which a request's
	// latency puts it in its entry point's tail; 0 means DefaultTail.
	Tail float64
	// Slowest is how many of each entry point's slowest requests keep
	// their critical path (LatencyEntry.Slowest); 0 keeps none.
	Slowest int
	// Vectors keeps the per-request values NewLatencySnapshot needs.
	Vectors bool
}

// LatencyResult is what made the requests of a span source slow: per
// entry point, the latency distribution and the critical-path time of
// each root cause. Entries are sorted by p95 latency, slowest first.
type LatencyResult struct {
	// Source is the kind of input: traces.Spans or traces.ExecTrace.
	Source   traces.Kind
	Inputs   []traces.Input
	Tail     float64
	Requests int
	Entries  []*LatencyEntry
	App      AppInfo
	Warnings []string

	vectors bool // per-request values kept (LatencyOptions.Vectors)
}

// LatencyEntry is one entry point's requests. Times are in nanoseconds.
type LatencyEntry struct {
	Entry    string
	Requests int
	// P50, P95, P99 and Mean of the requests' latency (the root span's
	// duration); quantiles interpolate linearly (Hyndman and Fan's type 7).
	P50, P95, P99, Mean float64
	// TailThreshold is the Tail quantile of latency; TailRequests counts
	// the requests at or above it. MedianRequests counts those at or below P50.
	TailThreshold  float64
	TailRequests   int
	MedianRequests int
	// Latency sums the requests' latencies; TailLatency and MedianLatency
	// those of the tail and of the requests at or below P50.
	Latency, TailLatency, MedianLatency int64
	// Causes are sorted by critical-path time, largest first, then name.
	Causes []*LatencyCause
	// Slowest are the slowest requests' critical paths, slowest first
	// (LatencyOptions.Slowest of them).
	Slowest []*RequestPath

	latencies []float64 // ascending, with LatencyOptions.Vectors
}

// LatencyCause is a root cause's time on one entry point's critical paths.
type LatencyCause struct {
	Function string
	// Kind is KindDatabase, KindNetwork, KindConnection (waiting for a
	// pool's database connection, shown apart from the queries),
	// KindApplication, KindUnaccounted or (execution traces) KindRunning.
	Kind Kind
	// NoAppFrame marks a call with no application frame above it; its
	// Function is then NoAppFramePrefix and the entry point.
	NoAppFrame bool
	// Path is the time on the critical path summed over all requests;
	// TailPath over the tail requests, MedianPath over those at or below P50.
	Path, TailPath, MedianPath int64
	// Summed is the cause's time whether on the critical path or not: its
	// calls' whole durations, or its spans' own time. Summed ≥ Path; the
	// difference is time hidden by parallel work.
	Summed int64
	// Requests counts the requests with time on the path for this cause.
	Requests int

	entry   int32     // index of its entry point while it is being tallied
	reqPath []float64 // time on the path per request where it has some (Vectors)
}

// RequestPath returns the cause's time on the critical path in each
// request where it has some, ascending; nil unless the analysis kept
// per-request values (LatencyOptions.Vectors). Do not modify it.
func (c *LatencyCause) RequestPath() []float64 { return c.reqPath }

// Latencies returns the entry point's request latencies, ascending; nil
// unless the analysis kept per-request values. Do not modify it.
func (e *LatencyEntry) Latencies() []float64 { return e.latencies }

// HasVectors reports whether the analysis kept per-request values
// (LatencyOptions.Vectors), which a latency snapshot needs.
func (r *LatencyResult) HasVectors() bool { return r.vectors }

// Share returns the cause's fraction of the entry point's latency over
// all requests, the tail and the median requests.
func (c *LatencyCause) Share(e *LatencyEntry) (all, tail, median float64) {
	return ratio(c.Path, e.Latency), ratio(c.TailPath, e.TailLatency), ratio(c.MedianPath, e.MedianLatency)
}

func ratio(a, b int64) float64 {
	if b <= 0 {
		return 0
	}
	return float64(a) / float64(b)
}

// RequestPath is one request's critical path as a tree of spans.
type RequestPath struct {
	Request string // trace ID
	Latency int64
	Root    *PathSpan
}

// PathSpan is a span of a request with its time on the critical path
// (OnPath, which counts the span's own pieces only) and the children
// that have time on it, in start order.
type PathSpan struct {
	Function string
	Kind     Kind   // of the span's own time: database, network, connection, application, unaccounted or running
	Cause    string // the root cause its time is charged to
	Start    int64  // ns after the request's start
	Duration int64
	OnPath   int64
	Children []*PathSpan
}

// spanRole is how a span's time on the path is charged.
type spanRole struct {
	cause int32 // index into the analysis's causes; -1 for a span inside a call
	call  bool  // a database or network call: the walk does not enter it
}

type pathCause struct {
	function string
	kind     Kind
	noApp    bool
}

// latencyRun holds one analysis's state.
type latencyRun struct {
	src *traces.Source
	t   *callgraph.Tree
	c   *Classifier
	// wr emits the charge records of the attribution walk: every call's
	// root cause, kind and detail come from there, as for rank.
	wr  *walker
	rec charge // scratch for wr.next

	causes  []pathCause
	causeIx map[pathCause]int32
	roles   []spanRole // by path index within the current request
	// Caches of cause indices, +1 (0: not yet known): of a call's
	// application root cause by its tree node, of an application span by
	// its frame.
	callCause map[callKey]int32
	appCause  []int32
	// unaccounted is the current request's unaccounted cause; running,
	// for an execution trace, the cause of its goroutine's own time.
	unaccounted, running int32
	vectors              bool // keep per-request values
	// exec is set for an execution trace: goroutines and waits as spans.
	exec bool

	// tallies holds the current request's time per cause, in runs (one
	// for the critical path, one for the summed time), and pos the
	// position of each cause's tally in the run being added, +1.
	tallies []cpTally
	pos     []int32
	runAt   int32
	// Scratch space.
	roleStack [][2]int32
	stack     []int32
	iv        [][2]int64
	fill      []int32
}

// startRun starts a run of tallies (one per cause) at the end of tallies.
func (r *latencyRun) startRun() int32 {
	for _, t := range r.tallies[r.runAt:] {
		r.pos[t.cause] = 0
	}
	r.runAt = int32(len(r.tallies))
	return r.runAt
}

// add adds d to cause's tally in the current run.
func (r *latencyRun) add(cause int32, d int64) {
	if cause < 0 || d <= 0 {
		return
	}
	for int(cause) >= len(r.pos) {
		r.pos = append(r.pos, 0)
	}
	if p := r.pos[cause]; p > 0 {
		r.tallies[r.runAt+p-1].dur += d
		return
	}
	r.tallies = append(r.tallies, cpTally{cause, d})
	r.pos[cause] = int32(len(r.tallies)) - r.runAt
}

func (r *latencyRun) cause(k pathCause) int32 {
	if i, ok := r.causeIx[k]; ok {
		return i
	}
	i := int32(len(r.causes))
	r.causes = append(r.causes, k)
	r.causeIx[k] = i
	return i
}

// reqRecord is one request as the aggregation needs it.
type reqRecord struct {
	lo, hi  int // its paths
	root    int // the path of its root span (pass 1)
	id      traces.RequestID
	entry   int32
	latency int64
}

type cpTally struct {
	cause int32
	dur   int64
}

// Latency computes, for every request of a span source read with
// traces.Options.Timing, its critical path (see criticalPath) and charges
// each piece with the attribution contract: a database or network call's
// time to its root cause, an application span's own time to its function,
// time of the server span that no span covers to unaccounted. A span
// created by library code (instrumentation of a framework) is charged like
// its nearest application span above it, else unaccounted. A request is a
// trace; its latency is its root span's duration (of several root spans,
// the server or consumer span that lasts longest).
func Latency(t *callgraph.Tree, c *Classifier, opts LatencyOptions) (*LatencyResult, error) {
	src := t.Source()
	if src.Kind != traces.Spans && src.Kind != traces.ExecTrace || src.Timing == nil {
		return nil, ErrNoTiming
	}
	tail := opts.Tail
	if tail <= 0 || tail >= 1 {
		tail = DefaultTail
	}
	r := &latencyRun{src: src, t: t, c: c, wr: newWalk(t, c, &opts.Options, false).newWalker(), causeIx: map[pathCause]int32{},
		callCause: map[callKey]int32{}, appCause: make([]int32, len(src.Frames)), exec: src.Kind == traces.ExecTrace}
	res := &LatencyResult{
		Source:   src.Kind,
		vectors:  opts.Vectors,
		Inputs:   src.Inputs,
		Tail:     tail,
		App:      AppInfo{Prefixes: c.rules.App, Detected: c.Detected, RulesFiles: c.rules.Files},
		Warnings: src.Warnings.Strings(),
	}
	// Pass 1: each request's root, entry point and latency, then each
	// entry point's quantiles. Pass 2: the critical paths, added straight
	// into the entry points' tallies, so that nothing per request but its
	// latency is kept.
	entryIx := map[string]int32{}
	var entries []*LatencyEntry
	var reqs []reqRecord
	var cp cpSpans
	var scratch cpScratch
	n := src.Paths.Len()
	for lo := 0; lo < n; {
		req := src.Paths.At(lo).Request
		hi := lo + 1
		for hi < n && src.Paths.At(hi).Request == req {
			hi++
		}
		if req != 0 {
			if rec, ok := r.request(lo, hi, entryIx, &entries); ok {
				reqs = append(reqs, rec)
			}
		}
		lo = hi
	}
	res.Requests = len(reqs)
	r.quantiles(entries, reqs, tail, opts.Vectors)
	accs := map[[2]int32]*LatencyCause{}
	r.vectors = opts.Vectors
	for i := range reqs {
		r.charge(&reqs[i], entries, accs, &cp, &scratch)
	}
	for _, lc := range accs {
		e := entries[lc.entry]
		e.Causes = append(e.Causes, lc)
	}
	for _, e := range entries {
		for _, c := range e.Causes {
			slices.Sort(c.reqPath)
		}
		slices.SortFunc(e.Causes, func(a, b *LatencyCause) int {
			return cmp.Or(cmp.Compare(b.Path, a.Path), cmp.Compare(b.Summed, a.Summed),
				cmp.Compare(a.Function, b.Function), cmp.Compare(a.Kind, b.Kind))
		})
	}
	if opts.Slowest > 0 {
		r.slowest(entries, reqs, opts.Slowest, &cp, &scratch)
	}
	slices.SortFunc(entries, func(a, b *LatencyEntry) int {
		return cmp.Or(cmp.Compare(b.P95, a.P95), cmp.Compare(b.Requests, a.Requests), cmp.Compare(a.Entry, b.Entry))
	})
	res.Entries = entries
	return res, nil
}

// build fills cp with the spans of request rq and returns its root (an
// index into cp).
func (r *latencyRun) build(rq *reqRecord, cp *cpSpans) int32 {
	lo, hi := rq.lo, rq.hi
	src, tm := r.src, r.src.Timing
	n := hi - lo
	cp.start, cp.end = cp.start[:0], cp.end[:0]
	cp.kidAt = grow(cp.kidAt, n+1)
	for pi := lo; pi < hi; pi++ {
		s := tm.Start[pi]
		cp.start = append(cp.start, s)
		cp.end = append(cp.end, s+src.Paths.Value(pi, 0))
		if par := tm.Parent[pi]; par >= 0 {
			cp.kidAt[int(par)-lo+1]++
		}
	}
	for i := 1; i <= n; i++ {
		cp.kidAt[i] += cp.kidAt[i-1]
	}
	cp.kids = grow(cp.kids, int(cp.kidAt[n]))
	fill := append(r.fill[:0], cp.kidAt[:n]...)
	r.fill = fill
	for i := range n {
		if par := tm.Parent[lo+i]; par >= 0 {
			k := int(par) - lo
			cp.kids[fill[k]] = int32(i)
			fill[k]++
		}
	}
	return int32(rq.root - lo)
}

// request finds the root, entry point and latency of the request of
// paths [lo, hi).
func (r *latencyRun) request(lo, hi int, entryIx map[string]int32, entries *[]*LatencyEntry) (reqRecord, bool) {
	root := r.root(lo, hi)
	if root < 0 {
		return reqRecord{}, false
	}
	rootPath := r.src.Paths.At(root)
	if r.exec {
		r.wr.next(r.entryPath(lo, hi, root), &r.rec)
	} else {
		r.wr.next(root, &r.rec)
	}
	name := r.wr.entryNames[r.rec.entry]
	ei, ok := entryIx[name]
	if !ok {
		ei = int32(len(*entries))
		entryIx[name] = ei
		*entries = append(*entries, &LatencyEntry{Entry: name})
	}
	return reqRecord{lo: lo, hi: hi, root: root, id: rootPath.Request, entry: ei, latency: max(0, rootPath.Values[0])}, true
}

// entryPath returns the path that names the entry point of the request
// of an execution trace, paths [lo, hi): of its waits, the one whose
// entry point is deepest (the handler, below the router or middleware
// that may wait too), else its root.
func (r *latencyRun) entryPath(lo, hi, root int) int {
	best, depth := root, -1
	for pi := lo; pi < hi; pi++ {
		if r.src.Timing.Goroutine[pi] {
			continue
		}
		d := 0
		if n := r.wr.w.entryNode(r.t.Leaf(pi)); n != 0 {
			d = r.t.Depth(n)
		}
		if d > depth {
			best, depth = pi, d
		}
	}
	return best
}

// root returns the path of the root span of paths [lo, hi): of the spans
// with no parent, a server or consumer span before others, then the
// longest, then the first; -1 if there is none.
func (r *latencyRun) root(lo, hi int) int {
	src, tm := r.src, r.src.Timing
	root, rootDur, rootEntry := -1, int64(-1), false
	for pi := lo; pi < hi; pi++ {
		if tm.Parent[pi] >= 0 {
			continue
		}
		p := src.Paths.At(pi)
		d := p.Values[0]
		f := &src.Frames[p.Frames[len(p.Frames)-1]]
		entry := f.SpanKind == traces.SpanKindServer || f.SpanKind == traces.SpanKindConsumer
		if root < 0 || entry && !rootEntry || entry == rootEntry && d > rootDur {
			root, rootDur, rootEntry = pi, d, entry
		}
	}
	return root
}

// charge walks the critical path of request rq and adds its pieces and
// its summed time to the tallies of its entry point's causes.
func (r *latencyRun) charge(rq *reqRecord, entries []*LatencyEntry, accs map[[2]int32]*LatencyCause, cp *cpSpans, sc *cpScratch) {
	e := entries[rq.entry]
	root := r.build(rq, cp)
	r.assignRoles(rq.lo, cp, root, e.Entry)
	l := float64(rq.latency)
	inTail, inMedian := l >= e.TailThreshold, l <= e.P50
	get := func(ci int32) *LatencyCause {
		k := [2]int32{rq.entry, ci}
		lc := accs[k]
		if lc == nil {
			pc := r.causes[ci]
			lc = &LatencyCause{Function: pc.function, Kind: pc.kind, NoAppFrame: pc.noApp, entry: rq.entry}
			accs[k] = lc
		}
		return lc
	}
	r.startRun()
	criticalPath(cp, root, r.enter, r.emit, sc)
	for _, t := range r.tallies[r.runAt:] {
		lc := get(t.cause)
		lc.Path += t.dur
		lc.Requests++
		if r.vectors {
			lc.reqPath = append(lc.reqPath, float64(t.dur))
		}
		if inTail {
			lc.TailPath += t.dur
		}
		if inMedian {
			lc.MedianPath += t.dur
		}
	}
	r.startRun()
	r.summed(cp, root)
	for _, t := range r.tallies[r.runAt:] {
		get(t.cause).Summed += t.dur
	}
	r.startRun()
	r.tallies, r.runAt = r.tallies[:0], 0
}

func (r *latencyRun) enter(i int32) bool { return !r.roles[i].call }
func (r *latencyRun) emit(p cpPiece)     { r.add(r.roles[p.span].cause, p.dur) }

// assignRoles decides, for each span of the request below root, what its
// time on the path is charged to, parents before children.
func (r *latencyRun) assignRoles(lo int, cp *cpSpans, root int32, entry string) {
	n := len(cp.start)
	r.roles = slices.Grow(r.roles[:0], n)[:n]
	for i := range r.roles {
		r.roles[i] = spanRole{cause: -1}
	}
	unaccounted := r.cause(pathCause{function: entry, kind: KindUnaccounted})
	r.unaccounted = unaccounted
	if r.exec {
		r.running = r.cause(pathCause{function: entry, kind: KindRunning})
	}
	stack := append(r.roleStack[:0], [2]int32{root, unaccounted})
	defer func() { r.roleStack = stack[:0] }()
	for len(stack) > 0 {
		top := stack[len(stack)-1]
		stack = stack[:len(stack)-1]
		i, inherited := top[0], top[1]
		role := r.role(lo+int(i), inherited, i == root)
		r.roles[i] = role
		if role.call {
			continue
		}
		for _, k := range cp.kids[cp.kidAt[i]:cp.kidAt[i+1]] {
			stack = append(stack, [2]int32{k, role.cause})
		}
	}
}

// role charges span path pi: a boundary call to its root cause, an
// application span to itself, an entry span to unaccounted, anything
// else as its parent's own time (inherited).
func (r *latencyRun) role(pi int, inherited int32, isRoot bool) spanRole {
	if r.exec && isRoot {
		// The request's goroutine: never a call, even when all its waits
		// are in one.
		return spanRole{cause: r.running}
	}
	src, t := r.src, r.t
	ch := &r.rec
	r.wr.next(pi, ch)
	switch ch.state {
	case chargeInside:
		return spanRole{cause: -1, call: true} // inside a call: never reached
	case chargeBoundary:
		kind := ch.kind
		if r.wr.details[ch.detail].kind == KindConnection {
			// Waiting for a pool's connection: database cost, shown apart.
			kind = KindConnection
		}
		k := callKey{kind: kind}
		if len(ch.causes) > 0 {
			k.node = ch.causes[len(ch.causes)-1] // the nearest, also in the inclusive view
		} else {
			k.entry = ch.entry
		}
		ci, ok := r.callCause[k]
		if !ok {
			pc := pathCause{kind: kind}
			if k.node != 0 {
				pc.function = src.Frames[t.Frame(k.node)].Function
			} else {
				pc.function, pc.noApp = NoAppFramePrefix+r.wr.entryNames[ch.entry], true
			}
			ci = r.cause(pc)
			r.callCause[k] = ci
		}
		return spanRole{cause: ci, call: true}
	}
	if r.exec {
		return r.execRole(pi)
	}
	// Not a call: the span's own time is its function's if it is an
	// application span, unaccounted for the request's entry span, else
	// its parent's.
	p := src.Paths.At(pi)
	f := p.Frames[len(p.Frames)-1]
	class, isEntry := r.c.class(f)
	switch {
	case isRoot || isEntry:
		return spanRole{cause: r.unaccounted}
	case class == Application:
		ci := r.appCause[f] - 1
		if ci < 0 {
			ci = r.cause(pathCause{function: src.Frames[f].Function, kind: KindApplication})
			r.appCause[f] = ci + 1
		}
		return spanRole{cause: ci}
	}
	return spanRole{cause: inherited}
}

// execRole charges a path of an execution trace that is not a call: a
// child goroutine's own time is running, charged to the application
// function nearest to its start (its function, or the one whose go
// statement started it), else to the request's; a wait's time is the
// nearest application function's own (application), else unaccounted.
func (r *latencyRun) execRole(pi int) spanRole {
	fs := r.src.Paths.Frames(pi)
	app := traces.FrameID(0)
	for i := len(fs) - 1; i >= 0; i-- {
		if class, _ := r.c.class(fs[i]); class == Application {
			app = fs[i]
			break
		}
	}
	switch {
	case r.src.Timing.Goroutine[pi] && app == 0:
		return spanRole{cause: r.running}
	case r.src.Timing.Goroutine[pi]:
		return spanRole{cause: r.cause(pathCause{function: r.src.Frames[app].Function, kind: KindRunning})}
	case app == 0:
		return spanRole{cause: r.unaccounted}
	}
	ci := r.appCause[app] - 1
	if ci < 0 {
		ci = r.cause(pathCause{function: r.src.Frames[app].Function, kind: KindApplication})
		r.appCause[app] = ci + 1
	}
	return spanRole{cause: ci}
}

// callKey identifies the cause of a call: its root-cause node, or with
// none its entry point, and its kind.
type callKey struct {
	node  callgraph.NodeID
	entry int32
	kind  Kind
}

// summed adds each span's time below root to the current run: a call's
// whole duration, another span's time covered by none of its children.
func (r *latencyRun) summed(cp *cpSpans, root int32) {
	stack := append(r.stack[:0], root)
	iv := r.iv
	defer func() { r.stack, r.iv = stack[:0], iv[:0] }()
	for len(stack) > 0 {
		i := stack[len(stack)-1]
		stack = stack[:len(stack)-1]
		role := r.roles[i]
		a, b := cp.start[i], cp.end[i]
		if b <= a {
			continue
		}
		if role.call {
			r.add(role.cause, b-a)
			continue
		}
		iv = iv[:0]
		for _, k := range cp.kids[cp.kidAt[i]:cp.kidAt[i+1]] {
			stack = append(stack, k)
			if s, e := max(cp.start[k], a), min(cp.end[k], b); e > s {
				iv = append(iv, [2]int64{s, e})
			}
		}
		r.add(role.cause, (b-a)-union(iv))
	}
}

// union returns the length of the union of intervals iv (sorted in place).
func union(iv [][2]int64) int64 {
	slices.SortFunc(iv, func(x, y [2]int64) int { return cmp.Compare(x[0], y[0]) })
	var total, end int64
	first := true
	for _, v := range iv {
		switch {
		case first || v[0] >= end:
			total += v[1] - v[0]
			end = v[1]
			first = false
		case v[1] > end:
			total += v[1] - end
			end = v[1]
		}
	}
	return total
}

// quantiles fills the entries' latency statistics from their requests.
func (r *latencyRun) quantiles(entries []*LatencyEntry, reqs []reqRecord, tail float64, keep bool) {
	byEntry := make([][]float64, len(entries))
	for i := range reqs {
		byEntry[reqs[i].entry] = append(byEntry[reqs[i].entry], float64(reqs[i].latency))
	}
	for ei, e := range entries {
		lat := byEntry[ei]
		slices.Sort(lat)
		var sum float64
		for _, l := range lat {
			sum += l
		}
		e.Requests = len(lat)
		e.P50, e.P95, e.P99 = stats.Quantile(lat, 0.5), stats.Quantile(lat, 0.95), stats.Quantile(lat, 0.99)
		e.Mean = sum / float64(len(lat))
		e.TailThreshold = stats.Quantile(lat, tail)
		if keep {
			e.latencies = lat
		}
	}
	for i := range reqs {
		rq := &reqs[i]
		e := entries[rq.entry]
		e.Latency += rq.latency
		if l := float64(rq.latency); l >= e.TailThreshold {
			e.TailRequests++
			e.TailLatency += rq.latency
		}
		if float64(rq.latency) <= e.P50 {
			e.MedianRequests++
			e.MedianLatency += rq.latency
		}
	}
}

// slowest keeps the critical paths of each entry point's n slowest
// requests (ties: the lower request ID first).
func (r *latencyRun) slowest(entries []*LatencyEntry, reqs []reqRecord, n int, cp *cpSpans, sc *cpScratch) {
	order := make([]int, len(reqs))
	for i := range order {
		order[i] = i
	}
	slices.SortStableFunc(order, func(a, b int) int {
		return cmp.Or(cmp.Compare(reqs[b].latency, reqs[a].latency), cmp.Compare(reqs[a].id, reqs[b].id))
	})
	for _, ri := range order {
		rq := &reqs[ri]
		e := entries[rq.entry]
		if len(e.Slowest) >= n {
			continue
		}
		e.Slowest = append(e.Slowest, r.requestPath(rq, e.Entry, cp, sc))
	}
}

// requestPath recomputes one request's critical path as a span tree.
func (r *latencyRun) requestPath(rq *reqRecord, entry string, cp *cpSpans, sc *cpScratch) *RequestPath {
	root := r.build(rq, cp)
	r.assignRoles(rq.lo, cp, root, entry)
	on := make([]int64, len(cp.start))
	criticalPath(cp, root, r.enter, func(p cpPiece) { on[p.span] += p.dur }, sc)
	t0 := cp.start[root]
	var node func(i int32) *PathSpan
	node = func(i int32) *PathSpan {
		var kids []*PathSpan
		if !r.roles[i].call {
			for _, k := range cp.kids[cp.kidAt[i]:cp.kidAt[i+1]] {
				if c := node(k); c != nil {
					kids = append(kids, c)
				}
			}
		}
		if on[i] == 0 && len(kids) == 0 && i != root {
			return nil
		}
		slices.SortStableFunc(kids, func(a, b *PathSpan) int { return cmp.Compare(a.Start, b.Start) })
		p := r.src.Paths.At(rq.lo + int(i))
		fn := r.src.Frames[p.Frames[len(p.Frames)-1]].Function
		if r.exec && i == root {
			fn = entry // its frames are those its waits share
		}
		ps := &PathSpan{Function: fn,
			Start: cp.start[i] - t0, Duration: cp.end[i] - cp.start[i], OnPath: on[i], Children: kids}
		if ci := r.roles[i].cause; ci >= 0 {
			ps.Kind, ps.Cause = r.causes[ci].kind, r.causes[ci].function
		}
		return ps
	}
	return &RequestPath{Request: r.src.Requests[rq.id], Latency: rq.latency, Root: node(root)}
}

// grow returns s with length n and zero elements, reusing its array.
func grow(s []int32, n int) []int32 {
	if cap(s) < n {
		return make([]int32, n, max(n, 2*cap(s)))
	}
	s = s[:n]
	clear(s)
	return s
}
