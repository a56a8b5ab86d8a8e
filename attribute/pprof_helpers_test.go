package attribute

import (
	"bytes"
	"strings"
	"testing"

	"github.com/culprithq/culprit/callgraph"
	"github.com/culprithq/culprit/traces"
	"github.com/google/pprof/profile"
)

// fakeStack is one sample of a test profile: frames root first, written
// "function@file:line", and a count.
type fakeStack struct {
	frames []string
	count  int64
	labels map[string][]string
}

// buildProfile encodes stacks with the pprof library itself (the reference
// encoder of profile.proto), as a goroutine-style profile.
func buildProfile(t testing.TB, stacks []fakeStack) []byte {
	t.Helper()
	p := &profile.Profile{
		SampleType: []*profile.ValueType{{Type: "samples", Unit: "count"}, {Type: "cpu", Unit: "nanoseconds"}},
		PeriodType: &profile.ValueType{Type: "cpu", Unit: "nanoseconds"},
		Period:     10_000_000,
	}
	funcs := map[string]*profile.Function{}
	locs := map[string]*profile.Location{}
	for _, st := range stacks {
		var sl []*profile.Location
		for i := len(st.frames) - 1; i >= 0; i-- { // leaf first
			spec := st.frames[i]
			loc := locs[spec]
			if loc == nil {
				name, file, line := parseFrameSpec(spec)
				fn := funcs[name+"@"+file]
				if fn == nil {
					fn = &profile.Function{ID: uint64(len(funcs) + 1), Name: name, SystemName: name, Filename: file}
					funcs[name+"@"+file] = fn
					p.Function = append(p.Function, fn)
				}
				loc = &profile.Location{ID: uint64(len(locs) + 1), Line: []profile.Line{{Function: fn, Line: line}}}
				locs[spec] = loc
				p.Location = append(p.Location, loc)
			}
			sl = append(sl, loc)
		}
		p.Sample = append(p.Sample, &profile.Sample{Location: sl, Value: []int64{st.count, st.count * 10_000_000}, Label: st.labels})
	}
	var buf bytes.Buffer
	if err := p.Write(&buf); err != nil {
		t.Fatal(err)
	}
	return buf.Bytes()
}

func parseFrameSpec(spec string) (name, file string, line int64) {
	name, rest, _ := strings.Cut(spec, "@")
	file, ln, _ := strings.Cut(rest, ":")
	for _, c := range ln {
		line = line*10 + int64(c-'0')
	}
	return name, file, line
}

// rankProfile loads data and attributes it with rules.
func rankProfile(t testing.TB, data []byte, rules *Rules, opts Options) *Result {
	t.Helper()
	tree, cls := loadTree(t, data, rules)
	return Attribute(tree, cls, opts)
}

// loadTree loads a profile, classifies it with rules and builds its
// tree, cut at boundaries as culprit does.
func loadTree(t testing.TB, data []byte, rules *Rules) (*callgraph.Tree, *Classifier) {
	t.Helper()
	l := traces.NewLoader(traces.Options{})
	if err := l.Add("test.pb.gz", bytes.NewReader(data)); err != nil {
		t.Fatal(err)
	}
	src, err := l.Source()
	if err != nil {
		t.Fatal(err)
	}
	cls := NewClassifier(src, rules)
	return callgraph.NewTree(src, callgraph.TreeOptions{Keep: cls.Keep}), cls
}

func causeByName(r *Result, fn string) *Cause {
	for _, c := range r.Causes {
		if c.Function == fn {
			return c
		}
	}
	return nil
}
