package traces

import (
	"bytes"
	"fmt"
	"strings"
	"testing"

	"github.com/google/pprof/profile"
)

// deepProfile is a profile, encoded by the pprof library (the reference
// encoder), with one sample whose stack is depth frames deep: main.main,
// then a recursive app.walk depth-3 times (each call its own line, so
// each its own frame), then app.load and the database call at the leaf.
// Recursive code gives such stacks in real profiles.
func deepProfile(depth int) *profile.Profile {
	fn := func(id uint64, name string) *profile.Function {
		return &profile.Function{ID: id, Name: name, SystemName: name, Filename: "/h/app/app.go"}
	}
	mainF, walk, load := fn(1, "main.main"), fn(2, "example.com/app.walk"), fn(3, "example.com/app.load")
	query := &profile.Function{ID: 4, Name: "database/sql.(*DB).Query", Filename: "/usr/local/go/src/database/sql/sql.go"}
	p := &profile.Profile{
		SampleType: []*profile.ValueType{{Type: "samples", Unit: "count"}},
		Function:   []*profile.Function{mainF, walk, load, query},
	}
	loc := func(f *profile.Function, line int64) *profile.Location {
		l := &profile.Location{ID: uint64(len(p.Location) + 1), Line: []profile.Line{{Function: f, Line: line}}}
		p.Location = append(p.Location, l)
		return l
	}
	stack := []*profile.Location{loc(query, 1700), loc(load, 30)} // leaf first
	for i := range depth - 3 {
		stack = append(stack, loc(walk, int64(100+i)))
	}
	stack = append(stack, loc(mainF, 10))
	p.Sample = []*profile.Sample{
		{Location: stack, Value: []int64{7}},
		{Location: []*profile.Location{stack[0], stack[1], stack[len(stack)-1]}, Value: []int64{3}},
	}
	return p
}

// TestDeepStackIsElided is issue 13 item 13: one sample 20,000 frames
// deep (the attack failed the whole input at the old limit of 512) is
// read, cut to --max-depth frames with the root-most and leaf-most kept
// and the middle marked, and counted as a repair.
func TestDeepStackIsElided(t *testing.T) {
	var buf bytes.Buffer
	if err := deepProfile(20_000).Write(&buf); err != nil {
		t.Fatal(err)
	}
	l := NewLoader(Options{})
	if err := l.Add("deep.pb.gz", &buf); err != nil {
		t.Fatalf("the deep sample failed the input: %v", err)
	}
	src, err := l.Source()
	if err != nil {
		t.Fatal(err)
	}
	if DefaultLimits.MaxDepth < 4096 {
		t.Errorf("default depth %d, want at least 4,096", DefaultLimits.MaxDepth)
	}
	if src.Paths.Len() != 2 {
		t.Fatalf("%d paths, want 2", src.Paths.Len())
	}
	deep := src.Paths.At(0)
	if len(deep.Frames) != DefaultLimits.MaxDepth || deep.Values[0] != 7 {
		t.Fatalf("deep path: %d frames, value %d; want %d frames, 7", len(deep.Frames), deep.Values[0], DefaultLimits.MaxDepth)
	}
	name := func(i int) string { return src.Frames[deep.Frames[i]].Function }
	n := len(deep.Frames)
	if name(0) != "main.main" || name(1) != "example.com/app.walk" || name(n-2) != "example.com/app.load" || name(n-1) != "database/sql.(*DB).Query" {
		t.Errorf("ends of the path: %s, %s … %s, %s", name(0), name(1), name(n-2), name(n-1))
	}
	marks := 0
	for i := range n {
		if name(i) == ElidedFrames {
			marks++
		}
	}
	if marks != 1 || name((n-1)/2) != ElidedFrames {
		t.Errorf("%d elision marks, at %q in the middle; want one", marks, name((n-1)/2))
	}
	// The shallow sample is untouched.
	if p := src.Paths.At(1); len(p.Frames) != 3 {
		t.Errorf("shallow path has %d frames", len(p.Frames))
	}
	sum := src.Warnings.Summary()
	cut := 20_000 - (DefaultLimits.MaxDepth - 1)
	if len(sum) != 1 || sum[0].Kind != WarnDeepStack || sum[0].Count != 1 ||
		!strings.Contains(sum[0].Examples[0].Message, fmt.Sprintf("the middle %d are elided", cut)) {
		t.Errorf("warnings: %+v", sum)
	}
}

func TestElideMiddle(t *testing.T) {
	path := []FrameID{1, 2, 3, 4, 5, 6, 7, 8, 9, 10}
	got, cut := elideMiddle(path, 5, 99)
	if fmt.Sprint(got) != "[1 2 99 9 10]" || cut != 6 {
		t.Errorf("got %v, %d", got, cut)
	}
}
