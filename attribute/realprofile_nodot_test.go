package attribute_test

import (
	"bytes"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strings"
	"testing"

	"github.com/culprithq/culprit/attribute"
	"github.com/culprithq/culprit/callgraph"
	"github.com/culprithq/culprit/traces"
)

// The permit-office service: a module whose path has no dot, as internal
// services and monorepos often name theirs. Its permits package looks
// permits up one query each, its inspections package schedules with a
// query per slot, its fees package only computes. It profiles itself with
// runtime/pprof and writes the CPU profile to os.Args[1].
var permitOffice = map[string]string{
	"go.mod": "module permitoffice\n\ngo 1.26\n\nrequire modernc.org/sqlite SQLITE_VERSION\n",
	"main.go": `package main

import (
	"context"
	"database/sql"
	"fmt"
	"os"
	"runtime/pprof"
	"time"

	_ "modernc.org/sqlite"

	"permitoffice/fees"
	"permitoffice/inspections"
	"permitoffice/permits"
)

func main() {
	db, err := sql.Open("sqlite", ":memory:")
	if err != nil {
		panic(err)
	}
	db.SetMaxOpenConns(1)
	for _, q := range []string{
		"CREATE TABLE permits (id INTEGER PRIMARY KEY, holder TEXT, kind TEXT)",
		"CREATE TABLE slots (day INTEGER, inspector TEXT)",
	} {
		if _, err := db.Exec(q); err != nil {
			panic(err)
		}
	}
	for i := 1; i <= 50; i++ {
		if _, err := db.Exec("INSERT INTO permits VALUES (?, ?, 'fence')", i, fmt.Sprintf("holder %d", i)); err != nil {
			panic(err)
		}
		if _, err := db.Exec("INSERT INTO slots VALUES (?, 'inspector')", i%7); err != nil {
			panic(err)
		}
	}
	out, err := os.Create(os.Args[1])
	if err != nil {
		panic(err)
	}
	if err := pprof.StartCPUProfile(out); err != nil {
		panic(err)
	}
	ctx := context.Background()
	store := &permits.Store{DB: db}
	n := 0
	// At least 1500 rounds and a second: a loaded machine gives the
	// process less CPU, and the profile needs enough database samples.
	start := time.Now()
	for round := 0; round < 1500 || time.Since(start) < time.Second; round++ {
		for id := 1; id <= 40; id++ {
			if _, err := store.Lookup(ctx, id); err != nil {
				panic(err)
			}
			n++
		}
		k, err := inspections.Schedule(ctx, db, round%7)
		if err != nil {
			panic(err)
		}
		n += k
	}
	sum := fees.Compute(3000)
	pprof.StopCPUProfile()
	if err := out.Close(); err != nil {
		panic(err)
	}
	fmt.Println(n, sum)
}
`,
	"permits/store.go": `package permits

import (
	"context"
	"database/sql"
)

type Store struct{ DB *sql.DB }

// Lookup reads one permit.
func (s *Store) Lookup(ctx context.Context, id int) (string, error) {
	var holder string
	err := s.DB.QueryRowContext(ctx, "SELECT holder FROM permits WHERE id = ?", id).Scan(&holder)
	return holder, err
}
`,
	"inspections/schedule.go": `package inspections

import (
	"context"
	"database/sql"
)

// Schedule counts the free slots of a day, one query per slot.
func Schedule(ctx context.Context, db *sql.DB, day int) (int, error) {
	n := 0
	for slot := 0; slot < 10; slot++ {
		var c int
		if err := db.QueryRowContext(ctx, "SELECT count(*) FROM slots WHERE day = ?", day).Scan(&c); err != nil {
			return n, err
		}
		n++
	}
	return n, nil
}
`,
	"fees/fees.go": `package fees

// Compute is CPU work only.
func Compute(rounds int) uint64 {
	var acc uint64 = 1469598103934665603
	for r := 0; r < rounds; r++ {
		for i := 0; i < 100_000; i++ {
			acc ^= uint64(i)
			acc *= 1099511628211
		}
	}
	return acc
}
`,
}

// TestRealCPUProfileModuleWithoutDot builds the permit-office service, a
// separate module whose path has no dot, with the Go toolchain (plain and
// -trimpath), runs it (it profiles itself with Go's own runtime/pprof
// against a real SQLite database) and ranks its profile with no --app and
// no rules file: the root causes must be its own functions, not a
// "(no application frame)" bucket.
//
// Margins used: the lookup function issues 40 of each 50 queries, the
// scheduler 10 heavier ones (a count over a table against a primary-key
// read; 63–71% against 29–37% in runs on an idle machine), so each must
// hold at least 15% of the database charge and the two at least 95%
// together; the CPU-only function nothing; what reaches no application
// frame (sampling noise in driver goroutines) at most 5%.
func TestRealCPUProfileModuleWithoutDot(t *testing.T) {
	if testing.Short() {
		t.Skip("builds and profiles a separate program")
	}
	goCmd, err := exec.LookPath("go")
	if err != nil {
		t.Skip("the go command is not on PATH")
	}
	mod, err := os.ReadFile("../go.mod")
	if err != nil {
		t.Fatal(err)
	}
	m := regexp.MustCompile(`(?m)^\s*modernc\.org/sqlite (v\S+)`).FindSubmatch(mod)
	if m == nil {
		t.Fatal("go.mod does not require modernc.org/sqlite")
	}
	dir := t.TempDir()
	for name, text := range permitOffice {
		path := filepath.Join(dir, filepath.FromSlash(name))
		if err := os.MkdirAll(filepath.Dir(path), 0o755); err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(path, []byte(strings.ReplaceAll(text, "SQLITE_VERSION", string(m[1]))), 0o644); err != nil {
			t.Fatal(err)
		}
	}
	sum, err := os.ReadFile("../go.sum") // the same versions: no download when the module cache has them
	if err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(filepath.Join(dir, "go.sum"), sum, 0o644); err != nil {
		t.Fatal(err)
	}
	for _, build := range []struct {
		name  string
		flags []string
	}{{"plain", nil}, {"trimpath", []string{"-trimpath"}}} {
		t.Run(build.name, func(t *testing.T) {
			bin := filepath.Join(dir, "permitoffice-"+build.name)
			cmd := exec.Command(goCmd, append(append([]string{"build", "-mod=mod"}, build.flags...), "-o", bin, ".")...)
			cmd.Dir = dir
			cmd.Env = append(os.Environ(), "GOWORK=off", "GOFLAGS=-mod=mod")
			if out, err := cmd.CombinedOutput(); err != nil {
				t.Fatalf("go build: %v\n%s", err, out)
			}
			profile := filepath.Join(dir, build.name+".pb.gz")
			if out, err := exec.Command(bin, profile).CombinedOutput(); err != nil {
				t.Fatalf("permitoffice: %v\n%s", err, out)
			}
			data, err := os.ReadFile(profile)
			if err != nil {
				t.Fatal(err)
			}
			checkPermitOffice(t, data)
		})
	}
}

func checkPermitOffice(t *testing.T, data []byte) {
	l := traces.NewLoader(traces.Options{})
	if err := l.Add("cpu.pb.gz", bytes.NewReader(data)); err != nil {
		t.Fatal(err)
	}
	src, err := l.Source()
	if err != nil {
		t.Fatal(err)
	}
	cls := attribute.NewClassifier(src, attribute.DefaultRules())
	res := attribute.Attribute(callgraph.NewTree(src, callgraph.TreeOptions{Keep: cls.Keep}), cls, attribute.Options{Value: "samples"})
	if res.Totals.Database < 30 {
		t.Fatalf("only %d database samples; the profile is too thin to judge (%+v)", res.Totals.Database, res.Totals)
	}
	var lookup, schedule, noApp float64
	for _, c := range res.Causes {
		t.Logf("%5.1f%% %s", c.Share*100, c.Function)
		switch {
		case c.Function == "permitoffice/permits.(*Store).Lookup":
			lookup = c.Share
		case c.Function == "permitoffice/inspections.Schedule":
			schedule = c.Share
		case c.NoAppFrame:
			noApp += c.Share
		case strings.HasPrefix(c.Function, "permitoffice/fees."):
			t.Errorf("CPU-only %s was charged %d", c.Function, c.Cost)
		}
	}
	if lookup < 0.15 || schedule < 0.15 || lookup+schedule < 0.95 {
		t.Errorf("permits.(*Store).Lookup holds %.1f%% of the database charge and inspections.Schedule %.1f%%, want ≥ 15%% each and ≥ 95%% together",
			lookup*100, schedule*100)
	}
	if noApp > 0.05 {
		t.Errorf("%.1f%% reached no application frame, want ≤ 5%%", noApp*100)
	}
	found := false
	for _, d := range cls.Detected {
		found = found || d.Prefix == "permitoffice"
	}
	if !found {
		t.Errorf("detection summary %+v does not name the permitoffice module", cls.Detected)
	}
}
