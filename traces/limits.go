package traces

// Limits bound what culprit accepts from one run, so that a hostile or
// broken input gives a clear error instead of exhausting memory or time.
// A zero field takes its default (see DefaultLimits).
type Limits struct {
	// MaxBytes caps the decompressed size of one input, in bytes.
	MaxBytes int64
	// MaxRatio caps decompressed size ÷ compressed size for gzip input.
	MaxRatio int64
	// MaxLineBytes caps one line of JSON-lines input, in bytes.
	MaxLineBytes int
	// MaxDepth caps JSON nesting depth and call path depth.
	MaxDepth int
	// MaxFrames caps the number of distinct frames in a source.
	MaxFrames int
}

// DefaultLimits are generous enough for real load tests.
var DefaultLimits = Limits{
	MaxBytes:     4 << 30, // 4 GiB
	MaxRatio:     200,
	MaxLineBytes: 256 << 20, // 256 MiB, four times OTLP's recommended request limit
	MaxDepth:     512,
	MaxFrames:    4 << 20,
}

// withDefaults returns l with every zero field set from DefaultLimits.
func (l Limits) withDefaults() Limits {
	d := DefaultLimits
	if l.MaxBytes > 0 {
		d.MaxBytes = l.MaxBytes
	}
	if l.MaxRatio > 0 {
		d.MaxRatio = l.MaxRatio
	}
	if l.MaxLineBytes > 0 {
		d.MaxLineBytes = l.MaxLineBytes
	}
	if l.MaxDepth > 0 {
		d.MaxDepth = l.MaxDepth
	}
	if l.MaxFrames > 0 {
		d.MaxFrames = l.MaxFrames
	}
	return d
}
