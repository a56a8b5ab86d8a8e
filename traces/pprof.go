package traces

import (
	"fmt"
	"strconv"

	"github.com/google/pprof/profile"
)

// profileAppender adds pprof profiles to one Profile source, interning
// frames across profiles.
type profileAppender struct {
	src    *Source
	limits Limits
	// locFrames caches each location's frames (root-most first) per
	// profile, indexed by location ID (IDs are dense in practice; sparse
	// ones fall back to locFramesMap).
	locFrames    [][]FrameID
	locFramesMap map[uint64][]FrameID
	// frameArena and valueArena hand out path slices in chunks, so that a
	// profile of a million samples does not make two million allocations.
	frameArena []FrameID
	valueArena []int64
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

// values returns a zeroed slice of n values from the arena.
func (a *profileAppender) values(n int) []int64 {
	if n > cap(a.valueArena)-len(a.valueArena) {
		a.valueArena = make([]int64, 0, max(arenaChunk, n))
	}
	start := len(a.valueArena)
	a.valueArena = a.valueArena[:start+n]
	return a.valueArena[start : start+n : start+n]
}

func newProfileAppender(limits Limits) *profileAppender {
	return &profileAppender{limits: limits}
}

// add converts p and appends its samples. name is used in error messages.
func (a *profileAppender) add(name string, p *profile.Profile) error {
	types := make([]ValueType, len(p.SampleType))
	for i, st := range p.SampleType {
		types[i] = ValueType{Type: st.Type, Unit: st.Unit}
	}
	// order maps this profile's value index to the source's value index.
	var order []int
	if a.src == nil {
		a.src = NewSource(Profile, types)
		a.src.DefaultValue = defaultValueIndex(p)
		if p.PeriodType != nil {
			a.src.PeriodType = ValueType{Type: p.PeriodType.Type, Unit: p.PeriodType.Unit}
		}
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
	if p.Period > src.Period {
		src.Period = p.Period
	}
	src.DurationNanos += p.DurationNanos

	var maxID uint64
	for _, l := range p.Location {
		maxID = max(maxID, l.ID)
	}
	a.locFrames, a.locFramesMap = nil, nil
	if maxID <= uint64(4*len(p.Location)+16) {
		a.locFrames = make([][]FrameID, maxID+1)
	} else {
		a.locFramesMap = make(map[uint64][]FrameID, len(p.Location))
	}
	nv := len(src.ValueTypes)
	var frames []FrameID
	for _, s := range p.Sample {
		frames = frames[:0]
		// s.Location is leaf first; walk it backwards so frames come out root first.
		for i := len(s.Location) - 1; i >= 0; i-- {
			lf, err := a.locationFrames(s.Location[i])
			if err != nil {
				return fmt.Errorf("%s: %w", name, err)
			}
			frames = append(frames, lf...)
		}
		if len(frames) == 0 {
			frames = append(frames, src.InternFrame(Frame{Function: "(no stack)"}))
		}
		if len(frames) > a.limits.MaxDepth {
			return fmt.Errorf("%s: a sample has %d frames, more than the limit of %d (raise it with --max-depth): %w",
				name, len(frames), a.limits.MaxDepth, ErrLimit)
		}
		var raw [8]int64
		values := raw[:0]
		if nv > len(raw) {
			values = make([]int64, 0, nv)
		}
		values = values[:nv]
		zero := true
		for i, v := range s.Value {
			values[order[i]] = v
			if v != 0 {
				zero = false
			}
		}
		if zero {
			continue
		}
		vs := a.values(nv)
		copy(vs, values)
		src.Paths = append(src.Paths, Path{
			Frames: a.frames(frames),
			Values: vs,
			Labels: a.labels(s),
		})
	}
	if len(src.Frames) > a.limits.MaxFrames {
		return fmt.Errorf("%s: %d distinct frames, more than the limit of %d (raise it with --max-frames): %w",
			name, len(src.Frames), a.limits.MaxFrames, ErrLimit)
	}
	return nil
}

// locationFrames returns the frames of one location, root-most first:
// pprof lists inlined functions innermost first, the real function last.
func (a *profileAppender) locationFrames(loc *profile.Location) ([]FrameID, error) {
	if a.locFrames != nil {
		if f := a.locFrames[loc.ID]; f != nil {
			return f, nil
		}
	} else if f, ok := a.locFramesMap[loc.ID]; ok {
		return f, nil
	}
	var out []FrameID
	if len(loc.Line) == 0 {
		name := "0x" + strconv.FormatUint(loc.Address, 16)
		file := ""
		if loc.Mapping != nil {
			file = loc.Mapping.File
		}
		out = []FrameID{a.src.InternFrame(Frame{Function: name, File: file})}
	} else {
		out = make([]FrameID, 0, len(loc.Line))
		for i := len(loc.Line) - 1; i >= 0; i-- {
			ln := loc.Line[i]
			f := Frame{Line: ln.Line}
			if ln.Function != nil {
				f.Function = ln.Function.Name
				f.File = ln.Function.Filename
			}
			if f.Function == "" {
				f.Function = "0x" + strconv.FormatUint(loc.Address, 16)
			}
			out = append(out, a.src.InternFrame(f))
		}
	}
	if a.locFrames != nil {
		a.locFrames[loc.ID] = out
	} else {
		a.locFramesMap[loc.ID] = out
	}
	return out, nil
}

func (a *profileAppender) labels(s *profile.Sample) *LabelSet {
	if len(s.Label) == 0 && len(s.NumLabel) == 0 {
		return nil
	}
	var ls []Label
	for k, vs := range s.Label {
		for _, v := range vs {
			ls = append(ls, Label{Key: k, Value: v})
		}
	}
	for k, vs := range s.NumLabel {
		units := s.NumUnit[k]
		for i, v := range vs {
			l := Label{Key: k, Num: v, IsNum: true}
			if i < len(units) {
				l.Unit = units[i]
			}
			ls = append(ls, l)
		}
	}
	return a.src.InternLabels(ls)
}

// defaultValueIndex is the profile's default sample type, else the last one.
func defaultValueIndex(p *profile.Profile) int {
	if p.DefaultSampleType != "" {
		for i, st := range p.SampleType {
			if st.Type == p.DefaultSampleType {
				return i
			}
		}
	}
	return len(p.SampleType) - 1
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
