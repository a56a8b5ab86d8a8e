package traces

import (
	"fmt"
	"math"
	"slices"
	"strconv"
	"strings"
)

// profileAppender adds pprof profiles to one Profile source, interning
// frames across profiles.
type profileAppender struct {
	src    *Source
	limits Limits
	// frameArena holds the frames of locations with inlined calls in
	// chunks, so that a profile does not make an allocation for each.
	frameArena []FrameID
}

const arenaChunk = 1 << 16

// frames copies fs into the arena and returns the copy.
func (a *profileAppender) frames(fs []FrameID) []FrameID {
	if len(fs) > cap(a.frameArena)-len(a.frameArena) {
		a.frameArena = make([]FrameID, 0, max(arenaChunk, len(fs)))
	}
	start := len(a.frameArena)
	a.frameArena = append(a.frameArena, fs...)
	return a.frameArena[start:len(a.frameArena):len(a.frameArena)]
}

func newProfileAppender(limits Limits) *profileAppender {
	return &profileAppender{limits: limits}
}

// add appends the samples of p. name is used in error messages.
func (a *profileAppender) add(name string, p *rawProfile) error {
	types := p.sampleTypes
	// order maps this profile's value index to the source's value index.
	var order []int
	if a.src == nil {
		a.src = NewSource(Profile, types)
		a.src.DefaultValue = p.defaultValueIndex()
		a.src.PeriodType = p.periodType
		order = make([]int, len(types))
		for i := range order {
			order[i] = i
		}
	} else {
		var err error
		if order, err = matchValueTypes(a.src.ValueTypes, types); err != nil {
			return fmt.Errorf("%s: %w", name, err)
		}
	}
	src := a.src
	if p.period > src.Period {
		src.Period = p.period
	}
	src.DurationNanos += p.durationNanos

	// locRef caches each location's frames (root-most first), by index:
	// 0 until known, then the frame itself when the location has one
	// (most do), else -(k+1) for locMulti[k]. One int32 a location keeps
	// the cache small for the samples' random accesses.
	locRef := make([]int32, len(p.locs))
	var locMulti [][]FrameID
	var scratch []FrameID
	pf := newProfileFrames(src, p)
	nv := len(src.ValueTypes)
	var frames []FrameID
	values := make([]int64, nv)
	for si := range p.samples {
		s := &p.samples[si]
		frames = frames[:0]
		// Locations are leaf first; walk them backwards so frames come out root first.
		for i := s.locEnd - 1; i >= s.locStart; i-- {
			li := p.sampleLocs[i]
			ref := locRef[li]
			if ref == 0 {
				scratch = a.locationFrames(scratch[:0], p, li, pf)
				if len(scratch) == 1 {
					ref = int32(scratch[0])
				} else {
					locMulti = append(locMulti, a.frames(scratch))
					ref = -int32(len(locMulti))
				}
				locRef[li] = ref
			}
			if ref > 0 {
				frames = append(frames, FrameID(ref))
				continue
			}
			frames = append(frames, locMulti[-ref-1]...)
		}
		if len(frames) == 0 {
			frames = append(frames, pf.other(Frame{Function: noStack}))
		}
		if len(frames) > a.limits.MaxDepth {
			n := len(frames)
			var cut int
			frames, cut = elideMiddle(frames, a.limits.MaxDepth, pf.other(Frame{Function: ElidedFrames}))
			src.Warnings.Add(Warning{Kind: WarnDeepStack, File: name,
				Message: fmt.Sprintf("sample %d has %d frames, more than --max-depth %d: the middle %d are elided, the root-most and leaf-most kept",
					si+1, n, a.limits.MaxDepth, cut)})
		}
		zero := true
		for i, v := range p.values[si*nv : (si+1)*nv] {
			values[order[i]] = v
			if v != 0 {
				zero = false
			}
		}
		if zero {
			continue
		}
		src.Paths.Append(Path{Frames: frames, Values: values, Labels: a.labels(p.labels[s.labStart:s.labEnd])})
	}
	if len(src.Frames) > a.limits.MaxFrames {
		return fmt.Errorf("%s: %d distinct frames, more than the limit of %d (raise it with --max-frames): %w",
			name, len(src.Frames), a.limits.MaxFrames, ErrLimit)
	}
	return nil
}

// locationFrames appends the frames of location li to out, root-most
// first: pprof lists inlined functions innermost first, the real function
// last.
func (a *profileAppender) locationFrames(out []FrameID, p *rawProfile, li int32, pf *profileFrames) []FrameID {
	loc := &p.locs[li]
	if loc.lineStart == loc.lineEnd {
		name := "0x" + strconv.FormatUint(loc.address, 16)
		return append(out, pf.other(Frame{Function: name, File: loc.mappingFile}))
	}
	for i := loc.lineEnd - 1; i >= loc.lineStart; i-- {
		ln := &p.lines[i]
		if ln.function == "" {
			name := "0x" + strconv.FormatUint(loc.address, 16)
			out = append(out, pf.other(Frame{Function: name, File: ln.file, Line: ln.line}))
			continue
		}
		out = append(out, pf.line(ln))
	}
	return out
}

// noStack names the frame of a sample without locations.
const noStack = "(no stack)"

// profileFrames interns the frames of one profile. A line's frame is
// looked up by function and line number, integer keys; the source's own
// index (which hashes whole frames) is asked only for new ones. Into a
// source without frames yet even that is skipped: functions with the same
// name and file share one canonical index, so equal keys mean equal
// frames and new keys new frames. (Unless a function is named like an
// address frame or "(no stack)": then every frame goes through the index.)
type profileFrames struct {
	src     *Source
	fresh   bool
	canon   []int32             // function index → canonical function index (fresh sources)
	byLine  map[uint64]FrameID  // by function<<32 | line, for lines in 0..2^32-1
	byWide  map[lineKey]FrameID // the other lines
	byValue map[Frame]FrameID   // address and (no stack) frames (fresh sources)
}

func newProfileFrames(src *Source, p *rawProfile) *profileFrames {
	pf := &profileFrames{src: src, byLine: make(map[uint64]FrameID, len(p.lines)), byWide: map[lineKey]FrameID{}}
	if len(src.Frames) > 1 {
		src.reserveFrames(len(p.lines))
		return pf
	}
	maxFn := int32(0)
	for i := range p.lines {
		ln := &p.lines[i]
		if strings.HasPrefix(ln.function, "0x") || ln.function == noStack {
			src.reserveFrames(len(p.lines))
			return pf
		}
		maxFn = max(maxFn, ln.fn)
	}
	pf.fresh = true
	pf.byValue = map[Frame]FrameID{}
	pf.canon = make([]int32, maxFn+1)
	byName := map[[2]string]int32{}
	for i := range p.lines {
		ln := &p.lines[i]
		if ln.fn <= 0 || pf.canon[ln.fn] != 0 {
			continue
		}
		c, ok := byName[[2]string{ln.function, ln.file}]
		if !ok {
			c = ln.fn
			byName[[2]string{ln.function, ln.file}] = c
		}
		pf.canon[ln.fn] = c
	}
	src.Frames = slices.Grow(src.Frames, len(p.lines))
	return pf
}

// line returns the frame of a line that names its function.
func (pf *profileFrames) line(ln *rawLine) FrameID {
	k := lineKey{ln.fn, ln.line}
	if pf.fresh && ln.fn > 0 {
		k.fn = pf.canon[ln.fn]
	}
	narrow := k.fn >= 0 && k.line >= 0 && k.line <= math.MaxUint32
	packed := uint64(uint32(k.fn))<<32 | uint64(k.line)
	if ln.fn > 0 {
		var id FrameID
		var ok bool
		if narrow {
			id, ok = pf.byLine[packed]
		} else {
			id, ok = pf.byWide[k]
		}
		if ok {
			return id
		}
	}
	f := Frame{Function: ln.function, File: ln.file, Line: ln.line}
	var id FrameID
	if pf.fresh && ln.fn > 0 {
		id = pf.src.addNewFrame(f)
	} else {
		id = pf.src.InternFrame(f)
	}
	if narrow {
		pf.byLine[packed] = id
	} else {
		pf.byWide[k] = id
	}
	return id
}

// other returns a frame that is not a function's line: named by its
// address, or standing for a sample without locations.
func (pf *profileFrames) other(f Frame) FrameID {
	if !pf.fresh {
		return pf.src.InternFrame(f)
	}
	id, ok := pf.byValue[f]
	if !ok {
		id = pf.src.addNewFrame(f)
		pf.byValue[f] = id
	}
	return id
}

// lineKey identifies a frame within one rawProfile.
type lineKey struct {
	fn   int32
	line int64
}

// labels interns one sample's labels (sorting them in place); nil when it
// has none.
func (a *profileAppender) labels(ls []Label) *LabelSet {
	if len(ls) == 0 {
		return nil
	}
	return a.src.InternLabels(ls)
}

// matchValueTypes maps have onto want by type and unit, in any order.
func matchValueTypes(want, have []ValueType) ([]int, error) {
	if len(want) == len(have) {
		order := make([]int, len(have))
		ok := true
		for i, h := range have {
			order[i] = -1
			for j, w := range want {
				if w == h {
					order[i] = j
				}
			}
			if order[i] < 0 {
				ok = false
				break
			}
		}
		if ok {
			return order, nil
		}
	}
	return nil, fmt.Errorf("sample types %s differ from the first profile's %s: %w",
		typeList(have), typeList(want), ErrMismatch)
}

func typeList(ts []ValueType) string {
	s := "["
	for i, t := range ts {
		if i > 0 {
			s += " "
		}
		s += t.String()
	}
	return s + "]"
}
