package attribute

import (
	"cmp"
	"slices"
)

// Critical-path analysis of one request's spans.
//
// The method is the backward walk of critical-path analysis of
// distributed traces (Chow, Meisner, Flinn, Peek and Wenisch, "The
// Mystery Machine: End-to-end Performance Analysis of Large-scale
// Internet Services", OSDI 2014; Zhang, Isaacs, Yin, Ma, Curtsinger and
// Andrews, "CRISP: Critical Path Analysis of Large-Scale Microservice
// Architectures", USENIX ATC 2022): start at the end of the root span;
// at each span, the child whose end (clipped to the current point) is
// latest among the children that start before that point lies on the
// path, and is walked the same way from that end; the walk then goes on
// from that child's start. Time that no child covers is the span's own.
// Children are clipped to their parent's interval first, so a child that
// outlives its parent (async work) counts only while the parent waited,
// and the pieces of a request add up exactly to its root's duration.
//
// Ties: of several children ending at the same point, the one that
// started first is taken (it covers the whole wait; the others are
// parallel to it), then the lowest index.

// cpSpans is one request's spans as the critical path needs them,
// indexed 0..n-1: times in nanoseconds and children lists.
type cpSpans struct {
	start, end []int64
	// children of span i are kids[kidAt[i]:kidAt[i+1]].
	kidAt []int32
	kids  []int32
}

// cpPiece is a stretch of the critical path spent in span's own time
// (covered by none of its children on the path), or, for a span the
// walk does not enter, its whole time on the path.
type cpPiece struct {
	span int32
	dur  int64
}

// cpFrame is a span being walked: its clipped interval [a, b], the point
// t the walk has come back to, and its children sorted by clipped end.
type cpFrame struct {
	span   int32
	a, t   int64
	sorted []cpChild
	next   int // in sorted
}

type cpChild struct {
	i          int32
	start, end int64 // clipped to the parent's interval
}

// criticalPath walks the critical path of the spans below root, whose
// interval is [start[root], end[root]], and calls emit for each piece
// with a positive duration. enter reports whether the walk goes into a
// span's children; a span it does not enter is one piece (a database or
// network call: what happens inside the call is the call's). The pieces
// add up to end[root]-start[root] (0 if negative). scratch is reused.
func criticalPath(s *cpSpans, root int32, enter func(int32) bool, emit func(cpPiece), scratch *cpScratch) {
	a, b := s.start[root], s.end[root]
	if b <= a {
		return
	}
	stack := scratch.stack[:0]
	stack = append(stack, scratch.frame(s, root, a, b, enter))
	for len(stack) > 0 {
		f := &stack[len(stack)-1]
		if f.t <= f.a {
			scratch.release(f.sorted)
			stack = stack[:len(stack)-1]
			continue
		}
		// The child ending last among those that start before t. Children
		// skipped here start at or after t, and t only decreases, so the
		// scan never needs to look back.
		var c *cpChild
		for f.next < len(f.sorted) {
			k := &f.sorted[f.next]
			f.next++
			if k.start < f.t {
				c = k
				break
			}
		}
		if c == nil {
			emit(cpPiece{f.span, f.t - f.a})
			f.t = f.a
			continue
		}
		e := min(c.end, f.t)
		if gap := f.t - e; gap > 0 {
			emit(cpPiece{f.span, gap})
		}
		f.t = c.start
		if e > c.start {
			child := scratch.frame(s, c.i, c.start, e, enter)
			stack = append(stack, child) // f is not used past this point
		}
	}
	scratch.stack = stack[:0]
}

// cpScratch holds buffers reused across requests.
type cpScratch struct {
	stack []cpFrame
	free  [][]cpChild
}

// frame starts the walk of span i over [a, b]: its children clipped to
// [a, b] and sorted by end, latest first. A span the walk does not enter
// gets no children, so it is one piece.
func (sc *cpScratch) frame(s *cpSpans, i int32, a, b int64, enter func(int32) bool) cpFrame {
	f := cpFrame{span: i, a: a, t: b}
	if !enter(i) {
		return f
	}
	kids := s.kids[s.kidAt[i]:s.kidAt[i+1]]
	if len(kids) == 0 {
		return f
	}
	var buf []cpChild
	if n := len(sc.free); n > 0 {
		buf, sc.free = sc.free[n-1][:0], sc.free[:n-1]
	}
	for _, k := range kids {
		cs, ce := max(s.start[k], a), min(s.end[k], b)
		if ce < cs || cs >= b {
			continue // outside the parent's interval
		}
		buf = append(buf, cpChild{i: k, start: cs, end: ce})
	}
	slices.SortFunc(buf, func(x, y cpChild) int {
		return cmp.Or(cmp.Compare(y.end, x.end), cmp.Compare(x.start, y.start), cmp.Compare(x.i, y.i))
	})
	f.sorted = buf
	return f
}

func (sc *cpScratch) release(buf []cpChild) {
	if buf != nil {
		sc.free = append(sc.free, buf)
	}
}
