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
	// locFrames caches each location's frames (root-most first) per profile.
	locFrames map[*profile.Location][]FrameID
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

	a.locFrames = make(map[*profile.Location][]FrameID, len(p.Location))
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
		values := make([]int64, nv)
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
		src.Paths = append(src.Paths, Path{
			Frames: append([]FrameID(nil), frames...),
			Values: values,
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
	if f, ok := a.locFrames[loc]; ok {
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
	a.locFrames[loc] = out
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
