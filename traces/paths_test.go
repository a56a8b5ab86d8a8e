package traces

import (
	"slices"
	"testing"
)

// TestPathsRoundTrip appends paths of every size class, including ones
// longer than a frame chunk and ones that fill a chunk exactly, and reads
// them back.
func TestPathsRoundTrip(t *testing.T) {
	a := &LabelSet{Labels: []Label{{Key: "route", Value: "/a"}}}
	b := &LabelSet{Labels: []Label{{Key: "route", Value: "/b"}}}
	var want []Path
	for i, n := range []int{1, 5, 0, frameChunk - 7, 7, longPath - 1, longPath, longPath + 1, frameChunk, 70_000, 3, 1} {
		fs := make([]FrameID, n)
		for k := range fs {
			fs[k] = FrameID(i*100_000 + k + 1)
		}
		p := Path{Frames: fs, Values: []int64{int64(i), int64(-i)}, Request: RequestID(i), Call: CallID(2 * i)}
		switch i % 3 {
		case 1:
			p.Labels = a
		case 2:
			p.Labels = b
		}
		want = append(want, p)
	}
	// More than a value chunk of paths, so that values span chunks.
	for i := range valueChunk + 5 {
		want = append(want, Path{Frames: []FrameID{FrameID(i + 1)}, Values: []int64{int64(i), 1}})
	}
	var ps Paths
	for _, p := range want {
		ps.Append(p)
	}
	if ps.Len() != len(want) {
		t.Fatalf("Len = %d, want %d", ps.Len(), len(want))
	}
	for i, w := range want {
		got := ps.At(i)
		if !slices.Equal(got.Frames, w.Frames) || !slices.Equal(ps.Frames(i), w.Frames) ||
			!slices.Equal(got.Values, w.Values) || got.Labels != w.Labels || got.Request != w.Request || got.Call != w.Call {
			t.Fatalf("path %d (%d frames): got %d frames, values %v, labels %v, request %d, call %d",
				i, len(w.Frames), len(got.Frames), got.Values, got.Labels, got.Request, got.Call)
		}
		if ps.Value(i, 1) != w.Values[1] {
			t.Fatalf("path %d: Value(1) = %d, want %d", i, ps.Value(i, 1), w.Values[1])
		}
	}
}

// TestValidate checks that Validate finds each broken invariant of a
// source built by hand.
func TestValidate(t *testing.T) {
	tests := []struct {
		name string
		path Path
		ok   bool
	}{
		{"valid", Path{Frames: []FrameID{1}, Values: []int64{1}}, true},
		{"no frames", Path{Values: []int64{1}}, false},
		{"frame 0", Path{Frames: []FrameID{0}, Values: []int64{1}}, false},
		{"frame out of range", Path{Frames: []FrameID{1, 9}, Values: []int64{1}}, false},
		{"call out of range", Path{Frames: []FrameID{1}, Values: []int64{1}, Call: 4}, false},
		{"request out of range", Path{Frames: []FrameID{1}, Values: []int64{1}, Request: 3}, false},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			src := NewSource(Profile, []ValueType{{Type: "samples", Unit: "count"}})
			src.InternFrame(Frame{Function: "main.main"})
			src.Paths.Append(tt.path)
			if err := src.Validate(); (err == nil) != tt.ok {
				t.Errorf("Validate() = %v, want ok=%v", err, tt.ok)
			}
		})
	}
}
