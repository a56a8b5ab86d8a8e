package traces

import "github.com/google/pprof/profile"

// rawProfile is what the profile appender needs of one pprof profile:
// locations in a dense table, samples flattened into shared slices. It
// comes from the wire decoder (decodeProfile) or, for inputs that
// decoder does not take, from the pprof library (lowerProfile); the two
// give the same rawProfile for the same input.
type rawProfile struct {
	sampleTypes       []ValueType
	defaultSampleType string
	periodType        ValueType
	period            int64
	durationNanos     int64

	locs  []rawLocation
	lines []rawLine // the locations' lines, each location's in a run

	samples    []rawSample
	sampleLocs []int32 // the samples' locations as indices into locs, leaf first
	values     []int64 // len(sampleTypes) per sample, in sample order
	labels     []Label // the samples' labels, each sample's in a run
}

// rawLocation is one pprof Location. Its lines run from lineStart to
// lineEnd in rawProfile.lines, innermost (inlined) first.
type rawLocation struct {
	address            uint64
	mappingFile        string
	lineStart, lineEnd int32
}

// rawLine is one line of a location: the function and the line number.
// fn numbers the profile's functions densely (equal fn, equal function
// and file), so that frames can be looked up without hashing strings.
type rawLine struct {
	function, file string
	fn             int32
	line           int64
}

// rawSample is one pprof Sample; its locations and labels are runs of
// rawProfile.sampleLocs and rawProfile.labels.
type rawSample struct {
	locStart, locEnd int32
	labStart, labEnd int32
}

// lowerProfile converts a profile parsed by the pprof library.
func lowerProfile(p *profile.Profile) *rawProfile {
	r := &rawProfile{
		defaultSampleType: p.DefaultSampleType,
		period:            p.Period,
		durationNanos:     p.DurationNanos,
		locs:              make([]rawLocation, len(p.Location)),
		samples:           make([]rawSample, len(p.Sample)),
		values:            make([]int64, 0, len(p.Sample)*len(p.SampleType)),
	}
	for _, st := range p.SampleType {
		r.sampleTypes = append(r.sampleTypes, ValueType{Type: st.Type, Unit: st.Unit})
	}
	if p.PeriodType != nil {
		r.periodType = ValueType{Type: p.PeriodType.Type, Unit: p.PeriodType.Unit}
	}
	index := make(map[*profile.Location]int32, len(p.Location))
	fns := make(map[*profile.Function]int32, len(p.Function))
	for i, f := range p.Function {
		fns[f] = int32(i + 1) // as the wire decoder numbers them
	}
	for i, l := range p.Location {
		index[l] = int32(i)
		loc := &r.locs[i]
		loc.address = l.Address
		if l.Mapping != nil {
			loc.mappingFile = l.Mapping.File
		}
		loc.lineStart = int32(len(r.lines))
		for _, ln := range l.Line {
			rl := rawLine{line: ln.Line}
			if ln.Function != nil {
				rl.function, rl.file = ln.Function.Name, ln.Function.Filename
				rl.fn = fns[ln.Function]
			}
			r.lines = append(r.lines, rl)
		}
		loc.lineEnd = int32(len(r.lines))
	}
	for i, s := range p.Sample {
		rs := &r.samples[i]
		rs.locStart = int32(len(r.sampleLocs))
		for _, l := range s.Location {
			r.sampleLocs = append(r.sampleLocs, index[l])
		}
		rs.locEnd = int32(len(r.sampleLocs))
		r.values = append(r.values, s.Value...)
		rs.labStart = int32(len(r.labels))
		for k, vs := range s.Label {
			for _, v := range vs {
				r.labels = append(r.labels, Label{Key: k, Value: v})
			}
		}
		for k, vs := range s.NumLabel {
			units := s.NumUnit[k]
			for j, v := range vs {
				l := Label{Key: k, Num: v, IsNum: true}
				if j < len(units) {
					l.Unit = units[j]
				}
				r.labels = append(r.labels, l)
			}
		}
		rs.labEnd = int32(len(r.labels))
	}
	return r
}

// defaultValueIndex is the profile's default sample type, else the last one.
func (r *rawProfile) defaultValueIndex() int {
	if r.defaultSampleType != "" {
		for i, st := range r.sampleTypes {
			if st.Type == r.defaultSampleType {
				return i
			}
		}
	}
	return len(r.sampleTypes) - 1
}
