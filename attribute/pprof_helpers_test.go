package attribute

import (
	"bytes"
	"io"
	"testing"

	"github.com/culprithq/culprit/attribute/internal/testinput"

	"github.com/culprithq/culprit/callgraph"
	"github.com/culprithq/culprit/traces"
)

// fakeStack is one sample of a test profile (testinput.Stack).
type fakeStack = testinput.Stack

// buildProfile encodes stacks with the pprof library itself (the reference
// encoder of profile.proto), as a goroutine-style profile.
func buildProfile(t testing.TB, stacks []fakeStack) []byte {
	t.Helper()
	return testinput.MustProfile(t, stacks)
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
	return loadInput(t, "test.pb.gz", bytes.NewReader(data), traces.Options{}, rules)
}

// loadInput reads one input with opts, classifies it with rules and
// builds its tree, cut at boundaries as culprit does.
func loadInput(t testing.TB, name string, r io.Reader, opts traces.Options, rules *Rules) (*callgraph.Tree, *Classifier) {
	t.Helper()
	l := traces.NewLoader(opts)
	if err := l.Add(name, r); err != nil {
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
