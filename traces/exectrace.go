package traces

import (
	"bufio"
	"bytes"
	"cmp"
	"fmt"
	"io"
	"maps"
	"slices"
	"strconv"
	"strings"

	"golang.org/x/exp/trace"
)

// Go execution traces (runtime/trace, /debug/pprof/trace) record every
// goroutine state change with its stack. The reader turns the waits of
// HTTP requests into paths of an ExecTrace source:
//
//   - A request is the stretch of an HTTP server connection goroutine
//     (net/http.(*conn).serve, or for HTTP/2 the goroutine that runs one
//     request's handler, (*http2serverConn).runHandler) inside its handler;
//     a gRPC call is the stretch of a goroutine inside
//     google.golang.org/grpc.(*Server).handleStream. An HTTP request: it opens at the first
//     event whose stack holds net/http.serverHandler.ServeHTTP and ends
//     at the goroutine's next event outside it (the response written by
//     finishRequest, the read of the next request on a keep-alive
//     connection, or the goroutine's exit). Its start is the later of the
//     goroutine's last start of running and its last event outside the
//     handler (the read of the request, or the start of net/http's
//     background read). Requests with a body follow the same rule. A
//     request whose goroutine existed when the trace began and had shown
//     no event outside a handler, or that is still open when it ends, is
//     cut by the trace window: it is left out, and a warning says how many.
//   - A goroutine created by a request's goroutines while the request is
//     open belongs to it if it exits before the request ends (errgroup
//     workers, a go statement joined by a WaitGroup); one still running at
//     the end (an HTTP transport's connection loops, a pool's connection
//     opener, a background refresher) does not, and its waits are left out.
//     Its paths start with its creator's stack, so the path reads from the
//     handler down through the go statement.
//   - Each blocked stretch (channel, select, sync, network, sleep) and each
//     system call of a request's goroutines is a path: its stack, root first;
//     wait/nanoseconds is the time from the block to the wake,
//     runnable/nanoseconds the time from the wake until it ran again (CPU
//     saturation, shown apart), wall/nanoseconds its share of the
//     request's wall clock (every instant in which k of the request's
//     stretches wait is split k ways; waits ended by one of the request's
//     own goroutines are joins and take no share), and calls/count the
//     round trips it starts.
//   - Calls count round trips, not waits (a reply already buffered never
//     blocks): a socket write (net.(*netFD).Write) is one call, charged to
//     the boundary above it, and so is a run of writes by one invocation of
//     one function (see writerKey) with no other wait or system call of the
//     goroutine between them (a request written in pieces, or a write
//     retried when the socket buffer was full); for the HTTP/1 client, whose socket writes
//     happen on the transport's own goroutines, the response handed from
//     the connection's read loop to net/http.(*persistConn).roundTrip (the
//     loop wakes the round trip, or the round trip wakes the loop blocked
//     on handing it over) is one call. A TLS handshake, or an HTTP/2
//     client whose writes are apart, count more calls than round trips;
//     pipelined queries written together count fewer.
//   - Pool waits (a stack through database/sql.(*DB).conn, a semaphore or
//     a pool's Acquire, or a goroutine started there to open a connection)
//     are connection waits (Call.Connection), with no calls.
//   - Read with Options.Timing (the latency view), a request is written as
//     a tree of spans instead: its goroutine, its waits, and the child
//     goroutines it waited for (see emitTimed).

// ExecTraceValueTypes are the values of every path of an ExecTrace source.
var ExecTraceValueTypes = []ValueType{
	{Type: "wait", Unit: "nanoseconds"},
	{Type: "wall", Unit: "nanoseconds"},
	{Type: "runnable", Unit: "nanoseconds"},
	{Type: "calls", Unit: "count"},
}

// Value indices of an ExecTrace path.
const (
	execWait = iota
	execWall
	execRunnable
	execCalls
)

// FormatExecTrace is the Input.Format of Go execution traces.
const FormatExecTrace = "go-exectrace"

// LooksLikeExecTrace reports whether prefix starts a Go execution trace:
// "go 1.NN trace" and three NUL bytes.
func LooksLikeExecTrace(prefix []byte) bool {
	rest, ok := bytes.CutPrefix(prefix, []byte("go 1."))
	if !ok {
		return false
	}
	i := 0
	for i < len(rest) && i < 3 && rest[i] >= '0' && rest[i] <= '9' {
		i++
	}
	return i > 0 && bytes.HasPrefix(rest[i:], []byte(" trace\x00\x00\x00"))
}

// execVersion returns the Go version a trace header names, "" if none.
func execVersion(prefix []byte) string {
	rest, _ := bytes.CutPrefix(prefix, []byte("go "))
	if i := bytes.IndexByte(rest, ' '); i > 0 {
		return string(rest[:i])
	}
	return ""
}

// stackInfo is what the reader needs of one stack, computed once.
type stackInfo struct {
	frames    []FrameID // root first
	connServe bool      // an HTTP server connection goroutine
	handler   bool      // inside its handler
	write     bool      // a socket write
	writer    int32     // for a socket write, which invocation of which function writes (see writerKey)
	roundTrip bool      // inside the HTTP/1 client's round trip
	readLoop  bool      // an HTTP/1 client connection's read loop
	pool      bool      // waiting for or opening a pooled connection
	watcher   bool      // a goroutine that only watches a context (see watcherFrames)
	ref       FrameRef  // where the paths of this stack (with no creator's prefix) store their frames
	// In emit: the stretch that heads this stack's group (groupAt) in
	// emit call number groupEmit.
	groupEmit uint64
	groupAt   int32
}

// execStretch is one wait of a request, kept until the request ends.
type execStretch struct {
	info       *stackInfo
	start, end int64 // the blocked interval
	runnable   int64
	wall       int64
	prefix     int32 // index in execReader.prefixes: the creator's path of a child goroutine; 0 none
	calls      int32
	join       bool  // ended by one of the request's own goroutines
	waker      int32 // for a join, which: children[waker-1]
	owner      int32 // whose wait: 0 the request's goroutine, k its child children[k-1]
}

// execRequest is one request being read.
type execRequest struct {
	g         trace.GoID // the connection goroutine
	start     int64
	cut       bool
	closed    bool
	endT      int64
	id        RequestID
	stretches []execStretch
	children  []trace.GoID // goroutines it created
	// With Options.Timing: what the latency view needs of each child
	// (kids[k] is children[k]), and how many children alive at its end
	// are not yet resolved (see emitTimed).
	kids    []execChild
	pending int
}

// execChild is a goroutine created for a request, as the latency view
// needs it (Options.Timing).
type execChild struct {
	creator        int32 // 0: the request's goroutine, k: children[k-1]
	prefix         int32 // see execStretch.prefix
	created, exitT int64
	startFrame     FrameID // the first frame of its first wait's stack: its function
	state          execChildState
}

type execChildState uint8

const (
	childAlive    execChildState = iota
	childKept                    // exited as the request's: its waits are the request's
	childDisowned                // waited again after the request ended: not the request's
)

type execPendKind uint8

const (
	pendNone execPendKind = iota
	pendBlock
	pendSyscall
)

// execG is the state of one goroutine.
type execG struct {
	id          trace.GoID
	known       bool         // seen before this event
	preexisting bool         // seen first through its status at the start of the trace
	conn        bool         // an HTTP server connection goroutine
	sawOut      bool         // has shown an event outside a handler
	req         *execRequest // open request (connection goroutine) or owner (child)
	child       bool
	exited      bool
	prefix      int32         // see execStretch.prefix
	stretches   []execStretch // a child's, until it exits
	runStart    int64
	lastOut     int64

	pend      execPendKind
	pendInfo  *stackInfo
	pendStart int64
	pendWake  int64
	pendCalls int32
	pendJoin  int32 // the child that ended the wait (its childIx): a join; 0 none
	childIx   int32 // a child's index in its request's children, +1
	writing   int32 // the last wait or system call was a socket write by this writer; 0: not a write
	// The goroutine's last two stacks and their information: goroutines
	// wait at the same few places again and again (a connection's read
	// and write, a worker's receive and send).
	lastStack, prevStack trace.Stack
	lastInfo, prevInfo   *stackInfo
}

// stackOf returns the information of stack s of goroutine g.
func (x *execReader) stackOf(g *execG, s trace.Stack) *stackInfo {
	switch {
	case s == g.lastStack && g.lastInfo != nil:
		return g.lastInfo
	case s == g.prevStack && g.prevInfo != nil:
		g.lastStack, g.prevStack = g.prevStack, g.lastStack
		g.lastInfo, g.prevInfo = g.prevInfo, g.lastInfo
		return g.lastInfo
	}
	in := x.info(s)
	g.prevStack, g.prevInfo = g.lastStack, g.lastInfo
	g.lastStack, g.lastInfo = s, in
	return in
}

// execReader reads one execution trace into a source.
type execReader struct {
	src     *Source
	limits  Limits
	name    string
	input   int // which input of the collector, for request keys
	stacks  map[trace.Stack]*stackInfo
	gs      goTable
	scratch []FrameID
	sfs     []trace.StackFrame
	// prefixes are the creators' paths of child goroutines ([0] is none).
	prefixes  [][]FrameID
	inPool    []bool // the prefix waits for or opens a pooled connection
	prefixIDs map[execPrefixKey]int32
	free      [][]execStretch // emptied stretch slices, for reuse
	freeGs    []*execG        // goroutines that exited, for reuse
	edges     []execEdge      // splitWall's scratch space
	times     []int64
	counts    []int
	groups    map[execGroupKey]int      // see emit
	emits     uint64                    // calls of emit
	writers   map[string]int32          // see writerKey
	refs      map[execGroupKey]FrameRef // stored frames of paths with a creator's prefix
	keyBuf    []byte
	nreq      map[trace.GoID]int // requests ended per connection goroutine
	timing    bool               // Options.Timing: requests as trees of spans (emitTimed)
	tree      execTree           // emitTimed's scratch space
	cut       int
	cutWait   int64
	first     int64
	last      int64
	runnable  int64
	wait      int64
	err       error // the first limit exceeded
}

// ExecCollector reads Go execution traces into one ExecTrace source.
type ExecCollector struct {
	src    *Source
	limits Limits
	inputs int
	timing bool // Options.Timing
}

// NewExecCollector returns a collector reading within limits.
func NewExecCollector(limits Limits) *ExecCollector {
	return &ExecCollector{limits: limits.withDefaults()}
}

// Source returns the source of everything added.
func (c *ExecCollector) Source() *Source {
	if c.src == nil {
		c.src = NewSource(ExecTrace, ExecTraceValueTypes)
	}
	return c.src
}

// Add reads one execution trace; name labels it in errors. An input that
// fails adds nothing: it is read into a source of its own, merged into
// the collector's once whole. The library's panics on corrupt data
// become errors.
func (c *ExecCollector) Add(name string, r io.Reader) (err error) {
	c.inputs++
	x := &execReader{
		src: NewSource(ExecTrace, ExecTraceValueTypes), limits: c.limits, name: name, input: c.inputs,
		stacks: map[trace.Stack]*stackInfo{}, nreq: map[trace.GoID]int{},
		first: -1, prefixes: [][]FrameID{nil}, inPool: []bool{false}, prefixIDs: map[execPrefixKey]int32{}, groups: map[execGroupKey]int{},
		writers: map[string]int32{}, refs: map[execGroupKey]FrameRef{},
	}
	if c.timing {
		x.timing = true
		x.src.Timing = &Timing{}
	}
	cr := &countingReader{r: r}
	defer func() {
		if p := recover(); p != nil {
			err = &ParseError{File: name, Offset: cr.n, Err: fmt.Errorf("malformed Go execution trace (the reader failed: %v)", p)}
		}
	}()
	if err := x.read(cr); err != nil {
		return err
	}
	if c.src == nil {
		c.src = x.src
		return nil
	}
	return c.merge(x.src)
}

// merge appends the paths of o, another input's source, to c's.
func (c *ExecCollector) merge(o *Source) error {
	dst := c.src
	frames := make([]FrameID, len(o.Frames))
	for i := 1; i < len(o.Frames); i++ {
		frames[i] = dst.InternFrame(o.Frames[i])
	}
	if len(dst.Frames) > c.limits.MaxFrames {
		return fmt.Errorf("%d distinct frames, more than the limit of %d (raise it with --max-frames): %w",
			len(dst.Frames), c.limits.MaxFrames, ErrLimit)
	}
	var buf []FrameID
	if tm := o.Timing; tm != nil {
		if dst.Timing == nil {
			dst.Timing = &Timing{}
		}
		dt, base := dst.Timing, int32(dst.Paths.Len())
		dt.Start = append(dt.Start, tm.Start...)
		dt.Goroutine = append(dt.Goroutine, tm.Goroutine...)
		for _, par := range tm.Parent {
			if par >= 0 {
				par += base
			}
			dt.Parent = append(dt.Parent, par)
		}
	}
	for i := range o.Paths.Len() {
		p := o.Paths.At(i)
		buf = buf[:0]
		for _, f := range p.Frames {
			buf = append(buf, frames[f])
		}
		p.Frames = buf
		if p.Call != 0 {
			p.Call = dst.InternCall(o.Calls[p.Call])
		}
		p.Request = dst.InternRequest(o.Requests[p.Request])
		dst.Paths.Append(p)
	}
	dst.DurationNanos += o.DurationNanos
	dst.Warnings.Merge(o.Warnings)
	return nil
}

func (x *execReader) read(cr *countingReader) error {
	br := bufio.NewReader(cr)
	head, _ := br.Peek(16)
	if v := execVersion(head); v != "" {
		if minor, err := strconv.Atoi(strings.TrimPrefix(v, "1.")); err == nil && minor < 22 {
			// The older format's parser sizes its tables from the input
			// before reading it: no limits hold there.
			return &ParseError{File: x.name, Err: fmt.Errorf("a Go execution trace from go %s; culprit reads traces of Go 1.22 and later: record it with a newer Go", v)}
		}
	}
	tr, err := trace.NewReader(br)
	if err != nil {
		return x.headerError(err)
	}
	// The library's ReadEvent is the floor of the reader's cost; the
	// requests are followed on this goroutine while another one reads
	// the next events (see eventPipe).
	p := startEventPipe(tr, func() int64 { return cr.n - int64(br.Buffered()) })
	defer p.stop()
	for {
		batch, ok := p.next()
		if !ok {
			break
		}
		for i := range batch {
			ev := &batch[i]
			t := int64(ev.Time())
			if x.first < 0 {
				x.first = t
			}
			x.last = t
			st := ev.StateTransition()
			if st.Resource.Kind != trace.ResourceGoroutine {
				continue
			}
			x.transition(ev, &st, t)
			if x.err != nil {
				return x.err
			}
		}
		p.done(batch)
	}
	if err := p.err; err != nil {
		if pe, ok := err.(eventPanic); ok {
			panic(pe.v) // words it as Add does for a panic here
		}
		// The library's message may go on with a dump of its state.
		msg, _, _ := strings.Cut(err.Error(), "\n")
		// The library reads through br (its own buffer is br), a batch
		// at a time: the position is the end of what it had read.
		return &ParseError{File: x.name, Offset: p.pos, Err: fmt.Errorf("malformed Go execution trace: %s", strings.TrimSuffix(msg, ":"))}
	}
	// Requests still open are cut by the end of the trace.
	for _, g := range x.gs.all() {
		if g.conn && g.req != nil {
			x.dropCut(g.req)
			g.req = nil
		}
	}
	x.flushTimed()
	if x.first >= 0 {
		x.src.DurationNanos += x.last - x.first
	}
	if x.src.RequestCount() == 0 && x.cut == 0 {
		x.src.Warnings.Add(Warning{Kind: "no-requests", File: x.name, Message: "no HTTP or gRPC server request with a wait in its handler: " +
			"culprit charges the waits of requests; was the trace taken while the service served traffic?"})
	}
	if x.cut > 0 {
		x.src.Warnings.Add(Warning{Kind: "cut-request", File: x.name, Message: fmt.Sprintf(
			"%d requests cut by the trace window were left out (%s of waits)", x.cut, fmtNanos(x.cutWait))})
	}
	if x.runnable > 0 && x.wait > 0 {
		x.src.Warnings.Add(Warning{Kind: "runnable", File: x.name, Message: fmt.Sprintf(
			"requests' goroutines waited %s to run after being woken (%.1f%% of their %s of waits): CPU saturation; see --value runnable",
			fmtNanos(x.runnable), 100*float64(x.runnable)/float64(x.wait), fmtNanos(x.wait))})
	}
	return nil
}

// headerError words the library's header errors: an unsupported version
// is named.
func (x *execReader) headerError(err error) error {
	msg := err.Error()
	if i := strings.Index(msg, "go 1."); i >= 0 && strings.Contains(msg, "unsupported") {
		return &ParseError{File: x.name, Err: fmt.Errorf("a Go execution trace from %s, which this build cannot read (it reads traces of Go 1.22 to 1.26)",
			strings.TrimSpace(msg[i:]))}
	}
	return &ParseError{File: x.name, Err: fmt.Errorf("malformed Go execution trace: %v", err)}
}

func fmtNanos(ns int64) string {
	switch {
	case ns >= 1e9:
		return strconv.FormatFloat(float64(ns)/1e9, 'f', 2, 64) + " s"
	case ns >= 1e6:
		return strconv.FormatFloat(float64(ns)/1e6, 'f', 2, 64) + " ms"
	}
	return strconv.FormatFloat(float64(ns)/1e3, 'f', 1, 64) + " µs"
}

func (x *execReader) g(id trace.GoID) *execG {
	g := x.gs.get(id)
	if g == nil {
		if n := len(x.freeGs); n > 0 {
			g, x.freeGs = x.freeGs[n-1], x.freeGs[:n-1]
			*g = execG{id: id}
		} else {
			g = &execG{id: id}
		}
		x.gs.put(id, g)
	}
	return g
}

// goTable holds the goroutines by ID: in a slice while IDs are small (a
// map lookup per event was a tenth of the reader's time), else in a map.
type goTable struct {
	dense  []*execG
	sparse map[trace.GoID]*execG
}

const goTableDense = 1 << 20

func (t *goTable) get(id trace.GoID) *execG {
	if uint64(id) < uint64(len(t.dense)) {
		return t.dense[id]
	}
	if id < goTableDense {
		return nil
	}
	return t.sparse[id]
}

func (t *goTable) put(id trace.GoID, g *execG) {
	switch {
	case id >= 0 && id < goTableDense:
		if int(id) >= len(t.dense) {
			n := min(max(int(id)+1, 2*len(t.dense)), goTableDense)
			t.dense = slices.Grow(t.dense, n-len(t.dense))[:n]
		}
		t.dense[id] = g
	default:
		if t.sparse == nil {
			t.sparse = map[trace.GoID]*execG{}
		}
		t.sparse[id] = g
	}
}

func (t *goTable) del(id trace.GoID) {
	if uint64(id) < uint64(len(t.dense)) {
		t.dense[id] = nil
		return
	}
	delete(t.sparse, id)
}

// all lists the goroutines, in order of ID.
func (t *goTable) all() []*execG {
	var out []*execG
	for _, g := range t.dense {
		if g != nil {
			out = append(out, g)
		}
	}
	for _, id := range slices.Sorted(maps.Keys(t.sparse)) {
		out = append(out, t.sparse[id])
	}
	return out
}

// transition handles one goroutine state change.
func (x *execReader) transition(ev *trace.Event, st *trace.StateTransition, t int64) {
	from, to := st.Goroutine()
	id := st.Resource.Goroutine()
	// The goroutine running the event (creator, waker) sees its own stack.
	creates, wakes := from == trace.GoNotExist, from == trace.GoWaiting && to == trace.GoRunnable
	if actor := ev.Goroutine(); (creates || wakes) && actor != trace.NoGoroutine && actor != id {
		if s := ev.Stack(); s != trace.NoStack {
			a := x.g(actor)
			info := x.info(s)
			x.observe(a, info, t)
			switch {
			case creates:
				x.created(a, x.g(id), info, t)
			case wakes:
				// The response handed over between the connection's read
				// loop and the round trip: one HTTP/1 round trip.
				if w := x.gs.get(id); w != nil && w.pend != pendNone {
					switch {
					case info.readLoop && w.pendInfo.roundTrip:
						w.pendCalls = 1
					case info.roundTrip && w.pendInfo.readLoop:
						x.add(a, execStretch{info: info, start: t, end: t, calls: 1})
					}
				}
			}
		}
	}
	if from == to {
		// A goroutine's status restated at the start of a generation of
		// the trace (about every second): nothing changed.
		return
	}
	g := x.g(id)
	if from == trace.GoUndetermined && !g.known {
		g.preexisting = true
	}
	g.known = true
	if st.Stack != trace.NoStack && from != trace.GoNotExist {
		x.observe(g, x.stackOf(g, st.Stack), t)
	}
	switch {
	case from == trace.GoWaiting && to == trace.GoRunnable:
		if g.pend != pendNone {
			g.pendWake = t
			if a := ev.Goroutine(); a != trace.NoGoroutine && a != id {
				if w := x.gs.get(a); w != nil && g.req != nil && w.req == g.req && w.child {
					g.pendJoin = w.childIx
				}
			}
		}
	case from == trace.GoSyscall && to == trace.GoRunnable:
		if g.pend != pendNone {
			g.pendWake = t
		}
	case to == trace.GoRunning:
		if g.pend != pendNone && (from == trace.GoRunnable || from == trace.GoSyscall) {
			wake := g.pendWake
			if from == trace.GoSyscall || wake == 0 {
				wake = t
			}
			x.add(g, execStretch{info: g.pendInfo, start: g.pendStart, end: wake, runnable: t - wake,
				calls: g.pendCalls, join: g.pendJoin != 0, waker: g.pendJoin})
		}
		g.pend = pendNone
		g.runStart = t
	case from == trace.GoRunning && to == trace.GoWaiting && st.Stack != trace.NoStack:
		info := x.stackOf(g, st.Stack)
		g.setPend(pendBlock, info, t)
		g.writing = info.writer // a write waiting for room goes on
	case from == trace.GoRunning && to == trace.GoSyscall && st.Stack != trace.NoStack:
		info := x.stackOf(g, st.Stack)
		g.setPend(pendSyscall, info, t)
		// A run of writes by one function (one invocation: the same
		// stack above it) with no other wait or system call between them
		// is one request written: one call.
		if info.write && info.writer != g.writing {
			g.pendCalls = 1
		}
		g.writing = info.writer
	case to == trace.GoNotExist:
		x.exit(g, t)
	case to == trace.GoRunnable || to == trace.GoWaiting:
		g.pend = pendNone
	}
}

func (g *execG) setPend(k execPendKind, info *stackInfo, t int64) {
	g.pend, g.pendInfo, g.pendStart, g.pendWake, g.pendCalls, g.pendJoin = k, info, t, 0, 0, 0
}

// observe updates a connection goroutine's requests from one of its stacks.
func (x *execReader) observe(g *execG, info *stackInfo, t int64) {
	if info.connServe {
		g.conn = true
	}
	if !g.conn {
		return
	}
	if info.handler {
		if g.req == nil {
			start := max(g.runStart, g.lastOut)
			g.req = &execRequest{g: g.id, start: start, cut: g.preexisting && !g.sawOut}
		}
		return
	}
	g.sawOut, g.lastOut = true, t
	if g.req != nil {
		x.end(g.req, t)
		g.req = nil
	}
}

// created records goroutine c, created by a at time t.
func (x *execReader) created(a, c *execG, info *stackInfo, t int64) {
	c.preexisting, c.known = false, true
	if a.req == nil || a.exited || a.req.closed {
		return
	}
	c.child, c.req = true, a.req
	// Children created at one place share their prefix.
	key := execPrefixKey{a.prefix, info}
	id, ok := x.prefixIDs[key]
	if !ok {
		pre := info.frames
		if a.prefix != 0 {
			pre = append(slices.Clone(x.prefixes[a.prefix]), info.frames...)
		}
		if d := x.limits.MaxDepth / 2; len(pre) > d {
			pre = pre[len(pre)-d:]
		}
		id = int32(len(x.prefixes))
		x.prefixes = append(x.prefixes, pre)
		x.inPool = append(x.inPool, x.inPool[a.prefix] || info.pool)
		x.prefixIDs[key] = id
	}
	c.prefix = id
	a.req.children = append(a.req.children, c.id)
	c.childIx = int32(len(a.req.children))
	if x.timing {
		a.req.kids = append(a.req.kids, execChild{creator: a.childIx, prefix: id, created: t})
	}
}

// execPrefixKey names a child goroutine's prefix: its creator's prefix
// and the stack of the go statement.
type execPrefixKey struct {
	parent int32
	info   *stackInfo
}

// add records a stretch of goroutine g, if it belongs to a request.
func (x *execReader) add(g *execG, s execStretch) {
	switch {
	case g.req == nil, s.info.watcher:
		return
	case g.child:
		if g.req.closed && s.start >= g.req.endT {
			x.release(g.stretches) // still at work after its request: not its own
			if x.timing {
				g.req.kids[g.childIx-1].state = childDisowned
				x.resolved(g.req)
			}
			g.req, g.stretches = nil, nil
			return
		}
		s.prefix, s.owner = g.prefix, g.childIx
		if x.timing && len(s.info.frames) > 0 {
			if k := &g.req.kids[g.childIx-1]; k.startFrame == 0 {
				k.startFrame = s.info.frames[0]
			}
		}
		if g.stretches == nil {
			g.stretches = x.stretchSlice()
		}
		g.stretches = append(g.stretches, s)
	case s.info.handler:
		if g.req.stretches == nil {
			g.req.stretches = x.stretchSlice()
		}
		g.req.stretches = append(g.req.stretches, s)
	}
}

// stretchSlice returns an empty slice for stretches, reused if one is free.
func (x *execReader) stretchSlice() []execStretch {
	if n := len(x.free); n > 0 {
		s := x.free[n-1]
		x.free = x.free[:n-1]
		return s
	}
	return nil
}

// release gives a slice of stretches back for reuse.
func (x *execReader) release(s []execStretch) {
	if cap(s) > 0 && cap(s) <= 1024 && len(x.free) < 4096 {
		x.free = append(x.free, s[:0])
	}
}

// exit ends goroutine g: a child hands its stretches to its request if
// that is still open; a connection goroutine ends its request.
func (x *execReader) exit(g *execG, t int64) {
	g.exited = true
	g.pend = pendNone
	if g.child {
		if r := g.req; x.timing && r != nil && !r.cut {
			k := &r.kids[g.childIx-1]
			k.state, k.exitT = childKept, t
		}
		switch r := g.req; {
		case r == nil:
		case !r.closed:
			if r.stretches == nil {
				r.stretches, g.stretches = g.stretches, nil
			} else {
				r.stretches = append(r.stretches, g.stretches...)
			}
		case x.timing && !r.cut:
			r.stretches = append(r.stretches, g.stretches...)
			x.resolved(r)
		case !r.cut:
			// It exited after its request ended without waiting again
			// (it had woken the handler, which finished first).
			x.emit(r, g.stretches, false)
		}
		x.release(g.stretches)
		g.stretches, g.req = nil, nil
	} else if g.conn && g.req != nil {
		x.end(g.req, t)
		g.req = nil
	}
	x.gs.del(g.id)
	x.freeGs = append(x.freeGs, g) // nothing refers to it past its exit
}

// end closes request r at time t and writes its paths.
// Its children still alive stay its own until they exit, unless they
// wait or call the system again first.
func (x *execReader) end(r *execRequest, t int64) {
	r.closed, r.endT = true, t
	if r.cut {
		x.dropCut(r)
		return
	}
	x.nreq[r.g]++
	key := "G" + strconv.Itoa(x.input) + "." + strconv.FormatInt(int64(r.g), 10) + "." + strconv.Itoa(x.nreq[r.g])
	r.id = x.src.InternRequest(key)
	if x.timing {
		for _, k := range r.kids {
			if k.state == childAlive {
				r.pending++
			}
		}
		if r.pending == 0 {
			x.emitTimed(r)
		}
		return
	}
	x.emit(r, r.stretches, len(r.children) > 0)
	x.release(r.stretches)
	r.stretches = nil
}

// execGroupKey is what stretches of one request must share to be one path.
type execGroupKey struct {
	info   *stackInfo
	prefix int32
}

// emit writes stretches of request r as paths: one per stack (and
// creator's path), its values the sums of its stretches'. Stretches of
// one goroutine (not concurrent) never overlap: each one's wall-clock
// share is its wait.
func (x *execReader) emit(r *execRequest, ss []execStretch, concurrent bool) {
	if len(ss) == 0 {
		return
	}
	if concurrent {
		x.splitWall(ss)
	} else {
		for i := range ss {
			if s := &ss[i]; !s.join && s.end > s.start {
				s.wall = s.end - s.start
			}
		}
	}
	// Stretches with no creator's prefix (most) find their group through
	// their stack's information, marked with this call's number; the
	// others through a map.
	x.emits++
	if len(x.groups) > 0 {
		clear(x.groups)
	}
	for i := range ss {
		s := &ss[i]
		at, ok := -1, false
		if s.prefix == 0 {
			if ok = s.info.groupEmit == x.emits; ok {
				at = int(s.info.groupAt)
			} else {
				s.info.groupEmit, s.info.groupAt = x.emits, int32(i)
			}
		} else {
			at, ok = x.groups[execGroupKey{s.info, s.prefix}]
			if !ok {
				x.groups[execGroupKey{s.info, s.prefix}] = i
			}
		}
		if ok {
			g := &ss[at]
			g.end += s.end - s.start // end - start is the summed wait
			g.runnable += s.runnable
			g.wall += s.wall
			g.calls += s.calls
			s.info = nil
		}
	}
	var vals [4]int64
	for i := range ss {
		s := &ss[i]
		if s.info == nil || len(s.info.frames) == 0 {
			continue
		}
		wait := s.end - s.start
		vals[execWait], vals[execWall], vals[execRunnable], vals[execCalls] = wait, s.wall, s.runnable, int64(s.calls)
		x.wait += wait
		x.runnable += s.runnable
		x.appendStretch(Path{Values: vals[:], Request: r.id, Call: x.connection(s.info.pool || x.inPool[s.prefix])}, s)
	}
}

// connection returns the call of a path waiting for or opening a pooled
// connection (pool), else none.
func (x *execReader) connection(pool bool) CallID {
	if pool {
		return x.src.InternCall(Call{Connection: true})
	}
	return 0
}

// appendStretch appends p with the frames of stretch s: its creator's
// prefix, if any, and its stack.
func (x *execReader) appendStretch(p Path, s *execStretch) {
	if s.prefix == 0 {
		x.appendShared(p, &s.info.ref, nil, s.info.frames)
		return
	}
	k := execGroupKey{s.info, s.prefix}
	ref := x.refs[k]
	x.appendShared(p, &ref, x.prefixes[s.prefix], s.info.frames)
	x.refs[k] = ref
}

// appendShared appends p with frames prefix+frames. Requests wait at the
// same places again and again: the paths of one stack (and creator's
// prefix) share one copy of their frames, stored by the first and named
// by *ref after it.
func (x *execReader) appendShared(p Path, ref *FrameRef, prefix, frames []FrameID) {
	if *ref != (FrameRef{}) {
		x.src.Paths.AppendRef(p, *ref)
		return
	}
	p.Frames = frames
	if len(prefix) > 0 {
		p.Frames = append(append(x.scratch[:0], prefix...), frames...)
		x.scratch = p.Frames
	}
	x.src.Paths.Append(p)
	*ref = x.src.Paths.Ref(x.src.Paths.Len() - 1)
}

// resolved notes that a child of request r, alive when r ended, exited
// or waited again (Options.Timing): once none is left, r is written.
func (x *execReader) resolved(r *execRequest) {
	if r.pending > 0 {
		r.pending--
		if r.pending == 0 {
			x.emitTimed(r)
		}
	}
}

// flushTimed writes, at the end of the trace, the requests still waiting
// for children (Options.Timing); the children still alive are not theirs.
func (x *execReader) flushTimed() {
	if !x.timing {
		return
	}
	for _, g := range x.gs.all() {
		if r := g.req; g.child && r != nil && r.closed && r.pending > 0 {
			r.pending = 0
			x.emitTimed(r)
		}
	}
}

// emitTimed writes request r for the latency view (Options.Timing) as a
// tree of spans, each path's value 0 (wait) its duration:
//
//   - first the request's goroutine, from the request's start to its end;
//     its frames are the longest common prefix of its stacks and of its
//     children's creators' (down to the handler when its waits happen in
//     different calls), so that its entry point is rank's;
//   - one path per wait of the request's goroutines that rank keeps, from
//     the block to the wake, under its goroutine; its other values are
//     those rank gives the wait;
//   - one path per child goroutine that the request waited for, from its
//     creation to its exit, under the wait of an ancestor that it ended
//     (a join; the last one if several), else under the join of its
//     creator during which it exited. Its frames are its creator's path
//     and the first frame of its own stacks (its function). A child that
//     no goroutine of the request waited for cannot be on the request's
//     critical path: it is left out, and so are its waits (rank counts
//     them).
//
// A goroutine's time that none of its paths covers is its own: running,
// or runnable after a wake. The request is written if rank writes a path
// of it, so that both count the same requests.
func (x *execReader) emitTimed(r *execRequest) {
	ss, kids := r.stretches, r.kids
	defer func() {
		x.release(r.stretches)
		r.stretches, r.children, r.kids = nil, nil, nil
	}()
	if !slices.ContainsFunc(ss, func(s execStretch) bool { return len(s.info.frames) > 0 }) {
		return // rank writes nothing of it
	}
	t := &x.tree
	// The joins, by goroutine and start.
	t.joins = t.joins[:0]
	for i := range ss {
		if s := &ss[i]; s.join && len(s.info.frames) > 0 {
			t.joins = append(t.joins, int32(i))
		}
	}
	slices.SortFunc(t.joins, func(a, b int32) int {
		return cmp.Or(cmp.Compare(ss[a].owner, ss[b].owner), cmp.Compare(ss[a].start, ss[b].start))
	})
	// Where each child hangs: the last join of an ancestor that it ended,
	// else the join of its creator during which it exited.
	under := fill(&t.under, len(kids), -1)
	for _, i := range t.joins {
		s := &ss[i]
		w := s.waker - 1
		if kids[w].state == childKept && descends(kids, w, s.owner) && (under[w] < 0 || s.end > ss[under[w]].end) {
			under[w] = i
		}
	}
	for k := range kids {
		c := &kids[k]
		if under[k] >= 0 || c.state != childKept {
			continue
		}
		owner := c.creator
		j, _ := slices.BinarySearchFunc(t.joins, [2]int64{int64(owner), c.exitT}, func(i int32, key [2]int64) int {
			return cmp.Or(cmp.Compare(int64(ss[i].owner), key[0]), cmp.Compare(ss[i].start, key[1]+1))
		})
		if j > 0 {
			if s := &ss[t.joins[j-1]]; s.owner == owner && s.end >= c.exitT {
				under[k] = t.joins[j-1]
			}
		}
	}
	// Path indices: the request, its children that are in the tree (each
	// below a join of a goroutine in the tree), the waits of those.
	root := int32(x.src.Paths.Len())
	next := root + 1
	node := fill(&t.node, len(kids), -1)
	for k := range kids {
		if u := under[k]; u >= 0 && (ss[u].owner == 0 || node[ss[u].owner-1] >= 0) {
			node[k] = next
			next++
		}
	}
	wait := fill(&t.wait, len(ss), -1)
	for i := range ss {
		if s := &ss[i]; len(s.info.frames) > 0 && (s.owner == 0 || node[s.owner-1] >= 0) {
			wait[i] = next
			next++
		}
	}
	// The request's frames.
	lcp, found := t.lcp[:0], false
	common := func(fs []FrameID) {
		if !found {
			lcp, found = append(lcp, fs...), true
			return
		}
		n := 0
		for n < len(lcp) && n < len(fs) && lcp[n] == fs[n] {
			n++
		}
		// One function called from different lines is common too.
		if n < len(lcp) && n < len(fs) && x.src.Frames[lcp[n]].Function == x.src.Frames[fs[n]].Function {
			n++
		}
		lcp = lcp[:n]
	}
	for i := range ss {
		if s := &ss[i]; s.owner == 0 && len(s.info.frames) > 0 {
			common(s.info.frames)
		}
	}
	for _, c := range kids {
		if c.state == childKept {
			common(x.prefixes[c.prefix])
		}
	}
	if len(lcp) == 0 {
		// Stacks cut at the depth limit share no root: the first wait's.
		for i := range ss {
			if s := &ss[i]; len(s.info.frames) > 0 {
				lcp = append(append(lcp, x.prefixes[s.prefix]...), s.info.frames...)
				break
			}
		}
	}
	t.lcp = lcp
	if len(kids) > 0 {
		x.splitWall(ss)
	} else {
		for i := range ss {
			if s := &ss[i]; !s.join && s.end > s.start {
				s.wall = s.end - s.start
			}
		}
	}

	tm := x.src.Timing
	timed := func(start int64, parent int32, g bool) {
		tm.Start = append(tm.Start, start)
		tm.Parent = append(tm.Parent, parent)
		tm.Goroutine = append(tm.Goroutine, g)
	}
	// The goroutines' paths: value 0 is their duration, the others none.
	add := func(frames []FrameID, start, end int64, parent int32, call CallID) {
		timed(start, parent, true)
		vals := [4]int64{execWait: end - start}
		x.src.Paths.Append(Path{Frames: frames, Values: vals[:], Request: r.id, Call: call})
	}
	add(lcp, r.start, r.endT, -1, 0)
	for k := range kids {
		c := &kids[k]
		if node[k] < 0 {
			continue
		}
		frames := append(x.scratch[:0], x.prefixes[c.prefix]...)
		if c.startFrame != 0 {
			frames = append(frames, c.startFrame)
		}
		x.scratch = frames
		add(frames, c.created, c.exitT, wait[under[k]], x.connection(x.inPool[c.prefix]))
	}
	for i := range ss {
		s := &ss[i]
		if len(s.info.frames) == 0 {
			continue
		}
		x.wait += s.end - s.start
		x.runnable += s.runnable
		if wait[i] < 0 {
			continue
		}
		parent := root
		if s.owner > 0 {
			parent = node[s.owner-1]
		}
		vals := [4]int64{s.end - s.start, s.wall, s.runnable, int64(s.calls)}
		timed(s.start, parent, false)
		x.appendStretch(Path{Values: vals[:], Request: r.id, Call: x.connection(s.info.pool || x.inPool[s.prefix])}, s)
	}
}

// execTree is emitTimed's scratch space: the joins; per child, the join
// it hangs under and its path; per stretch, its path (-1: none).
type execTree struct {
	joins, under, node, wait []int32
	lcp                      []FrameID
}

// fill returns *s resized to n elements, each v.
func fill(s *[]int32, n int, v int32) []int32 {
	*s = slices.Grow((*s)[:0], n)[:n]
	for i := range *s {
		(*s)[i] = v
	}
	return *s
}

// descends reports whether kids[k] was created, directly or not, by the
// goroutine owner (0: the request's own, j: kids[j-1]).
func descends(kids []execChild, k int32, owner int32) bool {
	if owner == 0 {
		return true
	}
	for a := kids[k].creator; a != 0; a = kids[a-1].creator {
		if a == owner {
			return true
		}
	}
	return false
}

func (x *execReader) dropCut(r *execRequest) {
	x.cut++
	for _, s := range r.stretches {
		x.cutWait += s.end - s.start
	}
	x.release(r.stretches)
	r.stretches = nil
	for _, id := range r.children {
		if c := x.gs.get(id); c != nil && c.req == r {
			x.release(c.stretches)
			c.req, c.stretches = nil, nil
		}
	}
}

// execEdge starts (+1) or ends (-1) a wait, for splitWall.
type execEdge struct {
	t     int64
	delta int
}

// splitWall sets each stretch's share of the request's wall clock: every
// instant during which k stretches (joins left out) wait is split k ways,
// so that the shares add up to the union of the waits.
func (x *execReader) splitWall(ss []execStretch) {
	edges := x.edges[:0]
	for i := range ss {
		s := &ss[i]
		if s.join || s.end <= s.start {
			continue
		}
		edges = append(edges, execEdge{s.start, 1}, execEdge{s.end, -1})
	}
	x.edges = edges
	if len(edges) == 0 {
		return
	}
	if len(edges) == 2 {
		for i := range ss {
			if s := &ss[i]; !s.join && s.end > s.start {
				s.wall = s.end - s.start
			}
		}
		return
	}
	slices.SortFunc(edges, func(a, b execEdge) int {
		if a.t != b.t {
			if a.t < b.t {
				return -1
			}
			return 1
		}
		return a.delta - b.delta
	})
	// Segment boundaries and the number of waits over each.
	times, counts := x.times[:0], x.counts[:0]
	k := 0
	for i, e := range edges {
		k += e.delta
		if i+1 < len(edges) && edges[i+1].t == e.t {
			continue
		}
		times = append(times, e.t)
		counts = append(counts, k)
	}
	x.times, x.counts = times, counts
	for i := range ss {
		s := &ss[i]
		if s.join || s.end <= s.start {
			continue
		}
		lo, _ := slices.BinarySearch(times, s.start)
		var share float64
		for j := lo; j+1 < len(times) && times[j] < s.end; j++ {
			if counts[j] > 0 {
				share += float64(times[j+1]-times[j]) / float64(counts[j])
			}
		}
		s.wall = int64(share + 0.5)
	}
}

// Frames the reader recognises in stacks (Go 1.22 to 1.26 standard library).
const (
	fnConnServe     = "net/http.(*conn).serve"
	fnH2Handler     = "net/http.(*http2serverConn).runHandler" // HTTP/2: a goroutine per request
	fnXH2Handler    = "golang.org/x/net/http2.(*serverConn).runHandler"
	fnGRPCStream    = "google.golang.org/grpc.(*Server).handleStream" // a gRPC call, in a goroutine per stream or a worker
	fnServerHandler = "net/http.serverHandler.ServeHTTP"
	fnRoundTrip     = "net/http.(*persistConn).roundTrip"
	fnReadLoop      = "net/http.(*persistConn).readLoop"
)

// poolFrames are the functions that wait for or open a pooled connection.
var poolFrames = []string{
	"database/sql.(*DB).conn",
	"golang.org/x/sync/semaphore.(*Weighted).Acquire",
	"github.com/jackc/puddle/v2.(*Pool).Acquire",
	"github.com/jackc/pgx/v5/pgxpool.(*Pool).Acquire",
}

// watcherFrames are the functions of goroutines that a driver starts
// beside a query to watch its context (to cancel it): they wait while the
// application reads the rows, which is not a call. Their waits are not
// charged.
var watcherFrames = []string{
	"database/sql.(*Rows).awaitDone",
	"database/sql.(*Tx).awaitDone",
	"github.com/jackc/pgx/v5/pgconn/ctxwatch.(*ContextWatcher).Watch.func1",
	"github.com/jackc/pgx/v4/pgconn/internal/ctxwatch.(*ContextWatcher).Watch.func1",
}

// socketWrites are the functions through which every write to a network
// connection passes (RawWrite: drivers that write through a raw
// connection, as pgx did before version 5.5).
var socketWrites = []string{"net.(*netFD).Write", "net.(*netFD).writeBuffers", "net.(*netFD).writeTo", "net.(*netFD).writeMsg",
	"internal/poll.(*FD).RawWrite"}

// writerKey numbers the writer of a socket write, given its stack leaf
// first: the deepest frame outside the standard library's I/O plumbing
// (the driver's function that writes), by its name only, and the frames
// above it with their lines. Writes of one query in several pieces, from
// different lines of one function, get one key.
func (x *execReader) writerKey(sfs []trace.StackFrame) int32 {
	i := 0
	for i < len(sfs)-1 && isIOPlumbing(sfs[i].Func) {
		i++
	}
	b := x.keyBuf[:0]
	b = append(b, sfs[i].Func...)
	for _, f := range sfs[i+1:] {
		b = append(b, 0)
		b = append(b, f.Func...)
		b = strconv.AppendUint(append(b, ':'), f.Line, 10)
	}
	x.keyBuf = b
	id, ok := x.writers[string(b)]
	if !ok {
		id = int32(len(x.writers) + 1)
		x.writers[string(b)] = id
	}
	return id
}

// isIOPlumbing reports whether fn is a function of the standard library
// through which a write to a connection passes.
func isIOPlumbing(fn string) bool {
	for _, p := range []string{"runtime.", "syscall.", "internal/", "net.", "crypto/tls.", "bufio.", "io.", "os."} {
		if strings.HasPrefix(fn, p) {
			return true
		}
	}
	return false
}

// info returns what the reader needs of stack s, computed once per stack.
func (x *execReader) info(s trace.Stack) *stackInfo {
	if in, ok := x.stacks[s]; ok {
		return in
	}
	sfs := x.sfs[:0]
	for f := range s.Frames() {
		sfs = append(sfs, f)
	}
	x.sfs = sfs
	if len(sfs) > x.limits.MaxDepth/2 {
		sfs = sfs[:x.limits.MaxDepth/2] // keep the leaf end: the boundary is there
	}
	in := &stackInfo{frames: make([]FrameID, len(sfs))}
	for i, f := range sfs {
		fn := f.Func
		switch {
		case fn == fnConnServe, fn == fnH2Handler, fn == fnXH2Handler:
			in.connServe = true
		case fn == fnServerHandler:
			in.handler = true
		case fn == fnGRPCStream:
			in.connServe, in.handler = true, true
		case fn == fnRoundTrip:
			in.roundTrip = true
		case fn == fnReadLoop:
			in.readLoop = true
		case slices.Contains(socketWrites, fn):
			in.write = true
		case slices.Contains(poolFrames, fn):
			in.pool = true
		case slices.Contains(watcherFrames, fn):
			in.watcher = true
		}
		in.frames[len(sfs)-1-i] = x.src.InternFrame(Frame{Function: fn, File: f.File, Line: int64(f.Line)})
	}
	if in.write {
		in.writer = x.writerKey(sfs)
	}
	if len(x.src.Frames) > x.limits.MaxFrames && x.err == nil {
		x.err = fmt.Errorf("%s: %d distinct frames, more than the limit of %d (raise it with --max-frames): %w",
			x.name, len(x.src.Frames), x.limits.MaxFrames, ErrLimit)
	}
	x.stacks[s] = in
	return in
}
