package traces

import (
	"bytes"
	"fmt"
	"testing"
)

// oneSpanInput is an OTLP/JSON export of one database span.
func oneSpanInput(i int) []byte {
	return fmt.Appendf(nil, `{"resourceSpans":[{"resource":{"attributes":[{"key":"service.name","value":{"stringValue":"greenhouse-web"}}]},`+
		`"scopeSpans":[{"spans":[{"traceId":"%032x","spanId":"%016x","name":"SELECT plants","kind":3,`+
		`"startTimeUnixNano":"1780488000000000000","endTimeUnixNano":"1780488000001000000",`+
		`"attributes":[{"key":"db.system.name","value":{"stringValue":"postgresql"}}]}]}]}]}`+"\n", i+1, i+1)
}

// BenchmarkManyInputs reads 10,000 one-span inputs and, beside it, the
// same spans as one input: the difference is the per-input overhead
// (issue: 10,000 one-span files once cost 13 s of CPU, one file 0.2 s).
func BenchmarkManyInputs(b *testing.B) {
	const n = 10_000
	inputs := make([][]byte, n)
	var all []byte
	for i := range inputs {
		inputs[i] = oneSpanInput(i)
		all = append(all, inputs[i]...)
	}
	b.Run("files", func(b *testing.B) {
		b.ReportAllocs()
		for b.Loop() {
			l := NewLoader(Options{SkipDigest: true})
			for i, in := range inputs {
				if err := l.Add(fmt.Sprint("s", i, ".json"), bytes.NewReader(in)); err != nil {
					b.Fatal(err)
				}
			}
			if src, err := l.Source(); err != nil || src.Paths.Len() != n {
				b.Fatal(err)
			}
		}
	})
	b.Run("one", func(b *testing.B) {
		b.ReportAllocs()
		for b.Loop() {
			l := NewLoader(Options{SkipDigest: true})
			if err := l.Add("all.jsonl", bytes.NewReader(all)); err != nil {
				b.Fatal(err)
			}
			if src, err := l.Source(); err != nil || src.Paths.Len() != n {
				b.Fatal(err)
			}
		}
	})
}
