package main

import (
	"encoding/csv"
	"encoding/json"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/google/pprof/profile"
)

// manyCausesProfile is a profile, written by the pprof library (the
// reference encoder), in which 30 functions of the invented greenhouse
// shop each query the database: 30 root causes, more than the 20 rows
// the human formats show by default.
func manyCausesProfile(t *testing.T) string {
	t.Helper()
	mainFn := &profile.Function{ID: 1, Name: "main.main", SystemName: "main.main", Filename: "/src/greenhouse/main.go"}
	query := &profile.Function{ID: 2, Name: "database/sql.(*DB).QueryContext", SystemName: "database/sql.(*DB).QueryContext",
		Filename: "/usr/local/go/src/database/sql/sql.go"}
	p := &profile.Profile{
		SampleType: []*profile.ValueType{{Type: "samples", Unit: "count"}},
		PeriodType: &profile.ValueType{Type: "cpu", Unit: "nanoseconds"}, Period: 10_000_000, DurationNanos: 30e9,
		Function: []*profile.Function{mainFn, query},
		Location: []*profile.Location{
			{ID: 1, Address: 0x1000, Line: []profile.Line{{Function: mainFn, Line: 10}}},
			{ID: 2, Address: 0x2000, Line: []profile.Line{{Function: query, Line: 1710}}},
		},
	}
	for i := range 30 {
		name := fmt.Sprintf("example.com/greenhouse/plot%02d.(*Bed).Water", i)
		fn := &profile.Function{ID: uint64(3 + i), Name: name, SystemName: name, Filename: fmt.Sprintf("/src/greenhouse/plot%02d/bed.go", i)}
		loc := &profile.Location{ID: uint64(3 + i), Address: uint64(0x3000 + 16*i), Line: []profile.Line{{Function: fn, Line: 20}}}
		p.Function = append(p.Function, fn)
		p.Location = append(p.Location, loc)
		p.Sample = append(p.Sample, &profile.Sample{Location: []*profile.Location{p.Location[1], loc, p.Location[0]}, Value: []int64{int64(100 + i)}})
	}
	path := filepath.Join(t.TempDir(), "many.pb")
	f, err := os.Create(path)
	if err != nil {
		t.Fatal(err)
	}
	if err := p.WriteUncompressed(f); err != nil {
		t.Fatal(err)
	}
	if err := f.Close(); err != nil {
		t.Fatal(err)
	}
	return path
}

// TestMachineFormatsHoldEveryRow: JSON and CSV carry every root cause
// unless --limit is given; an explicit limit says what it cut.
func TestMachineFormatsHoldEveryRow(t *testing.T) {
	in := manyCausesProfile(t)
	type rank struct {
		RootCauses []struct {
			Share float64 `json:"share"`
		} `json:"rootCauses"`
		Omitted *struct {
			Count int     `json:"count"`
			Share float64 `json:"share"`
		} `json:"omitted"`
	}
	decode := func(args ...string) rank {
		t.Helper()
		code, out, errOut := runTest(t, "", append([]string{"rank", "--format", "json"}, append(args, in)...)...)
		if code != exitOK {
			t.Fatalf("exit %d: %s", code, errOut)
		}
		var r rank
		if err := json.Unmarshal([]byte(out), &r); err != nil {
			t.Fatal(err)
		}
		return r
	}
	sum := func(r rank) float64 {
		s := 0.0
		for _, c := range r.RootCauses {
			s += c.Share
		}
		return s
	}
	all := decode()
	if len(all.RootCauses) != 30 || all.Omitted != nil || math.Abs(sum(all)-1) > 1e-9 {
		t.Errorf("default JSON: %d root causes, shares sum to %v, omitted %+v; want all 30 summing to 1", len(all.RootCauses), sum(all), all.Omitted)
	}
	cut := decode("--limit", "5")
	if len(cut.RootCauses) != 5 || cut.Omitted == nil || cut.Omitted.Count != 25 || math.Abs(sum(cut)+cut.Omitted.Share-1) > 1e-9 {
		t.Errorf("--limit 5: %d root causes, omitted %+v", len(cut.RootCauses), cut.Omitted)
	}

	rows := func(args ...string) [][]string {
		t.Helper()
		code, out, errOut := runTest(t, "", append([]string{"rank", "--format", "csv"}, append(args, in)...)...)
		if code != exitOK {
			t.Fatalf("exit %d: %s", code, errOut)
		}
		recs, err := csv.NewReader(strings.NewReader(out)).ReadAll()
		if err != nil {
			t.Fatal(err)
		}
		return recs[1:]
	}
	if recs := rows(); len(recs) != 30 || strings.HasPrefix(recs[len(recs)-1][0], "(omitted") {
		t.Errorf("default CSV: %d rows, want 30", len(recs))
	}
	if recs := rows("--limit", "5"); len(recs) != 6 || recs[5][0] != "(omitted 25)" {
		t.Errorf("CSV with --limit 5: %d rows ending %q, want 5 and (omitted 25)", len(recs), recs[len(recs)-1])
	}
	// The text report still shows 20 rows by default.
	_, out, _ := runTest(t, "", "rank", in)
	if !strings.Contains(out, "(10 more root causes not shown; --limit 0 shows all)") {
		t.Errorf("text report does not cut at 20 rows:\n%s", out)
	}
}

// TestTextWidthFromEnvironment: off a terminal the text report takes
// $COLUMNS, else 100 columns; --width overrides both.
func TestTextWidthFromEnvironment(t *testing.T) {
	in := manyCausesProfile(t)
	longest := func(columns string, args ...string) int {
		t.Helper()
		s, out, errb := testStreams("")
		s.Getenv = func(k string) string {
			if k == "COLUMNS" {
				return columns
			}
			return ""
		}
		if code := run(append([]string{"rank"}, append(args, in)...), s); code != exitOK {
			t.Fatalf("exit %d: %s", code, errb)
		}
		n := 0
		for _, line := range strings.Split(out.String(), "\n") {
			n = max(n, len([]rune(line)))
		}
		return n
	}
	for _, tt := range []struct {
		columns string
		args    []string
		max     int
	}{
		{"", nil, 100},
		{"80", nil, 80},
		{"not a number", nil, 100},
		{"80", []string{"--width", "200"}, 200},
		{"", []string{"--width", "72"}, 72},
	} {
		if got := longest(tt.columns, tt.args...); got > tt.max || got < tt.max-30 {
			t.Errorf("COLUMNS=%q %v: longest line %d, want at most %d (and near it)", tt.columns, tt.args, got, tt.max)
		}
	}
}
