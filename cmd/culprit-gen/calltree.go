package main

import (
	"strconv"
	"strings"
	"time"
)

// A request is simulated as a tree of calls. Each node is either a Go
// function of the service (with its own frame) or a boundary call (a
// database query or an outbound HTTP request, with no frame of its own:
// its frames are the library code below the caller). Nodes know how long
// they take themselves (self), how much of that is on CPU, where on the
// stack that time is spent, and which span (if any) they record.
//
// The same tree drives every output: a goroutine snapshot finds the node
// active at an instant, a CPU profile spreads each node's CPU time over its
// stacks, and a trace emits one span per node that records one.

// tail is one place where a node's own time is spent: the line executing in
// the frame above (the node's function, or the caller's for a boundary
// call; 0 means the function's first line after its declaration), the
// frames below it (root-first) and a relative weight.
type tail struct {
	line   int64
	w      int
	frames []frame
}

// spanKind values of OTLP's Span.kind enum.
const (
	kindInternal = 1
	kindServer   = 2
	kindClient   = 3
)

// spanInfo is what a node contributes to a trace.
type spanInfo struct {
	name   string
	kind   int
	scope  int // index into the writer's scope table
	attrs  []keyValue
	status *otlpStatus
}

// node is one call in a simulated request.
type node struct {
	parent   *node
	fn       *fnDef  // nil for a boundary call
	callLine int64   // line in the parent's function that makes this call
	via      []frame // frames between the parent's function and fn
	labeled  bool    // runs under runtime/pprof.Do with the route label
	self     time.Duration
	cpu      time.Duration // on-CPU part of self
	wait     []tail        // off-CPU positions during self time
	cpuAt    []tail        // on-CPU positions during self time
	span     *spanInfo
	children []*node

	start, end int64 // absolute, ns since the Unix epoch; set by layout
}

// call adds a child that runs fn, called from line of n's function through
// the frames via.
func (n *node) call(fn *fnDef, line int64, via []frame) *node {
	c := &node{parent: n, fn: fn, callLine: line, via: via, labeled: n.labeled}
	n.children = append(n.children, c)
	return c
}

// boundary adds a boundary call child (a query or an outbound request).
func (n *node) boundary() *node {
	c := &node{parent: n, labeled: n.labeled}
	n.children = append(n.children, c)
	return c
}

// layout assigns start and end times: the node starts at start, and its own
// time is spread evenly before, between and after its children.
func (n *node) layout(start int64) int64 {
	n.start = start
	gap := int64(n.self) / int64(len(n.children)+1)
	t := start
	for _, c := range n.children {
		t = c.layout(t + gap)
	}
	n.end = t + int64(n.self) - gap*int64(len(n.children))
	return n.end
}

// activeAt returns the innermost node running at instant t, or nil when t
// is outside n.
func (n *node) activeAt(t int64) *node {
	if t < n.start || t >= n.end {
		return nil
	}
	for _, c := range n.children {
		if a := c.activeAt(t); a != nil {
			return a
		}
	}
	return n
}

// prefix appends the root-first frames from the goroutine's entry down to
// n's own function (or, for a boundary call, down to the caller's function).
// The last frame's line is left for the caller to set.
func (n *node) prefix(dst []frame) []frame {
	if n.fn == nil {
		return n.parent.prefix(dst)
	}
	if n.parent != nil {
		dst = n.parent.prefix(dst)
		dst[len(dst)-1].line = n.callLine
	}
	dst = append(dst, n.via...)
	return append(dst, n.fn.at(n.fn.start))
}

// stack returns the full root-first stack of n while it spends its own time
// at t.
func (n *node) stack(t tail) []frame {
	s := n.prefix(make([]frame, 0, 48))
	s[len(s)-1].line = t.line
	if t.line == 0 {
		s[len(s)-1].line = s[len(s)-1].fn.start + 1
	}
	return append(s, t.frames...)
}

// stackKey returns a string identifying a root-first stack, inlining marks
// included.
func stackKey(s []frame) string {
	var b strings.Builder
	for _, f := range s {
		b.WriteString(f.fn.name)
		b.WriteByte(':')
		b.WriteString(strconv.FormatInt(f.line, 10))
		if f.inl {
			b.WriteByte('i')
		}
		b.WriteByte(';')
	}
	return b.String()
}

// spanParent returns the nearest ancestor of n that records a span.
func (n *node) spanParent() *node {
	for p := n.parent; p != nil; p = p.parent {
		if p.span != nil {
			return p
		}
	}
	return nil
}

// walk calls f for n and every descendant, parents before children.
func (n *node) walk(f func(*node)) {
	f(n)
	for _, c := range n.children {
		c.walk(f)
	}
}
