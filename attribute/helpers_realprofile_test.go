package attribute_test

import (
	"bytes"
	"context"
	"database/sql"
	"runtime/pprof"
	"strings"
	"testing"

	"github.com/culprithq/culprit/attribute"
	"github.com/culprithq/culprit/attribute/internal/shopdb"
	"github.com/culprithq/culprit/callgraph"
	"github.com/culprithq/culprit/traces"
)

const shopPkg = "github.com/culprithq/culprit/attribute/internal/shopdb/"

// TestRealProfileSharedHelper profiles, with Go's own runtime/pprof (the
// reference producer of profile.proto), a small service on a real SQLite
// database whose packages plants and orders query through the shared
// helper sqldb.(*DB).QueryRow (3 callers in 2 other packages), while
// orders.count is right above its calls but only its own package calls
// it. It checks the attribution with the helper seen through (the
// default), with --helpers=off, and with the helper named in the rules.
func TestRealProfileSharedHelper(t *testing.T) {
	if testing.Short() {
		t.Skip("profiles a 1 s workload")
	}
	ctx := context.Background()
	db, err := sql.Open("sqlite", ":memory:")
	if err != nil {
		t.Fatal(err)
	}
	defer db.Close()
	db.SetMaxOpenConns(1)
	shop, err := shopdb.Open(ctx, db)
	if err != nil {
		t.Fatal(err)
	}
	var buf bytes.Buffer
	if err := pprof.StartCPUProfile(&buf); err != nil {
		t.Skipf("CPU profiler unavailable: %v", err)
	}
	n, qerr := shopdb.Serve(ctx, shop, 1500) // a fixed amount of work: about 1 s on an idle core
	pprof.StopCPUProfile()
	if qerr != nil {
		t.Fatal(qerr)
	}
	t.Logf("%d queries, profile %d bytes", n, buf.Len())
	l := traces.NewLoader(traces.Options{})
	if err := l.Add("cpu.pb.gz", &buf); err != nil {
		t.Fatal(err)
	}
	src, err := l.Source()
	if err != nil {
		t.Fatal(err)
	}
	rank := func(rules *attribute.Rules, mode attribute.HelperMode) *attribute.Result {
		cls := attribute.NewClassifier(src, rules)
		tree := callgraph.NewTree(src, callgraph.TreeOptions{Keep: cls.Keep})
		return attribute.Attribute(tree, cls, attribute.Options{Value: "samples", Helpers: mode})
	}
	causes := func(res *attribute.Result) map[string]*attribute.Cause {
		m := map[string]*attribute.Cause{}
		for _, c := range res.Causes {
			m[strings.TrimPrefix(c.Function, shopPkg)] = c
		}
		return m
	}
	helper := "sqldb.(*DB).QueryRow"

	auto := rank(attribute.DefaultRules(), attribute.HelpersAuto)
	if auto.Totals.Database < 40 {
		t.Fatalf("only %d database samples; the profile is too thin to judge", auto.Totals.Database)
	}
	got := causes(auto)
	t.Logf("database %d samples; helpers %+v", auto.Totals.Database, auto.Helpers)
	if got[helper] != nil {
		t.Errorf("the shared helper is a root cause: %+v", got[helper])
	}
	if len(auto.Helpers) != 1 || auto.Helpers[0].Function != shopPkg+helper || auto.Helpers[0].Named ||
		auto.Helpers[0].Callers != 3 || auto.Helpers[0].Packages != 2 {
		t.Errorf("helpers seen through = %+v, want %s detected with 3 callers in 2 packages", auto.Helpers, helper)
	}
	var through, charged int64
	for _, fn := range []string{"plants.ByID", "plants.Name", "orders.Lines", "orders.count"} {
		c := got[fn]
		if c == nil {
			t.Errorf("%s is not a root cause; causes: %v", fn, keys(got))
			continue
		}
		charged += c.Cost
		for _, d := range c.Statements {
			wantVia := shopPkg + helper
			if fn == "orders.count" {
				wantVia = "" // its own call, not through the helper
			}
			if d.Via != wantVia {
				t.Errorf("%s: statement %q via %q, want %q", fn, d.Statement, d.Via, wantVia)
			}
			if d.Via != "" {
				through += d.Cost
			}
		}
	}
	for _, fn := range []string{"orders.byOrder", "orders.byPlant", "orders.all", "orders.Report"} {
		if got[fn] != nil {
			t.Errorf("%s charged although orders.count (called from its own package only) is its root cause", fn)
		}
	}
	// Margin: ≥ 90% of the database charge on the four, as in
	// TestRealCPUProfile (the rest is sampling noise in setup code).
	if float64(charged) < 0.9*float64(auto.Totals.Database) {
		t.Errorf("the four root causes hold %d of %d database samples, want ≥ 90%%", charged, auto.Totals.Database)
	}
	if auto.Helpers[0].Cost != through || through == 0 {
		t.Errorf("helper cost %d, want the %d charged through it", auto.Helpers[0].Cost, through)
	}

	// --helpers=off: the helper is the root cause of exactly what was
	// charged through it.
	off := rank(attribute.DefaultRules(), attribute.HelpersOff)
	if len(off.Helpers) != 0 {
		t.Errorf("--helpers=off saw through %+v", off.Helpers)
	}
	if c := causes(off)[helper]; c == nil || c.Cost != through {
		t.Errorf("--helpers=off: helper root cause %+v, want cost %d", c, through)
	}
	for _, fn := range []string{"plants.ByID", "plants.Name", "orders.Lines"} {
		if causes(off)[fn] != nil {
			t.Errorf("--helpers=off still charges %s", fn)
		}
	}

	// Named in the rules (a package prefix), with detection off: the same
	// root causes as detection finds.
	rules := attribute.Merge(attribute.DefaultRules(), &attribute.Rules{Helpers: []string{shopPkg + "sqldb."}})
	named := rank(rules, attribute.HelpersOff)
	if len(named.Helpers) != 1 || !named.Helpers[0].Named || named.Helpers[0].Cost != through {
		t.Errorf("named helper: %+v, want named, cost %d", named.Helpers, through)
	}
	for fn, c := range got {
		if n := causes(named)[fn]; n == nil || n.Cost != c.Cost {
			t.Errorf("named helper: %s = %+v, detection gave cost %d", fn, n, c.Cost)
		}
	}
}

func keys(m map[string]*attribute.Cause) []string {
	var out []string
	for k := range m {
		out = append(out, k)
	}
	return out
}
