package traces

import (
	"fmt"
	"strconv"
)

// profileAppender adds pprof profiles to one Profile source, interning
// frames across profiles.
type profileAppender struct {
	src    *Source
	limits Limits
	// frameArena holds the locations' frames in chunks, so that a profile
	// of many locations does not make an allocation for each.
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

	// locFrames caches each location's frames (root-most first), by index.
	locFrames := make([][]FrameID, len(p.locs))
	// lineFrames caches frames by function and line: a profile has many
	// locations (addresses) of each line, and frames hash slowly.
	lineFrames := make(map[lineKey]FrameID, len(p.lines))
	src.reserveFrames(len(p.lines))
	nv := len(src.ValueTypes)
	var frames []FrameID
	values := make([]int64, nv)
	for si := range p.samples {
		s := &p.samples[si]
		frames = frames[:0]
		// Locations are leaf first; walk them backwards so frames come out root first.
		for i := s.locEnd - 1; i >= s.locStart; i-- {
			li := p.sampleLocs[i]
			lf := locFrames[li]
			if lf == nil {
				lf = a.locationFrames(p, li, lineFrames)
				locFrames[li] = lf
			}
			for _, f := range lf {
				frames = append(frames, f)
			}
		}
		if len(frames) == 0 {
			frames = append(frames, src.InternFrame(Frame{Function: "(no stack)"}))
		}
		if len(frames) > a.limits.MaxDepth {
			return fmt.Errorf("%s: a sample has %d frames, more than the limit of %d (raise it with --max-depth): %w",
				name, len(frames), a.limits.MaxDepth, ErrLimit)
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

// locationFrames returns the frames of location li, root-most first:
// pprof lists inlined functions innermost first, the real function last.
func (a *profileAppender) locationFrames(p *rawProfile, li int32, cache map[lineKey]FrameID) []FrameID {
	loc := &p.locs[li]
	if loc.lineStart == loc.lineEnd {
		name := "0x" + strconv.FormatUint(loc.address, 16)
		return a.frames([]FrameID{a.src.InternFrame(Frame{Function: name, File: loc.mappingFile})})
	}
	var buf [8]FrameID
	out := buf[:0]
	for i := loc.lineEnd - 1; i >= loc.lineStart; i-- {
		ln := &p.lines[i]
		if ln.function == "" {
			// Named by the address: not cached by line.
			name := "0x" + strconv.FormatUint(loc.address, 16)
			out = append(out, a.src.InternFrame(Frame{Function: name, File: ln.file, Line: ln.line}))
			continue
		}
		k := lineKey{ln.fn, ln.line}
		id, ok := cache[k]
		if !ok || ln.fn == 0 {
			id = a.src.InternFrame(Frame{Function: ln.function, File: ln.file, Line: ln.line})
			cache[k] = id
		}
		out = append(out, id)
	}
	return a.frames(out)
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
