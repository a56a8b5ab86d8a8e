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
	// More than a record chunk of paths, so that records and values span chunks.
	for i := range recChunk + 5 {
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

// TestPathsAppendRef appends paths that share the frames of earlier
// ones, of every size class, and reads them back: same frames, their own
// values and IDs, and a frame key equal exactly where frames are shared.
func TestPathsAppendRef(t *testing.T) {
	var ps Paths
	var want []Path
	var refs []FrameRef
	for i, n := range []int{0, 1, 5, frameChunk - 7, longPath, 70_000, 3} {
		fs := make([]FrameID, n)
		for k := range fs {
			fs[k] = FrameID(i*100_000 + k + 1)
		}
		p := Path{Frames: fs, Values: []int64{int64(i), 0}, Request: RequestID(i)}
		ps.Append(p)
		want = append(want, p)
		refs = append(refs, ps.Ref(ps.Len()-1))
	}
	if ps.Shared() {
		t.Fatal("Shared before any AppendRef")
	}
	stored := ps.stored
	for j := range 3 {
		for i, r := range refs {
			p := Path{Values: []int64{int64(i), int64(j + 1)}, Request: RequestID(100 + i), Call: CallID(j)}
			ps.AppendRef(p, r)
			p.Frames = want[i].Frames
			want = append(want, p)
		}
	}
	if !ps.Shared() || ps.stored != stored {
		t.Fatalf("Shared = %v, stored frames %d, want true, %d", ps.Shared(), ps.stored, stored)
	}
	for i, w := range want {
		got := ps.At(i)
		if !slices.Equal(got.Frames, w.Frames) || !slices.Equal(got.Values, w.Values) || got.Request != w.Request || got.Call != w.Call {
			t.Fatalf("path %d: got %d frames, values %v, request %d, call %d; want %d frames, %v, %d, %d",
				i, len(got.Frames), got.Values, got.Request, got.Call, len(w.Frames), w.Values, w.Request, w.Call)
		}
		for k := range i {
			if same := ps.FrameKey(i) == ps.FrameKey(k); same != (k%len(refs) == i%len(refs)) {
				t.Fatalf("FrameKey(%d) == FrameKey(%d) is %v", i, k, same)
			}
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
