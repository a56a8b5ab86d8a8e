package traces

import "slices"

// Paths holds a source's paths in compact storage without pointers: a
// 20-byte record per path, and the records, frames and values of all
// paths in shared chunks, so that growing copies almost nothing. A
// million spans take about 60 MB instead of 100, and the garbage
// collector has nothing in them to scan. Append copies a path in;
// At returns a view of one.
//
// The zero Paths is empty and takes the number of values per path from
// its first Append; NewSource sets it from the source's value types.
type Paths struct {
	nv     int         // values per path
	recs   [][]pathRec // chunks of recChunk records
	n      int         // paths
	frames [][]FrameID // chunks; a path's frames lie in one chunk
	values [][]int64   // chunks of valueChunk paths' values
	// labels maps label set IDs (pathRec.labels) to the sets; [0] is nil.
	labels   []*LabelSet
	labelIDs map[*LabelSet]int32
	lastSet  *LabelSet // the last set appended, and its ID
	lastID   int32
	// long holds the frame counts of paths of 65535 frames or more.
	long map[int32]int32
	// shared: some paths were appended with AppendRef, so paths may share
	// their stored frames (see FrameKey).
	shared bool
	stored int // frames stored (fewer than the paths' with shared frames)
}

// FrameRef names the stored frames of a path (Ref), so that paths with
// the same frames can share them (AppendRef). The zero FrameRef names
// none.
type FrameRef struct {
	rec pathRec // chunk and atN of the path; labels, request and call unused
	n   int32   // frame count, +1 (0: no reference)
}

// pathRec is one path: where its frames are, and its IDs.
type pathRec struct {
	chunk   int32  // frames: frames[chunk][at:at+n]
	atN     uint32 // at<<16 | n; n = longPath: see Paths.long
	labels  int32
	request RequestID
	call    CallID
}

// longPath marks a path whose frame count is in Paths.long; such a path
// has a chunk of its own (at 0), since chunks hold frameChunk frames.
const longPath = 0xffff

// frames returns the frame range of record i.
func (ps *Paths) frameRange(i int) (chunk, at, n int32) {
	r := ps.rec(i)
	at, n = int32(r.atN>>16), int32(r.atN&0xffff)
	if n == longPath {
		n = ps.long[int32(i)]
	}
	return r.chunk, at, n
}

const (
	frameChunk = 1 << 16 // frame IDs per chunk (a longer path gets a chunk of its own); at most 1<<16
	valueChunk = 1 << 12 // paths per value chunk
	recShift   = 14
	recChunk   = 1 << recShift // records per chunk
)

// rec returns the record of path i.
func (ps *Paths) rec(i int) *pathRec { return &ps.recs[i>>recShift][i&(recChunk-1)] }

// Len returns the number of paths.
func (ps *Paths) Len() int { return ps.n }

// At returns path i. Its Frames and Values share the store's memory and
// must not be modified.
func (ps *Paths) At(i int) Path {
	r := ps.rec(i)
	vc := ps.values[i/valueChunk]
	v := (i % valueChunk) * ps.nv
	c, at, n := ps.frameRange(i)
	return Path{
		Frames:  ps.frames[c][at : at+n : at+n],
		Values:  vc[v : v+ps.nv : v+ps.nv],
		Labels:  ps.labels[r.labels],
		Request: r.request,
		Call:    r.call,
	}
}

// Frames returns the frames of path i (as At(i).Frames, without the rest).
func (ps *Paths) Frames(i int) []FrameID {
	c, at, n := ps.frameRange(i)
	return ps.frames[c][at : at+n : at+n]
}

// Value returns value v of path i.
func (ps *Paths) Value(i, v int) int64 {
	return ps.values[i/valueChunk][(i%valueChunk)*ps.nv+v]
}

// Append copies p in. Its Values are cut or padded with zeros to the
// store's number of values per path.
func (ps *Paths) Append(p Path) {
	if ps.n == 0 && ps.nv == 0 {
		ps.nv = len(p.Values)
	}
	i := ps.n
	if i%valueChunk == 0 {
		ps.values = append(ps.values, make([]int64, valueChunk*ps.nv))
	}
	copy(ps.values[i/valueChunk][(i%valueChunk)*ps.nv:(i%valueChunk+1)*ps.nv], p.Values)
	chunk, at := ps.putFrames(p.Frames)
	n := uint32(len(p.Frames))
	if n >= longPath {
		if ps.long == nil {
			ps.long = map[int32]int32{}
		}
		ps.long[int32(i)] = int32(n)
		n = longPath
	}
	if i%recChunk == 0 {
		size := recChunk
		if i == 0 {
			size = 64 // a small source stays small: the first chunk grows as a slice does
		}
		ps.recs = append(ps.recs, make([]pathRec, 0, size))
	}
	c := &ps.recs[len(ps.recs)-1]
	*c = append(*c, pathRec{chunk: chunk, atN: uint32(at)<<16 | n,
		labels: ps.labelID(p.Labels), request: p.Request, call: p.Call})
	ps.n++
}

// Ref returns the reference of path i's stored frames.
func (ps *Paths) Ref(i int) FrameRef {
	_, _, n := ps.frameRange(i)
	return FrameRef{rec: *ps.rec(i), n: n + 1}
}

// AppendRef appends p with the frames that ref names instead of
// p.Frames, which is ignored: the paths share one copy of their frames.
// A zero ref appends p as Append does.
func (ps *Paths) AppendRef(p Path, ref FrameRef) {
	if ref.n == 0 {
		ps.Append(p)
		return
	}
	ps.shared = true
	p.Frames = nil
	ps.Append(p)
	i := ps.n - 1
	r := ps.rec(i)
	r.chunk, r.atN = ref.rec.chunk, ref.rec.atN
	if ref.rec.atN&0xffff == longPath {
		ps.long[int32(i)] = ref.n - 1
	}
}

// Shared reports whether paths may share stored frames: then paths with
// the same FrameKey have the same frames.
func (ps *Paths) Shared() bool { return ps.shared }

// FrameKey identifies path i's stored frames: paths with equal keys have
// equal frames (the converse holds only for paths appended with
// AppendRef, see Shared).
func (ps *Paths) FrameKey(i int) uint64 {
	r := ps.rec(i)
	return uint64(uint32(r.chunk))<<32 | uint64(r.atN)
}

// putFrames copies fs into the frame chunks. A chunk holds frameChunk
// frames, so a path starts below 65536 in it; a longer path gets a chunk
// of its own.
func (ps *Paths) putFrames(fs []FrameID) (chunk, at int32) {
	last := len(ps.frames) - 1
	if last < 0 || len(fs) > cap(ps.frames[last])-len(ps.frames[last]) {
		ps.frames = append(ps.frames, make([]FrameID, 0, max(frameChunk, len(fs))))
		last++
	}
	c := &ps.frames[last]
	at = int32(len(*c))
	ps.stored += len(fs)
	*c = append(*c, fs...)
	return int32(last), at
}

// labelID returns the ID of set, numbering new sets.
func (ps *Paths) labelID(set *LabelSet) int32 {
	if len(ps.labels) == 0 {
		ps.labels = []*LabelSet{nil}
	}
	switch {
	case set == nil:
		return 0
	case set == ps.lastSet:
		return ps.lastID
	}
	id, ok := ps.labelIDs[set]
	if !ok {
		if ps.labelIDs == nil {
			ps.labelIDs = map[*LabelSet]int32{}
		}
		id = int32(len(ps.labels))
		ps.labels = append(ps.labels, set)
		ps.labelIDs[set] = id
	}
	ps.lastSet, ps.lastID = set, id
	return id
}

// Grow makes room for n more path records in the table of chunks (the
// chunks themselves are made as paths are appended, so that a source
// being built takes its memory as it grows).
func (ps *Paths) Grow(n int) {
	ps.recs = slices.Grow(ps.recs, max(0, (ps.n+n+recChunk-1)/recChunk-len(ps.recs)))
}
