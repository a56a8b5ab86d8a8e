package attribute_test

import (
	"bytes"
	"context"
	"database/sql"
	"fmt"
	"runtime/pprof"
	"testing"

	"github.com/culprithq/culprit/attribute"
	"github.com/culprithq/culprit/callgraph"
	"github.com/culprithq/culprit/traces"
	_ "modernc.org/sqlite" // pure-Go SQLite driver: real database work without cgo
)

// queryVarieties issues one query per item: the function that must hold
// the database charge.
//
//go:noinline
func queryVarieties(ctx context.Context, db *sql.DB, rounds int) (n int, err error) {
	for r := 0; r < rounds; r++ {
		for id := 1; id <= 50; id++ {
			var name string
			var price int
			if err := db.QueryRowContext(ctx, "SELECT name, price FROM varieties WHERE id = ?", id).Scan(&name, &price); err != nil {
				return n, err
			}
			n++
		}
	}
	return n, nil
}

// applyDiscounts is pure CPU work: it must not be charged.
//
//go:noinline
func applyDiscounts(rounds int) uint64 {
	var acc uint64 = 1469598103934665603
	for r := 0; r < rounds; r++ {
		for i := 0; i < 100_000; i++ {
			acc ^= uint64(i)
			acc *= 1099511628211
		}
	}
	return acc
}

// TestRealCPUProfile profiles a real workload with Go's own runtime/pprof
// (the reference producer of profile.proto) against a real SQLite
// database through database/sql, and checks the attribution.
//
// Margins used: the query function must hold at least 90% of the database
// charge (the rest can only come from sampling noise in setup code), and
// the CPU function none of it.
func TestRealCPUProfile(t *testing.T) {
	if testing.Short() {
		t.Skip("profiles a 1.5 s workload")
	}
	ctx := context.Background()
	db, err := sql.Open("sqlite", ":memory:")
	if err != nil {
		t.Fatal(err)
	}
	defer db.Close()
	db.SetMaxOpenConns(1)
	if _, err := db.Exec("CREATE TABLE varieties (id INTEGER PRIMARY KEY, name TEXT, price INTEGER)"); err != nil {
		t.Fatal(err)
	}
	for i := 1; i <= 50; i++ {
		if _, err := db.Exec("INSERT INTO varieties VALUES (?, ?, ?)", i, fmt.Sprintf("variety %d", i), i*100); err != nil {
			t.Fatal(err)
		}
	}

	var buf bytes.Buffer
	if err := pprof.StartCPUProfile(&buf); err != nil {
		t.Skipf("CPU profiler unavailable: %v", err)
	}
	// Fixed amounts of work rather than fixed wall time: the CPU profiler
	// samples CPU time, so a loaded machine must not thin the profile.
	// About 1 s of queries and 0.5 s of arithmetic on an idle core.
	n, qerr := queryVarieties(ctx, db, 2000)
	sink := applyDiscounts(5000)
	pprof.StopCPUProfile()
	if qerr != nil {
		t.Fatal(qerr)
	}
	t.Logf("%d queries, checksum %x, profile %d bytes", n, sink, buf.Len())

	l := traces.NewLoader(traces.Options{})
	if err := l.Add("cpu.pb.gz", &buf); err != nil {
		t.Fatal(err)
	}
	src, err := l.Source()
	if err != nil {
		t.Fatal(err)
	}
	res := attribute.Attribute(callgraph.NewTree(src, callgraph.TreeOptions{}), attribute.NewClassifier(src, attribute.DefaultRules()), attribute.Options{Value: "samples"})
	if !res.CPUOnly {
		t.Error("a CPU profile must carry the CPU-only caveat")
	}
	if res.Totals.Database < 20 {
		t.Fatalf("only %d database samples; the profile is too thin to judge (%+v)", res.Totals.Database, res.Totals)
	}
	var query, cpu *attribute.Cause
	for _, c := range res.Causes {
		switch c.Function {
		case "github.com/culprithq/culprit/attribute_test.queryVarieties":
			query = c
		case "github.com/culprithq/culprit/attribute_test.applyDiscounts":
			cpu = c
		}
	}
	if query == nil {
		t.Fatalf("queryVarieties not among root causes: %+v", res.Causes)
	}
	if query.Share < 0.90 {
		t.Errorf("queryVarieties holds %.1f%% of the database charge, want ≥ 90%%", query.Share*100)
	}
	if cpu != nil {
		t.Errorf("applyDiscounts (pure CPU) was charged %d", cpu.Cost)
	}
	if res.Totals.Other == 0 {
		t.Error("the CPU work should appear as other cost")
	}
	if query.Statements[0].System != "sqlite" {
		t.Errorf("boundary system = %q, want sqlite (refined from database/sql by the driver)", query.Statements[0].System)
	}
}
