package attribute_test

import (
	"bytes"
	"os"
	"testing"
	"time"

	"github.com/culprithq/culprit/attribute"
	"github.com/culprithq/culprit/callgraph"
	"github.com/culprithq/culprit/traces"
	"github.com/google/pprof/profile"
)

func TestZZScratchTiming(t *testing.T) {
	data, err := os.ReadFile("/tmp/big.pb.gz")
	if err != nil {
		t.Skip()
	}
	for i := 0; i < 2; i++ {
		t0 := time.Now()
		profile.ParseData(data)
		t1 := time.Now()
		l := traces.NewLoader(traces.Options{})
		l.Add("x", bytes.NewReader(data))
		src, _ := l.Source()
		t2 := time.Now()
		cls := attribute.NewClassifier(src, attribute.DefaultRules())
		t3 := time.Now()
		tree := callgraph.NewTree(src, callgraph.TreeOptions{Cut: cls.IsBoundary})
		t4 := time.Now()
		res := attribute.Attribute(tree, cls, attribute.Options{})
		t5 := time.Now()
		t.Logf("parse %v load %v tree %v classify %v attribute %v; causes %d", t1.Sub(t0), t2.Sub(t1), t3.Sub(t2), t4.Sub(t3), t5.Sub(t4), len(res.Causes))
	}
}
