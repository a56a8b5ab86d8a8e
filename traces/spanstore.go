package traces

import (
	"cmp"
	"slices"
)

// spanStore holds the decoded spans until assembly, in partitions by the
// top bits of the trace ID (random in practice), each in fixed-size
// chunks: growing it never copies, and at assembly each partition is
// sorted and handed over on its own, so that the spans' memory goes to
// the paths partition by partition.
type spanStore struct {
	parts [numParts]spanPart
	n     int
}

type spanPart struct {
	chunks [][]spanRec
	n      int
}

const (
	numParts  = 64
	partShift = 64 - 6 // traceID.hi >> partShift is the partition
	spanChunk = 1024
)

// storeMark is the size of every partition, for truncate.
type storeMark [numParts]int

func (s *spanStore) len() int { return s.n }

// push adds r, whose trace ID is t.
func (s *spanStore) push(r spanRec, t traceID) {
	p := &s.parts[t.hi>>partShift]
	if p.n == len(p.chunks)*spanChunk {
		p.chunks = append(p.chunks, make([]spanRec, 0, spanChunk))
	}
	c := &p.chunks[p.n/spanChunk]
	*c = append(*c, r)
	p.n++
	s.n++
}

// mark returns the store's current size, for truncate.
func (s *spanStore) mark() storeMark {
	var m storeMark
	for i := range s.parts {
		m[i] = s.parts[i].n
	}
	return m
}

// truncate drops every span pushed since m was taken.
func (s *spanStore) truncate(m storeMark) {
	for i := range s.parts {
		p := &s.parts[i]
		n := m[i]
		if n >= p.n {
			continue
		}
		k := (n + spanChunk - 1) / spanChunk
		clear(p.chunks[k:])
		p.chunks = p.chunks[:k]
		if k > 0 && n%spanChunk != 0 {
			p.chunks[k-1] = p.chunks[k-1][:n%spanChunk]
		}
		s.n -= p.n - n
		p.n = n
	}
}

// sortedPart is one partition's spans, still in their chunks, and their
// order by trace ID, span ID and input order (of spans with the same IDs
// the first read comes first).
type sortedPart struct {
	chunks [][]spanRec
	order  []int32
}

// at returns span i of the partition (an index in order).
func (p *sortedPart) at(i int32) *spanRec { return &p.chunks[i/spanChunk][i%spanChunk] }

// takeSorted removes partition k from the store and returns it sorted.
// Partitions cover increasing ranges of trace IDs, so taking them in
// order gives all spans in trace order. traces are the interned trace IDs
// (spanRec.trace indexes them); count is scratch space of the same length,
// all zero, and left so.
//
// It is a counting sort by trace (the partition's traces in ID order,
// each trace's spans in input order), then a sort of each trace's few
// spans by span ID, stable so that of spans with equal IDs the first read
// stays first.
func (s *spanStore) takeSorted(k int, traces []traceID, count []int32) sortedPart {
	sp := sortedPart{chunks: s.parts[k].chunks, order: make([]int32, s.parts[k].n)}
	s.parts[k] = spanPart{}
	var ids []int32 // the partition's traces
	for i := range sp.order {
		t := sp.at(int32(i)).trace
		if count[t] == 0 {
			ids = append(ids, t)
		}
		count[t]++
	}
	slices.SortFunc(ids, func(a, b int32) int { return compareTraceIDs(traces[a], traces[b]) })
	at := int32(0)
	for _, t := range ids {
		at, count[t] = at+count[t], at // count[t] now starts t's spans
	}
	for i := range sp.order {
		t := sp.at(int32(i)).trace
		sp.order[count[t]] = int32(i)
		count[t]++
	}
	start := 0
	var keys []assemblyKey
	for _, t := range ids {
		end := int(count[t])
		count[t] = 0
		if end-start > 1 {
			keys = keys[:0]
			for _, i := range sp.order[start:end] {
				keys = append(keys, assemblyKey{id: sp.at(i).id, i: i})
			}
			sortKeys(keys) // by span ID, then input order
			for j, k := range keys {
				sp.order[start+j] = k.i
			}
		}
		start = end
	}
	return sp
}

// assemblyKey is what assembly sorts a trace's spans by: major (a start
// time, or 0), then span ID, then i, the index it carries along, which
// makes the order total. Sorting a partition's spans, i is the span's
// index in input order, so that of spans with the same ID the first read
// sorts first and is kept; sorting a trace's paths, it is the node.
type assemblyKey struct {
	major int64
	id    uint64
	i     int32
}

func (a assemblyKey) less(b assemblyKey) bool {
	return a.major < b.major || a.major == b.major && (a.id < b.id || a.id == b.id && a.i < b.i)
}

// compare orders keys as less does (an explicit chain: cmp.Or would
// compare every field every time).
func (a assemblyKey) compare(b assemblyKey) int {
	switch {
	case a.major != b.major:
		return cmp.Compare(a.major, b.major)
	case a.id != b.id:
		return cmp.Compare(a.id, b.id)
	}
	return cmp.Compare(a.i, b.i)
}

// sortKeys sorts keys: by insertion for the few of a typical trace, else
// with slices.SortFunc.
func sortKeys(keys []assemblyKey) {
	if len(keys) > smallSort {
		slices.SortFunc(keys, assemblyKey.compare)
		return
	}
	for j := 1; j < len(keys); j++ {
		k := keys[j]
		m := j
		for ; m > 0 && k.less(keys[m-1]); m-- {
			keys[m] = keys[m-1]
		}
		keys[m] = k
	}
}

// smallSort is the longest run that the assembler sorts by insertion.
const smallSort = 48
