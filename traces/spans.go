package traces

import (
	"cmp"
	"encoding/binary"
	"encoding/hex"
	"errors"
	"fmt"
	"math"
	"slices"
)

// Warning kinds recorded while assembling traces. With Options.Strict each
// is an error wrapping ErrSpanRepair instead.
const (
	// WarnOrphanSpan is a span whose parent is in none of the inputs; it
	// is treated as the root of a partial trace. (A SERVER or CONSUMER
	// span with a missing parent is not one: its caller is outside the
	// input, and it is an entry point like a span with no parent.)
	WarnOrphanSpan = "orphan-span"
	// WarnDuplicateSpanID is a span whose trace and span IDs were already
	// seen; the first one read is kept and the later ones skipped.
	WarnDuplicateSpanID = "duplicate-span-id"
	// WarnParentCycle is a span found on a cycle of parent links; it
	// becomes a root, which breaks the cycle.
	WarnParentCycle = "parent-cycle"
	// WarnNegativeDuration is a span that ends before it starts; its
	// duration is taken as 0.
	WarnNegativeDuration = "negative-duration"
	// WarnMissingTimestamp is a span without a start or end time; it is
	// given the one it has (or its parent's start), and duration 0.
	WarnMissingTimestamp = "missing-timestamp"
	// WarnMixedTimeUnits is a span with one time in the first 11 days of
	// 1970 and the other later: a writer recorded one of them in another
	// unit (milliseconds or microseconds since the epoch). The later time
	// is kept and the duration taken as 0.
	WarnMixedTimeUnits = "mixed-time-units"
	// WarnClockSkew is a span that starts before its parent by more than
	// max(1 ms, 1% of the parent's duration), in the same service or
	// across services; it is moved, with its descendants, to start with
	// its parent. A span that ends after its parent is not skew: async
	// work (a promise not awaited, a streamed response, a fire-and-forget
	// call) outlives the span that started it. Such spans are accepted as
	// they are and counted in Source.LateChildren.
	WarnClockSkew = "clock-skew"
)

// plausibleNanos is 1e15 ns since the Unix epoch (1970-01-12T13:46:40Z):
// no span recorded by a real clock starts before it, while times written
// in milliseconds or microseconds since the epoch fall below it.
const plausibleNanos = 1_000_000_000_000_000

// skewMinNanos is the smallest tolerance for clock skew: 1 ms. It covers
// SDKs that record times in whole milliseconds (a child's start truncated
// to the millisecond may read up to 1 ms before its parent's precise one)
// and is common practice for clocks synchronised by NTP on one network.
const skewMinNanos = 1_000_000

// spanRec is a decoded span as the collector keeps it until assembly
// (56 bytes: a million of them are held at once): fixed-size IDs, times
// in ns since the Unix epoch, and indices into the collector's interned
// trace IDs, frames, calls and strings (in a batch, into the batch's).
type spanRec struct {
	id         uint64 // span ID, big-endian
	parent     uint64 // parent span ID; 0 for a root
	start, end int64
	trace      int32
	line       int32 // line of the input the span was read from (saturating)
	frame      int32
	call       int32 // 0: none (in a batch: -1)
	route      int32 // http.route; 0: none (in a batch: -1)
	input      int32 // index into SpanCollector.inputs
}

// traceID is a trace ID as two big-endian halves; it orders as the ID.
type traceID struct{ hi, lo uint64 }

func (t traceID) String() string {
	var b [16]byte
	binary.BigEndian.PutUint64(b[:8], t.hi)
	binary.BigEndian.PutUint64(b[8:], t.lo)
	return hex.EncodeToString(b[:])
}

func compareTraceIDs(a, b traceID) int {
	return cmp.Or(cmp.Compare(a.hi, b.hi), cmp.Compare(a.lo, b.lo))
}

// node is a span during assembly.
type node struct {
	rec        *spanRec // in the partition being assembled
	parent     int32    // index in the trace's nodes, -1 for a root
	start, end int64    // repaired times
	shift      int64    // how far the span and its descendants were moved
	framesAt   int32    // its path's frames in the arena
	framesLen  int32
	entryRoute int32 // route of the first span of its path
	pathIx     int32 // index of its path within the trace's, once emitted
	keep       bool  // emitted as a path (its service is selected)
	state      uint8 // cycle search: 0 new, 1 on the current walk, 2 done
}

// assembler assembles the traces of one partition at a time into a
// partPaths; each worker goroutine of Source has one.
type assembler struct {
	c       *SpanCollector
	out     *partPaths
	arena   []FrameID // collector frame IDs of the current trace's paths
	byTrace []int32   // scratch for spanStore.takeSorted, by trace

	// Scratch space reused for every trace.
	nodes                             []node
	lastSvc                           *ServiceInfo // as.service's last answer (reset per partition)
	walk, count, children, topo, emit []int32
	keys                              []assemblyKey
}

// partPaths is one partition's paths in the collector's trace, frame,
// call and string IDs. The finisher interns them into the source in
// partition order, so that the source does not depend on the number of
// workers.
type partPaths struct {
	traces   []partTrace
	paths    []partPath
	frames   []FrameID // the paths' collector frame IDs
	ws       Warnings
	services map[string]*ServiceInfo // spans seen per service
	late     int64                   // kept spans that end after their parent
	err      error                   // the partition's first error (Strict, limits): its paths are incomplete
	minStart int64                   // of the paths' spans that have times
	maxEnd   int64
	timed    bool // whether minStart and maxEnd are set
}

// reset empties p for another partition, keeping its arrays.
func (p *partPaths) reset() {
	*p = partPaths{traces: p.traces[:0], paths: p.paths[:0], frames: p.frames[:0], services: p.services}
	clear(p.services)
}

// partTrace is a trace with paths: its interned ID and where its paths end.
type partTrace struct {
	trace int32
	end   int32 // in partPaths.paths
}

// partPath is one path: its frames in partPaths.frames, duration, call
// and route (collector IDs).
type partPath struct {
	framesAt, framesLen int32
	call, route         int32
	dur                 int64
	// start and parent (a path index relative to the trace's first path,
	// -1 for none) are kept for Options.Timing.
	start  int64
	parent int32
}

// finisher interns the workers' paths into the source, one partition
// after the other.
type finisher struct {
	c        *SpanCollector
	src      *Source
	frameMap []FrameID   // collector frame ID → source frame ID (0: not yet)
	callMap  []CallID    // likewise for calls
	labels   []*LabelSet // by route (collector string ID)
	minStart int64
	maxEnd   int64
	timed    bool
	svc      map[string]*ServiceInfo

	// frames and values are scratch space for one path's source frame IDs
	// and values (a path's contents escape through Paths.Append).
	frames []FrameID
	values [2]int64
}

// grow returns s with length n, reusing its array when it is large enough.
func grow(s []int32, n int) []int32 {
	if cap(s) < n {
		return make([]int32, n, max(n, 2*cap(s)))
	}
	s = s[:n]
	clear(s)
	return s
}

// Source assembles the spans of every input added so far into traces and
// returns them as a Source of Kind Spans: one path per span, from the
// outermost ancestor in the same service down to the span, with values
// [duration in ns, 1 call] (0 calls for a connection wait, see
// Call.Connection). Paths are ordered by trace ID, start time and
// span ID, so the result does not depend on input order or Workers
// (except which of several spans with the same ID is kept: the first read).
//
// Broken trace structure is repaired and recorded in the Source's
// warnings, or with Options.Strict returned as a *ParseError (wrapping
// ErrSpanRepair) naming the input and line of the span concerned. A path
// deeper than Limits.MaxDepth keeps its root-most and leaf-most spans (a
// deep-stack repair). Source uses
// up the collected spans, so that their memory goes to the paths: call it
// once, after the last Add.
func (c *SpanCollector) Source() (*Source, error) {
	if c.used {
		return nil, errors.New("traces: SpanCollector.Source called twice")
	}
	c.used = true
	// No more inputs: the buffers kept for them go before assembly.
	c.free, c.spare = nil, nil
	src := NewSource(Spans, []ValueType{{Type: "duration", Unit: "nanoseconds"}, {Type: "calls", Unit: "count"}})
	src.StatementsNormalized = c.opts.Statement != nil
	src.DefaultValue = 0
	src.Inputs = append([]Input(nil), c.inputs...)
	src.Warnings.Merge(c.warnings)
	src.Paths.Grow(c.spans.len())
	// The frame that stands for the middle of a path cut to MaxDepth:
	// interned before the workers start, which only read the table.
	c.elided = FrameID(intern(c.frameIndex, &c.frames, Frame{Function: ElidedFrames}))
	if c.opts.Timing {
		src.Timing = &Timing{Start: make([]int64, 0, c.spans.len()), Parent: make([]int32, 0, c.spans.len())}
	}

	fin := &finisher{c: c, src: src, frameMap: make([]FrameID, len(c.frames)),
		callMap: make([]CallID, len(c.calls)), labels: make([]*LabelSet, len(c.strs))}
	// Workers sort and assemble partitions, each in its own goroutine;
	// this goroutine interns their paths in partition order. At most
	// `ahead` partitions are in flight, which bounds the memory of the
	// paths waiting to be interned.
	workers := max(1, c.workers)
	ahead := 2 * workers
	jobs := make(chan int)
	tokens := make(chan struct{}, ahead)
	results := make([]chan *partPaths, numParts)
	for k := range results {
		results[k] = make(chan *partPaths, 1)
	}
	stop := make(chan struct{})
	defer close(stop)
	go func() {
		defer close(jobs)
		for k := range numParts {
			select {
			case tokens <- struct{}{}:
			case <-stop:
				return
			}
			select {
			case jobs <- k:
			case <-stop:
				return
			}
		}
	}()
	// Interned partitions' buffers go back to the workers.
	free := make(chan *partPaths, ahead)
	for range workers {
		go func() {
			as := &assembler{c: c, byTrace: make([]int32, len(c.traceIDs))}
			for k := range jobs {
				var out *partPaths
				select {
				case out = <-free:
					out.reset()
				default:
					out = &partPaths{}
				}
				results[k] <- as.partition(c.spans.takeSorted(k, c.traceIDs, as.byTrace), out)
			}
		}()
	}
	for k := range numParts {
		out := <-results[k]
		if err := fin.add(out); err != nil {
			return nil, err
		}
		free <- out
		<-tokens
	}
	c.spans = spanStore{}
	src.Services = fin.services(c.opts.Service, c.opts.AllServices)
	if fin.timed {
		src.DurationNanos = max(0, fin.maxEnd-fin.minStart)
	}
	return src, nil
}

// partition assembles the traces of one sorted partition into out.
func (as *assembler) partition(part sortedPart, out *partPaths) *partPaths {
	c := as.c
	as.out = out
	as.lastSvc = nil
	order := part.order
	for i := 0; i < len(order); {
		first := part.at(order[i])
		j := i + 1
		for j < len(order) && part.at(order[j]).trace == first.trace {
			j++
		}
		nodes := as.nodes[:0]
		for _, o := range order[i:j] {
			r := part.at(o)
			if len(nodes) > 0 && nodes[len(nodes)-1].rec.id == r.id {
				kept := nodes[len(nodes)-1].rec
				if err := as.repair(r, WarnDuplicateSpanID, fmt.Sprintf("span %s of trace %s also read at %s:%d; the first one is kept",
					spanIDString(r.id), c.traceIDs[r.trace], c.inputs[kept.input].Name, kept.line)); err != nil {
					as.out.err = err
					return as.out
				}
				continue
			}
			nodes = append(nodes, node{rec: r, keep: c.selected(r)})
		}
		as.nodes = nodes
		if err := as.trace(nodes); err != nil {
			as.out.err = err
			return as.out
		}
		i = j
	}
	return as.out
}

// add interns one partition's paths into the source and merges its
// warnings; it returns the partition's error, if any.
func (f *finisher) add(out *partPaths) error {
	f.src.Warnings.Merge(out.ws)
	f.src.LateChildren += out.late
	if f.svc == nil {
		f.svc = map[string]*ServiceInfo{}
	}
	for name, o := range out.services {
		si := f.svc[name]
		if si == nil {
			si = &ServiceInfo{Name: name}
			f.svc[name] = si
		}
		si.Spans += o.Spans
		si.Entries += o.Entries
		si.Called += o.Called
	}
	if out.err != nil {
		return out.err
	}
	if out.timed {
		if !f.timed || out.minStart < f.minStart {
			f.minStart = out.minStart
		}
		f.maxEnd = max(f.maxEnd, out.maxEnd)
		f.timed = true
	}
	start := int32(0)
	for _, tr := range out.traces {
		req := f.src.InternRequest(f.c.traceIDs[tr.trace].String())
		base := int32(f.src.Paths.Len())
		for i := start; i < tr.end; i++ {
			pp := &out.paths[i]
			f.path(out, pp, req)
			if tm := f.src.Timing; tm != nil {
				parent := int32(-1)
				if pp.parent >= 0 {
					parent = base + pp.parent
				}
				tm.Start = append(tm.Start, pp.start)
				tm.Parent = append(tm.Parent, parent)
			}
		}
		start = tr.end
	}
	return nil
}

// path interns one path and appends it to the source.
func (f *finisher) path(out *partPaths, pp *partPath, req RequestID) {
	f.frames = f.frames[:0]
	for _, cf := range out.frames[pp.framesAt : pp.framesAt+pp.framesLen] {
		sf := f.frameMap[cf]
		if sf == 0 {
			sf = f.src.InternFrame(f.c.frames[cf])
			f.frameMap[cf] = sf
		}
		f.frames = append(f.frames, sf)
	}
	f.values = [2]int64{pp.dur, 1}
	p := Path{Frames: f.frames, Values: f.values[:], Request: req}
	if cid := pp.call; cid != 0 {
		if f.c.calls[cid].Connection {
			f.values[1] = 0 // a connection wait is not a call
		}
		sc := f.callMap[cid]
		if sc == 0 {
			sc = f.src.InternCall(f.c.calls[cid])
			f.callMap[cid] = sc
		}
		p.Call = sc
	}
	if r := pp.route; r != 0 {
		if f.labels[r] == nil {
			f.labels[r] = f.src.InternLabels([]Label{{Key: "http.route", Value: f.c.strs[r]}})
		}
		p.Labels = f.labels[r]
	}
	f.src.Paths.Append(p)
}

// services lists the services seen, by name, marking those analysed: the
// one named (Options.Service), else all (Options.AllServices), else those
// that receive requests from outside the input.
func (f *finisher) services(named string, all bool) []ServiceInfo {
	out := make([]ServiceInfo, 0, len(f.svc))
	for _, si := range f.svc {
		si.Analysed = named == si.Name || named == "" && (all || si.Entries > 0)
		out = append(out, *si)
	}
	slices.SortFunc(out, func(a, b ServiceInfo) int { return cmp.Compare(a.Name, b.Name) })
	return out
}

// selected reports whether r's service is the one Options.Service keeps.
func (c *SpanCollector) selected(r *spanRec) bool {
	return c.opts.Service == "" || c.frames[r.frame].Service == c.opts.Service
}

// repair records a repair of r's data as a warning, or returns it as an
// error in strict mode. Repairs of spans whose service is not selected
// are neither recorded nor errors.
func (as *assembler) repair(r *spanRec, kind, msg string) error {
	if !as.c.selected(r) {
		return nil
	}
	name := as.c.inputs[r.input].Name
	if as.c.opts.Strict {
		return &ParseError{File: name, Line: int(r.line), Err: fmt.Errorf("%w: %s: %s", ErrSpanRepair, kind, msg)}
	}
	as.out.ws.Add(Warning{Kind: kind, File: name, Line: int(r.line), Message: msg})
	return nil
}

// trace assembles the spans of one trace, sorted by span ID without
// duplicates, and appends their paths to the source.
func (as *assembler) trace(nodes []node) error {
	// Link parents.
	for i := range nodes {
		nd := &nodes[i]
		nd.parent = -1
		p := nd.rec.parent
		if p == 0 {
			continue
		}
		k := findSpan(nodes, p)
		if k < 0 {
			if kind := as.c.frames[nd.rec.frame].SpanKind; kind == SpanKindServer || kind == SpanKindConsumer {
				// A request or message from outside the input that carried
				// its caller's trace context (a load generator, a gateway):
				// an entry point, not a lost span.
				continue
			}
			if err := as.repair(nd.rec, WarnOrphanSpan, fmt.Sprintf("parent %s of span %s (trace %s) is missing; the span is taken as a root",
				spanIDString(p), spanIDString(nd.rec.id), as.c.traceIDs[nd.rec.trace])); err != nil {
				return err
			}
			continue
		}
		nd.parent = int32(k)
	}

	// Break cycles of parent links. The span of a cycle that starts first
	// (then the lowest span ID) becomes a root.
	for i := range nodes {
		walk := as.walk[:0]
		k := int32(i)
		for k >= 0 && nodes[k].state == 0 {
			nodes[k].state = 1
			walk = append(walk, k)
			k = nodes[k].parent
		}
		if k >= 0 && nodes[k].state == 1 {
			cycle := walk[slices.Index(walk, k):]
			best := cycle[0]
			for _, m := range cycle[1:] {
				a, b := nodes[m].rec, nodes[best].rec
				if a.start < b.start || a.start == b.start && a.id < b.id {
					best = m
				}
			}
			r := nodes[best].rec
			if err := as.repair(r, WarnParentCycle, fmt.Sprintf("span %s (trace %s) is on a cycle of %d parent links; it is taken as a root",
				spanIDString(r.id), as.c.traceIDs[r.trace], len(cycle))); err != nil {
				return err
			}
			nodes[best].parent = -1
		}
		for _, m := range walk {
			nodes[m].state = 2
		}
		as.walk = walk
	}

	// Order the spans parents first: children lists in CSR form, then a
	// breadth-first walk from the roots.
	count := grow(as.count, len(nodes)+1)
	for i := range nodes {
		if p := nodes[i].parent; p >= 0 {
			count[p+1]++
		}
	}
	for i := 1; i < len(count); i++ {
		count[i] += count[i-1]
	}
	children := grow(as.children, int(count[len(nodes)]))
	topo := as.topo[:0]
	for i := range nodes {
		if p := nodes[i].parent; p >= 0 {
			children[count[p]] = int32(i)
			count[p]++ // count[p] now ends p's children
		} else {
			topo = append(topo, int32(i))
		}
	}
	for q := 0; q < len(topo); q++ {
		k := topo[q]
		end := count[k]
		begin := int32(0)
		if k > 0 {
			begin = count[k-1]
		}
		topo = append(topo, children[begin:end]...)
	}
	as.count, as.children, as.topo = count, children, topo

	emit := as.emit[:0]
	for _, k := range topo {
		if err := as.place(nodes, k); err != nil {
			return err
		}
		if nodes[k].keep {
			emit = append(emit, k)
		}
	}
	as.emit = emit
	if len(emit) == 0 {
		as.arena = as.arena[:0]
		return nil
	}
	// Paths in start order, then span ID order (IDs are unique here).
	keys := as.keys[:0]
	for _, k := range emit {
		keys = append(keys, assemblyKey{nodes[k].start, nodes[k].rec.id, k})
	}
	sortKeys(keys)
	for j, key := range keys {
		emit[j] = key.i
	}
	as.keys = keys

	out := as.out
	// A kept span's path index within the trace, for its children's
	// parent links (state is free again after the cycle search).
	for j, k := range emit {
		nodes[k].pathIx = int32(j)
	}
	for _, k := range emit {
		nd := &nodes[k]
		fs := as.arena[nd.framesAt : nd.framesAt+nd.framesLen]
		parent := int32(-1)
		if p := nd.parent; p >= 0 && nodes[p].keep {
			parent = nodes[p].pathIx
		}
		out.paths = append(out.paths, partPath{framesAt: int32(len(out.frames)), framesLen: int32(len(fs)),
			call: nd.rec.call, route: nd.entryRoute, dur: nd.end - nd.start, start: nd.start, parent: parent})
		out.frames = append(out.frames, fs...)
		if nd.start != 0 || nd.end != 0 {
			if !out.timed || nd.start < out.minStart {
				out.minStart = nd.start
			}
			out.maxEnd = max(out.maxEnd, nd.end)
			out.timed = true
		}
	}
	out.traces = append(out.traces, partTrace{trace: nodes[emit[0]].rec.trace, end: int32(len(out.paths))})
	as.arena = as.arena[:0]
	return nil
}

// findSpan returns the index of the span with ID id in nodes (sorted by
// span ID), or -1.
func findSpan(nodes []node, id uint64) int {
	lo, hi := 0, len(nodes)
	for lo < hi {
		m := int(uint(lo+hi) >> 1)
		if nodes[m].rec.id < id {
			lo = m + 1
		} else {
			hi = m
		}
	}
	if lo < len(nodes) && nodes[lo].rec.id == id {
		return lo
	}
	return -1
}

// place repairs the times of span k, whose parent is already placed, and
// lays out its path's frames in the arena.
func (as *assembler) place(nodes []node, k int32) error {
	nd := &nodes[k]
	r := nd.rec
	var par *node
	if nd.parent >= 0 {
		par = &nodes[nd.parent]
		nd.shift = par.shift
	}
	start, end := r.start, r.end
	switch {
	case start == 0 && end == 0:
		if par != nil {
			start, end = par.start-nd.shift, par.start-nd.shift
		}
		if err := as.repair(r, WarnMissingTimestamp, fmt.Sprintf("span %s (trace %s) has no start or end time; its duration is taken as 0",
			spanIDString(r.id), as.c.traceIDs[r.trace])); err != nil {
			return err
		}
	case start == 0 || end == 0:
		start = max(start, end)
		end = start
		if err := as.repair(r, WarnMissingTimestamp, fmt.Sprintf("span %s (trace %s) lacks its start or end time; its duration is taken as 0",
			spanIDString(r.id), as.c.traceIDs[r.trace])); err != nil {
			return err
		}
	case (start < plausibleNanos) != (end < plausibleNanos):
		if err := as.repair(r, WarnMixedTimeUnits, fmt.Sprintf("span %s (trace %s) has times %d and %d ns since the epoch, one of them in another unit; its duration is taken as 0",
			spanIDString(r.id), as.c.traceIDs[r.trace], start, end)); err != nil {
			return err
		}
		start = max(start, end)
		end = start
	case end < start:
		if err := as.repair(r, WarnNegativeDuration, fmt.Sprintf("span %s (trace %s) ends %d ns before it starts; its duration is taken as 0",
			spanIDString(r.id), as.c.traceIDs[r.trace], start-end)); err != nil {
			return err
		}
		end = start
	}
	start = satAdd(start, nd.shift)
	end = satAdd(end, nd.shift)
	service := as.c.frames[r.frame].Service
	si := as.service(service)
	si.Spans++
	if par != nil {
		// A span called from another service is that service's work,
		// already inside the caller's CLIENT span: unless its service was
		// named, it is not an entry point of the analysis (and neither is
		// anything below it).
		samesvc := as.c.frames[par.rec.frame].Service == service
		nd.keep = nd.keep && (as.c.opts.Service != "" || as.c.opts.AllServices || samesvc && par.keep)
		if !samesvc {
			si.Called++
		}
	} else {
		si.Entries++
	}
	if par != nil && (r.start != 0 || r.end != 0) {
		ps, pe := par.start, par.end
		tol := max(skewMinNanos, (pe-ps)/100)
		// (Differences, not sums: times near the int64 limit must not wrap.)
		if start < ps && ps-start > tol {
			if err := as.repair(r, WarnClockSkew, fmt.Sprintf("span %s (trace %s) starts %d ns before its parent %s; it is moved to start with the parent",
				spanIDString(r.id), as.c.traceIDs[r.trace], ps-start, spanIDString(par.rec.id))); err != nil {
				return err
			}
			move := ps - start
			start += move
			end = satAdd(end, move)
			nd.shift = satAdd(nd.shift, move)
		}
		if end > pe && nd.keep {
			as.out.late++
		}
	}
	nd.start, nd.end = start, end

	// Frames: the parent's path if the parent is in the same service.
	nd.framesAt = int32(len(as.arena))
	nd.entryRoute = r.route
	if par != nil && as.c.frames[par.rec.frame].Service == as.c.frames[r.frame].Service {
		as.arena = append(as.arena, as.arena[par.framesAt:par.framesAt+par.framesLen]...)
		nd.entryRoute = par.entryRoute
	}
	as.arena = append(as.arena, FrameID(r.frame))
	nd.framesLen = int32(len(as.arena)) - nd.framesAt
	if limit := as.c.limits.MaxDepth; int(nd.framesLen) > limit {
		// Keep the root-most and leaf-most spans, as for a deep sample.
		// Only the first span past the limit is a repair: its
		// descendants inherit the elided path.
		path := as.arena[nd.framesAt:]
		first := limit < 3 || path[(limit-1)/2] != as.c.elided
		path, cut := elideMiddle(path, limit, as.c.elided)
		as.arena = as.arena[:int(nd.framesAt)+len(path)]
		nd.framesLen = int32(len(path))
		if first {
			return as.repair(r, WarnDeepStack, fmt.Sprintf("span %s (trace %s) is nested more than --max-depth %d spans deep: the middle %d of its path are elided, the root-most and leaf-most kept",
				spanIDString(r.id), as.c.traceIDs[r.trace], limit, cut))
		}
	}
	return nil
}

// service returns the tally of the named service in the partition.
func (as *assembler) service(name string) *ServiceInfo {
	if si := as.lastSvc; si != nil && si.Name == name {
		return si // spans of one service mostly come together
	}
	if as.out.services == nil {
		as.out.services = map[string]*ServiceInfo{}
	}
	si := as.out.services[name]
	if si == nil {
		si = &ServiceInfo{Name: name}
		as.out.services[name] = si
	}
	as.lastSvc = si
	return si
}

// satAdd returns a+b, saturating at the int64 limits.
func satAdd(a, b int64) int64 {
	s := a + b
	switch {
	case b > 0 && s < a:
		return math.MaxInt64
	case b < 0 && s > a:
		return math.MinInt64
	}
	return s
}

func spanIDString(id uint64) string {
	var b [8]byte
	binary.BigEndian.PutUint64(b[:], id)
	return hex.EncodeToString(b[:])
}
