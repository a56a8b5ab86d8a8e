package main

import (
	"encoding/json"
	"os"
	"path/filepath"
	"testing"

	"github.com/google/pprof/profile"
)

// writeShopProfile writes, with the pprof library (the reference encoder
// of profile.proto), a goroutine-style profile in which each caller
// queries through the shop's SQL helper sqldb.(*DB).Query.
func writeShopProfile(t *testing.T, name string, callers ...string) string {
	t.Helper()
	p := &profile.Profile{SampleType: []*profile.ValueType{{Type: "goroutine", Unit: "count"}}, Period: 1}
	fn := func(name, file string) *profile.Location {
		f := &profile.Function{ID: uint64(len(p.Function) + 1), Name: name, SystemName: name, Filename: file}
		p.Function = append(p.Function, f)
		l := &profile.Location{ID: uint64(len(p.Location) + 1), Line: []profile.Line{{Function: f, Line: 10}}}
		p.Location = append(p.Location, l)
		return l
	}
	db := fn("database/sql.(*DB).Query", "/usr/local/go/src/database/sql/sql.go")
	helper := fn("example.com/shop/sqldb.(*DB).Query", "/home/ci/shop/sqldb/db.go")
	main := fn("main.main", "/home/ci/shop/main.go")
	for _, c := range callers {
		caller := fn("example.com/shop/"+c, "/home/ci/shop/"+c+".go")
		p.Sample = append(p.Sample, &profile.Sample{Location: []*profile.Location{db, helper, caller, main}, Value: []int64{10}})
	}
	path := filepath.Join(t.TempDir(), name)
	f, err := os.Create(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	if err := p.Write(f); err != nil {
		t.Fatal(err)
	}
	return path
}

// TestDiffSeesThroughHelpersOnBothSides: the base build calls the SQL
// helper from 3 functions of 2 packages (a shared helper), the candidate
// from 2 (not one by itself). diff must compare both with the helper
// seen through, not report the helper as new and its callers as gone.
func TestDiffSeesThroughHelpersOnBothSides(t *testing.T) {
	base := writeShopProfile(t, "base.pb.gz", "plants.ByID", "plants.Name", "orders.Lines")
	cand := writeShopProfile(t, "cand.pb.gz", "plants.ByID", "orders.Lines")
	code, out, errOut := runTest(t, "", "diff", base, cand, "--format", "json")
	if code != exitOK {
		t.Fatalf("exit %d: %s", code, errOut)
	}
	var doc struct {
		Changes []struct {
			Function string `json:"function"`
			Verdict  string `json:"verdict"`
		} `json:"changes"`
	}
	if err := json.Unmarshal([]byte(out), &doc); err != nil {
		t.Fatalf("%v\n%s", err, out)
	}
	got := map[string]string{}
	for _, c := range doc.Changes {
		got[c.Function] = c.Verdict
	}
	if _, ok := got["example.com/shop/sqldb.(*DB).Query"]; ok || len(got) != 3 {
		t.Errorf("changes %v: want plants.ByID, plants.Name (gone) and orders.Lines, not the helper", got)
	}
	if got["example.com/shop/plants.Name"] != "gone" || got["example.com/shop/plants.ByID"] == "new" {
		t.Errorf("changes %v", got)
	}
	// With detection off, the helper is the root cause on both sides.
	code, out, errOut = runTest(t, "", "diff", base, cand, "--format", "json", "--helpers", "off")
	if code != exitOK {
		t.Fatalf("exit %d: %s", code, errOut)
	}
	doc.Changes = nil
	if err := json.Unmarshal([]byte(out), &doc); err != nil {
		t.Fatal(err)
	}
	if len(doc.Changes) != 1 || doc.Changes[0].Function != "example.com/shop/sqldb.(*DB).Query" {
		t.Errorf("--helpers off: changes %+v, want the helper alone", doc.Changes)
	}
}
