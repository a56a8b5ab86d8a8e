package attribute

import (
	"bytes"
	"fmt"
	"strings"
	"testing"

	"github.com/culprithq/culprit/traces"
	"github.com/google/pprof/profile"
)

// longFileProfile builds, with the pprof library, a valid profile of n
// functions that all share one file name of about size bytes, ending in
// ext: the shape that made rule matching quadratic when every frame
// scanned the file name once per file rule.
func longFileProfile(tb testing.TB, n, size int, ext string) *traces.Source {
	tb.Helper()
	file := "/srv/" + strings.Repeat("nested/", size/7) + "main" + ext
	p := &profile.Profile{
		SampleType: []*profile.ValueType{{Type: "samples", Unit: "count"}},
		PeriodType: &profile.ValueType{Type: "cpu", Unit: "nanoseconds"},
		Period:     10_000_000,
	}
	for i := range n {
		fn := &profile.Function{ID: uint64(i + 1), Name: fmt.Sprintf("permitoffice/api.handler%d", i), Filename: file}
		loc := &profile.Location{ID: uint64(i + 1), Line: []profile.Line{{Function: fn, Line: int64(i + 1)}}}
		p.Function = append(p.Function, fn)
		p.Location = append(p.Location, loc)
		p.Sample = append(p.Sample, &profile.Sample{Location: []*profile.Location{loc}, Value: []int64{1}})
	}
	var buf bytes.Buffer
	if err := p.WriteUncompressed(&buf); err != nil {
		tb.Fatal(err)
	}
	l := traces.NewLoader(traces.Options{})
	if err := l.Add("long.pb", &buf); err != nil {
		tb.Fatal(err)
	}
	src, err := l.Source()
	if err != nil {
		tb.Fatal(err)
	}
	return src
}

// TestClassifierWorkIsLinear: each rule is evaluated once per distinct
// function name and once per distinct file path, never once per frame, so
// a profile of 2,000 functions sharing one 1 MB file name costs one scan
// of that name per file rule. The check counts rule evaluations (the work
// done), not time.
func TestClassifierWorkIsLinear(t *testing.T) {
	for _, ext := range []string{".go", ".py", ".js"} {
		t.Run(ext, func(t *testing.T) {
			src := longFileProfile(t, 2000, 1<<20, ext)
			funcs, files := map[string]bool{}, map[string]bool{}
			for _, f := range src.Frames[1:] {
				funcs[f.Function] = true
				files[f.File] = true
			}
			if len(funcs) != 2000 || len(files) != 1 {
				t.Fatalf("%d functions in %d files, want 2000 in 1", len(funcs), len(files))
			}
			rules := DefaultRules()
			c := NewClassifier(src, rules)
			limit := (len(funcs) + len(files)) * len(rules.Rules)
			if c.m.evals > limit {
				t.Errorf("%d rule evaluations, want at most (distinct functions + files) × rules = %d", c.m.evals, limit)
			}
			if len(c.m.files) != 1 || c.m.hashed != 1 {
				t.Errorf("file facts worked out for %d paths, the path hashed %d times; want 1 and 1", len(c.m.files), c.m.hashed)
			}
			if ext == ".go" && len(c.Detected) != 1 {
				t.Errorf("detected %+v, want the one package of the 2000 handlers", c.Detected)
			}
		})
	}
}

// BenchmarkClassifyLongFileName classifies 2,000 functions that share a
// 1 MB file name.
func BenchmarkClassifyLongFileName(b *testing.B) {
	src := longFileProfile(b, 2000, 1<<20, ".py")
	rules := DefaultRules()
	b.ResetTimer()
	for range b.N {
		NewClassifier(src, rules)
	}
}
