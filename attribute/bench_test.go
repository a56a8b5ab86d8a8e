package attribute

import (
	"fmt"
	"math/rand/v2"
	"os"
	"testing"

	"github.com/culprithq/culprit/attribute/internal/testinput"

	"github.com/culprithq/culprit/callgraph"
	"github.com/culprithq/culprit/traces"
	"github.com/culprithq/culprit/traces/statement"
)

// randomStacks makes n stacks of depth 10–30 over a code base of 300
// application functions (in 20 packages), a few library interludes and
// database, HTTP and pure-CPU leaves: the shape of a CPU profile of a
// web service, for benchmarks only.
func randomStacks(n int, seed uint64) []fakeStack {
	r := rand.New(rand.NewPCG(seed, 1))
	app := make([]string, 300)
	for i := range app {
		app[i] = fmt.Sprintf("example.com/shop/pkg%d.fn%d@/home/ci/shop/pkg%d/f.go:%d", i%20, i, i%20, 10+i)
	}
	leaves := [][]string{{fQuery, fDriver}, {fHTTP}, {"runtime.mallocgc@/usr/local/go/src/runtime/malloc.go:1065"}, nil}
	out := make([]fakeStack, n)
	for i := range out {
		fs := []string{fServe, fMux}
		for d := 10 + r.IntN(21); len(fs) < d; {
			fs = append(fs, app[r.IntN(len(app))])
		}
		fs = append(fs, leaves[r.IntN(len(leaves))]...)
		out[i] = fakeStack{Frames: fs, Count: 1 + int64(r.IntN(50))}
	}
	return out
}

// BenchmarkAttribute measures the attribution walk alone on 20,000
// random stacks (the tree and classification are built once).
func BenchmarkAttribute(b *testing.B) {
	tree, cls := loadTree(b, buildProfile(b, randomStacks(20_000, 1)), DefaultRules())
	b.ReportAllocs()
	for b.Loop() {
		if res := Attribute(tree, cls, Options{}); len(res.Causes) == 0 {
			b.Fatal("no root causes")
		}
	}
}

// BenchmarkAttributeHelpersOff is BenchmarkAttribute without detecting
// shared helpers. On these random stacks nearly every application
// function is called from several packages: the worst case of detection.
func BenchmarkAttributeHelpersOff(b *testing.B) {
	tree, cls := loadTree(b, buildProfile(b, randomStacks(20_000, 1)), DefaultRules())
	b.ReportAllocs()
	for b.Loop() {
		if res := Attribute(tree, cls, Options{Helpers: HelpersOff}); len(res.Causes) == 0 {
			b.Fatal("no root causes")
		}
	}
}

// BenchmarkAttributeSpans measures the attribution walk alone on a span
// source of 3,000 traces (about 40,000 spans: enough to be charged on
// every core), the tree and classification built once.
func BenchmarkAttributeSpans(b *testing.B) {
	src := testinput.SpanSource("shop.jsonl", 60e9, testinput.ShopTraces(1, 3000, func(r int) int { return 2 + r%9 }))
	cls := NewClassifier(src, DefaultRules())
	tree := callgraph.NewTree(src, callgraph.TreeOptions{Keep: cls.Keep})
	b.ReportAllocs()
	for b.Loop() {
		if res := Attribute(tree, cls, Options{}); len(res.Causes) == 0 {
			b.Fatal("no root causes")
		}
	}
}

// BenchmarkAttributeFile measures the attribution walk alone on the input
// CULPRIT_BENCH_INPUT names (any input culprit reads: a million-span file
// of culprit-bench -gen, a large profile), the tree and classification
// built once, statements fingerprinted as they are read (as culprit
// does). It is skipped when the variable is unset.
func BenchmarkAttributeFile(b *testing.B) {
	name := os.Getenv("CULPRIT_BENCH_INPUT")
	if name == "" {
		b.Skip("CULPRIT_BENCH_INPUT is not set")
	}
	f, err := os.Open(name)
	if err != nil {
		b.Fatal(err)
	}
	defer f.Close()
	tree, cls := loadInput(b, name, f, traces.Options{Statement: statement.AppendText}, DefaultRules())
	b.Logf("%d paths, %d tree nodes", tree.Source().Paths.Len(), tree.Len())
	b.ReportAllocs()
	for b.Loop() {
		if res := Attribute(tree, cls, Options{}); len(res.Causes) == 0 {
			b.Fatal("no root causes")
		}
	}
}
