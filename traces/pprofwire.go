package traces

// This file decodes profile.proto straight into a rawProfile. The pprof
// library builds a pointer-linked object per sample, location, line and
// label and then converts it; culprit needs only the flattened tables, and
// decoding into them directly takes a fraction of the time. The decoder
// accepts exactly what the library's decoder and validity check accept,
// read the same way (the differential tests and FuzzPprofWire hold it to
// that); whatever it does not take, it hands back, and the library then
// decodes the input or words the error.

// wireField is one decoded protobuf field: its number, wire type and
// value (u for varint and fixed types, data for length-delimited ones).
type wireField struct {
	num  uint64
	typ  uint8
	u    uint64
	data []byte
}

// wireVarint decodes a varint as the pprof library does: at most ten
// bytes, no overflow check on the last. n is 0 when it does not decode.
func wireVarint(b []byte) (v uint64, n int) {
	for i := 0; i < 10 && i < len(b); i++ {
		v |= uint64(b[i]&0x7f) << (7 * i)
		if b[i] < 0x80 {
			return v, i + 1
		}
	}
	return 0, 0
}

// nextField decodes the field at the start of b and returns the rest.
func nextField(b []byte) (f wireField, rest []byte, ok bool) {
	key, n := wireVarint(b)
	if n == 0 {
		return f, nil, false
	}
	b = b[n:]
	f.num, f.typ = key>>3, uint8(key&7)
	switch f.typ {
	case 0:
		if f.u, n = wireVarint(b); n == 0 {
			return f, nil, false
		}
		return f, b[n:], true
	case 1:
		if len(b) < 8 {
			return f, nil, false
		}
		return f, b[8:], true
	case 2:
		l, n := wireVarint(b)
		if n == 0 || l > uint64(len(b)-n) {
			return f, nil, false
		}
		f.data = b[n : n+int(l)]
		return f, b[n+int(l):], true
	case 5:
		if len(b) < 4 {
			return f, nil, false
		}
		return f, b[4:], true
	}
	return f, nil, false
}

// wireDecoder holds the state of one decodeProfile call.
type wireDecoder struct {
	strs []string
	// IDs → dense indices: slices for small IDs, maps for the rest.
	mapFile   map[uint64]string
	funcIndex idIndex
	funcs     []rawLine // function name and file; line unused
	locIndex  idIndex
	p         *rawProfile
}

// idIndex maps IDs to dense indices: a slice for IDs up to a bound, a map
// beyond it. It reports duplicates and refuses ID 0, as the library's
// validity check does.
type idIndex struct {
	dense  []int32 // index+1; 0 = absent
	sparse map[uint64]int32
}

func newIDIndex(n int) idIndex { return idIndex{dense: make([]int32, 4*n+16)} }

func (x *idIndex) add(id uint64, i int32) bool {
	if id == 0 {
		return false
	}
	if id < uint64(len(x.dense)) {
		if x.dense[id] != 0 {
			return false
		}
		x.dense[id] = i + 1
		return true
	}
	if _, dup := x.sparse[id]; dup {
		return false
	}
	if x.sparse == nil {
		x.sparse = map[uint64]int32{}
	}
	x.sparse[id] = i
	return true
}

func (x *idIndex) get(id uint64) (int32, bool) {
	if id < uint64(len(x.dense)) {
		i := x.dense[id]
		return i - 1, i != 0
	}
	i, ok := x.sparse[id]
	return i, ok
}

// str returns string table entry i; ok is false when i is out of range.
func (d *wireDecoder) str(i uint64) (string, bool) {
	if i >= uint64(len(d.strs)) {
		return "", false
	}
	return d.strs[i], true
}

// decodeProfile decodes an uncompressed profile.proto message. ok is false
// when the input is anything the pprof library would reject or read
// differently (then the caller asks the library).
func decodeProfile(data []byte) (r *rawProfile, ok bool) {
	if len(data) == 0 {
		return nil, false
	}
	d := &wireDecoder{p: &rawProfile{}, mapFile: map[uint64]string{}}
	// The messages of the repeated fields, by field number: they are
	// decoded once the string table is complete. A first pass counts
	// them, so that the lists are made once (hundreds of thousands of
	// slices would otherwise be copied as the lists grow).
	var msgs [12][][]byte
	var counts [12]int // by field number; 6 counts the strings
	for b := data; len(b) > 0; {
		f, rest, ok := nextField(b)
		if !ok {
			break // the second pass says why
		}
		b = rest
		if f.num < uint64(len(counts)) {
			counts[f.num]++
		}
	}
	for _, i := range []int{1, 2, 3, 4, 5, 11} {
		msgs[i] = make([][]byte, 0, counts[i])
	}
	d.strs = make([]string, 0, counts[6])
	var scalars [16]uint64 // top-level varint fields by number
	var timeNanos uint64
	var comments []wireField
	for b := data; len(b) > 0; {
		var f wireField
		if f, b, ok = nextField(b); !ok {
			return nil, false
		}
		switch f.num {
		case 1, 2, 3, 4, 5, 11: // sample_type, sample, mapping, location, function, period_type
			if f.typ != 2 {
				return nil, false
			}
			msgs[f.num] = append(msgs[f.num], f.data)
		case 6: // string_table
			if f.typ != 2 || (len(d.strs) == 0 && len(f.data) != 0) {
				return nil, false
			}
			d.strs = append(d.strs, string(f.data))
		case 9: // time_nanos: a second one means concatenated profiles
			if f.typ != 0 || timeNanos != 0 {
				return nil, false
			}
			timeNanos = f.u
		case 13: // comment: repeated string index, checked once the table is complete
			if !eachInt(f, func(uint64) bool { return true }) {
				return nil, false
			}
			comments = append(comments, f)
		case 7, 8, 10, 12, 14, 15: // drop_frames, keep_frames, duration, period, default_sample_type, doc_url
			if f.typ != 0 {
				return nil, false
			}
			scalars[f.num] = f.u
		}
	}
	if len(d.strs) == 0 {
		return nil, false
	}
	for _, f := range comments {
		if !eachInt(f, func(v uint64) bool { _, ok := d.str(v); return ok }) {
			return nil, false
		}
	}
	p := d.p
	p.durationNanos, p.period = int64(scalars[10]), int64(scalars[12])
	for _, i := range []int{7, 8, 15} {
		if _, ok := d.str(scalars[i]); !ok {
			return nil, false
		}
	}
	if p.defaultSampleType, ok = d.str(scalars[14]); !ok {
		return nil, false
	}
	for _, m := range msgs[1] {
		vt, ok := d.valueType(m)
		if !ok {
			return nil, false
		}
		p.sampleTypes = append(p.sampleTypes, vt)
	}
	for _, m := range msgs[11] {
		if p.periodType, ok = d.valueType(m); !ok {
			return nil, false
		}
	}
	if !d.mappings(msgs[3]) || !d.functions(msgs[5]) || !d.locations(msgs[4]) || !d.samples(msgs[2]) {
		return nil, false
	}
	return p, true
}

// eachInt calls fn for every value of a repeated integer field, packed or
// not; false when a value does not decode or fn returns false.
func eachInt(f wireField, fn func(uint64) bool) bool {
	switch f.typ {
	case 0:
		return fn(f.u)
	case 2:
		for b := f.data; len(b) > 0; {
			v, n := wireVarint(b)
			if n == 0 || !fn(v) {
				return false
			}
			b = b[n:]
		}
		return true
	}
	return false
}

// fields reads message m: the last value of each varint field numbered
// from 1 to len(vals)-1 goes to vals (the library's scalar fields, which
// must be varints), and other, when set, takes the fields it handles
// itself (handled true; ok false fails the message). Unknown fields are
// skipped, as the library does.
func fields(m []byte, vals []uint64, other func(f wireField) (handled, ok bool)) bool {
	for len(m) > 0 {
		f, rest, ok := nextField(m)
		if !ok {
			return false
		}
		m = rest
		if f.num == 0 || f.num >= uint64(len(vals)) {
			continue
		}
		if other != nil {
			if handled, ok := other(f); handled {
				if !ok {
					return false
				}
				continue
			}
		}
		if f.typ != 0 {
			return false
		}
		vals[f.num] = f.u
	}
	return true
}

func (d *wireDecoder) valueType(m []byte) (ValueType, bool) {
	var v [3]uint64 // type, unit
	if !fields(m, v[:], nil) {
		return ValueType{}, false
	}
	t, ok1 := d.str(v[1])
	u, ok2 := d.str(v[2])
	return ValueType{Type: t, Unit: u}, ok1 && ok2
}

func (d *wireDecoder) mappings(ms [][]byte) bool {
	seen := newIDIndex(len(ms))
	for i, m := range ms {
		var v [11]uint64 // id 1, filename 5, build_id 6
		if !fields(m, v[:], nil) {
			return false
		}
		name, ok := d.str(v[5])
		if _, okb := d.str(v[6]); !ok || !okb || !seen.add(v[1], int32(i)) {
			return false
		}
		d.mapFile[v[1]] = name
	}
	return true
}

func (d *wireDecoder) functions(ms [][]byte) bool {
	d.funcIndex = newIDIndex(len(ms))
	d.funcs = make([]rawLine, len(ms))
	for i, m := range ms {
		var v [6]uint64 // id 1, name 2, system_name 3, filename 4
		if !fields(m, v[:], nil) {
			return false
		}
		var ok1, ok2, ok3 bool
		d.funcs[i].fn = int32(i + 1)
		d.funcs[i].function, ok1 = d.str(v[2])
		d.funcs[i].file, ok2 = d.str(v[4])
		_, ok3 = d.str(v[3])
		if !ok1 || !ok2 || !ok3 || !d.funcIndex.add(v[1], int32(i)) {
			return false
		}
	}
	return true
}

func (d *wireDecoder) locations(ms [][]byte) bool {
	p := d.p
	d.locIndex = newIDIndex(len(ms))
	p.locs = make([]rawLocation, len(ms))
	p.lines = make([]rawLine, 0, len(ms)+len(ms)/4)
	line := func(f wireField) (bool, bool) {
		if f.num != 4 {
			return false, true
		}
		var v [4]uint64 // function_id 1, line 2
		if f.typ != 2 || !fields(f.data, v[:], nil) {
			return true, false
		}
		fi, ok := d.funcIndex.get(v[1])
		if v[1] == 0 || !ok {
			return true, false // a line without a function
		}
		l := d.funcs[fi]
		l.line = int64(v[2])
		p.lines = append(p.lines, l)
		return true, true
	}
	for i, m := range ms {
		loc := &p.locs[i]
		loc.lineStart = int32(len(p.lines))
		var v [6]uint64 // id 1, mapping_id 2, address 3
		if !fields(m, v[:], line) {
			return false
		}
		loc.lineEnd = int32(len(p.lines))
		loc.address = v[3]
		loc.mappingFile = d.mapFile[v[2]]
		if !d.locIndex.add(v[1], int32(i)) {
			return false
		}
	}
	return true
}

func (d *wireDecoder) samples(ms [][]byte) bool {
	p := d.p
	nv := len(p.sampleTypes)
	if nv == 0 && len(ms) > 0 {
		return false
	}
	p.samples = make([]rawSample, len(ms))
	p.values = make([]int64, 0, nv*len(ms))
	size := 0
	for _, m := range ms {
		size += len(m)
	}
	// A location ID takes at least a byte: size bounds their number.
	p.sampleLocs = make([]int32, 0, size)
	p.labels = make([]Label, 0, len(ms)) // room for a label a sample
	for i, m := range ms {
		s := &p.samples[i]
		s.locStart, s.labStart = int32(len(p.sampleLocs)), int32(len(p.labels))
		values := len(p.values)
		other := func(f wireField) (bool, bool) {
			switch f.num {
			case 1:
				if f.typ == 2 {
					return true, d.packedLocations(f.data)
				}
				return true, eachInt(f, func(id uint64) bool {
					li, ok := d.locIndex.get(id)
					p.sampleLocs = append(p.sampleLocs, li)
					return ok
				})
			case 2:
				return true, eachInt(f, func(v uint64) bool {
					p.values = append(p.values, int64(v))
					return true
				})
			case 3:
				if f.typ != 2 {
					return true, false
				}
				return true, d.label(f.data)
			}
			return false, true
		}
		var v [4]uint64 // all three fields are taken by other
		if !fields(m, v[:], other) {
			return false
		}
		if len(p.values)-values != nv {
			return false
		}
		s.locEnd, s.labEnd = int32(len(p.sampleLocs)), int32(len(p.labels))
	}
	return true
}

// packedLocations appends the locations of a packed list of location IDs
// (what every writer emits: the hot loop of the decoder, kept free of
// callbacks); false when an ID does not decode or names no location.
func (d *wireDecoder) packedLocations(b []byte) bool {
	locs := d.p.sampleLocs
	dense := d.locIndex.dense
	for len(b) > 0 {
		id, n := uint64(b[0]), 1
		if id >= 0x80 {
			if id, n = wireVarint(b); n == 0 {
				return false
			}
		}
		b = b[n:]
		var li int32
		if id < uint64(len(dense)) {
			if li = dense[id] - 1; li < 0 {
				return false
			}
		} else {
			var ok bool
			if li, ok = d.locIndex.sparse[id]; !ok {
				return false
			}
		}
		locs = append(locs, li)
	}
	d.p.sampleLocs = locs
	return true
}

// label decodes one sample label as the library reads it: a string label
// when str is set, else a numeric one when num or unit is set, else none.
func (d *wireDecoder) label(m []byte) bool {
	var v [5]uint64 // key 1, str 2, num 3, num_unit 4
	if !fields(m, v[:], nil) {
		return false
	}
	key, str, num, unit := v[1], v[2], v[3], v[4]
	k, ok := d.str(key)
	if !ok {
		return false
	}
	switch {
	case str != 0:
		v, ok := d.str(str)
		d.p.labels = append(d.p.labels, Label{Key: k, Value: v})
		return ok
	case num != 0 || unit != 0:
		u, ok := d.str(unit)
		d.p.labels = append(d.p.labels, Label{Key: k, Num: int64(num), Unit: u, IsNum: true})
		return ok
	}
	return true
}
