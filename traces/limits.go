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
	// MaxDepth caps JSON nesting depth and call path depth. A deeper
	// profile sample or span keeps its root-most and leaf-most frames
	// (see elideMiddle), so that a path costs at most MaxDepth frames.
	MaxDepth int
	// MaxFrames caps the number of distinct frames in a source.
	MaxFrames int
}

// DefaultLimits are generous enough for real load tests.
var DefaultLimits = Limits{
	MaxBytes:     4 << 30, // 4 GiB
	MaxRatio:     200,
	MaxLineBytes: 256 << 20, // 256 MiB, four times OTLP's recommended request limit
	MaxDepth:     4096,      // recursive code gives stacks in the thousands
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

// WarnDeepStack is a profile sample or a span whose call path was deeper
// than Limits.MaxDepth: the middle of the path is elided.
const WarnDeepStack = "deep-stack"

// ElidedFrames is the function name of the frame that stands for the
// middle of a call path cut to Limits.MaxDepth.
const ElidedFrames = "(frames elided: the call path is deeper than --max-depth)"

// elideMiddle cuts path (root first) to limit frames in place: the
// root-most (limit-1)/2 frames, then marker standing for the middle, then
// the leaf-most rest. The root keeps the entry point and the leaf the
// calls that attribution charges. It returns the path and the number of
// frames the marker stands for.
func elideMiddle(path []FrameID, limit int, marker FrameID) ([]FrameID, int) {
	if len(path) <= limit || limit < 3 {
		return path[:min(len(path), max(limit, 1))], max(0, len(path)-limit)
	}
	root := (limit - 1) / 2
	leaf := limit - 1 - root
	cut := len(path) - root - leaf
	path[root] = marker
	copy(path[root+1:], path[len(path)-leaf:])
	return path[:limit], cut
}
