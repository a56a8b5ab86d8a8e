package main

import (
	"bytes"
	"compress/gzip"
	"fmt"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"

	"github.com/google/pprof/profile"
)

var (
	literalPattern = regexp.MustCompile(`[0-9]|'`)
	goFilePattern  = regexp.MustCompile(`^(/usr/local/go/src/|/home/build/go/pkg/mod/[^@]+@v[^/]+/|/home/build/greenhouse/)`)
)

// demoDir generates the demo with seed 1 once per test binary run.
var demoDir string

func TestMain(m *testing.M) {
	dir, err := os.MkdirTemp("", "culprit-gen-demo")
	if err != nil {
		fmt.Fprintln(os.Stderr, err)
		os.Exit(1)
	}
	demoDir = dir
	if err := runDemo(demoOptions{out: dir, seed: 1}); err != nil {
		fmt.Fprintln(os.Stderr, err)
		os.Exit(1)
	}
	code := m.Run()
	os.RemoveAll(dir)
	os.Exit(code)
}

func readDemoFile(t *testing.T, name string) []byte {
	t.Helper()
	b, err := os.ReadFile(filepath.Join(demoDir, name))
	if err != nil {
		t.Fatal(err)
	}
	return b
}

func parseProfileFile(t *testing.T, path string) *profile.Profile {
	t.Helper()
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	p, err := profile.Parse(f)
	if err != nil {
		t.Fatalf("%s: %v", path, err)
	}
	if err := p.CheckValid(); err != nil {
		t.Fatalf("%s: %v", path, err)
	}
	return p
}

func TestDemoDeterministic(t *testing.T) {
	tests := []struct {
		name string
		seed uint64
		same bool
	}{
		{"same seed gives identical files", 1, true},
		{"another seed gives different files", 2, false},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			dir := t.TempDir()
			if err := runDemo(demoOptions{out: dir, seed: tt.seed}); err != nil {
				t.Fatal(err)
			}
			for _, name := range demoFiles(false) {
				got, err := os.ReadFile(filepath.Join(dir, name))
				if err != nil {
					t.Fatal(err)
				}
				if same := bytes.Equal(got, readDemoFile(t, name)); same != tt.same {
					t.Errorf("%s: identical = %v, want %v", name, same, tt.same)
				}
			}
		})
	}
}

func TestDemoFilesAndSize(t *testing.T) {
	entries, err := os.ReadDir(demoDir)
	if err != nil {
		t.Fatal(err)
	}
	var got []string
	var total int64
	for _, e := range entries {
		got = append(got, e.Name())
		info, err := e.Info()
		if err != nil {
			t.Fatal(err)
		}
		total += info.Size()
	}
	want := demoFiles(false)
	if len(got) != len(want) {
		t.Errorf("files = %v, want %v (no temporary files left over)", got, want)
	}
	for _, w := range want {
		if _, err := os.Stat(filepath.Join(demoDir, w)); err != nil {
			t.Error(err)
		}
	}
	// The brief's budget for the whole demo data set.
	if total > 400_000 {
		t.Errorf("demo files total %d bytes, want ≤ 400 KB", total)
	}
}

// sampleFuncs returns the function names of a sample, root first, inlined
// calls expanded.
func sampleFuncs(s *profile.Sample) []string {
	var out []string
	for i := len(s.Location) - 1; i >= 0; i-- {
		l := s.Location[i]
		for j := len(l.Line) - 1; j >= 0; j-- {
			out = append(out, l.Line[j].Function.Name)
		}
	}
	return out
}

func index(names []string, fn string) int {
	for i, n := range names {
		if n == fn {
			return i
		}
	}
	return -1
}

func count(names []string, fn string) int {
	n := 0
	for _, x := range names {
		if x == fn {
			n++
		}
	}
	return n
}

// isAppFunc tells application functions by name, as the brief's scenario
// defines them (package main or the example.com/greenhouse module).
func isAppFunc(name string) bool {
	return strings.HasPrefix(name, "main.") || strings.HasPrefix(name, appModule+"/")
}

func TestDemoGoroutineProfiles(t *testing.T) {
	for _, b := range []build{buildBase, buildCandidate} {
		for i := 1; i <= snapshotCount; i++ {
			name := fmt.Sprintf("greenhouse-%s.goroutine.%d.pb.gz", b.version, i)
			t.Run(name, func(t *testing.T) {
				p := parseProfileFile(t, filepath.Join(demoDir, name))
				checkGoLikeProfile(t, p)
				// What Go's runtime/pprof writes for the goroutine profile
				// (Go 1.26 runtime/pprof/pprof.go, writeGoroutine →
				// printCountProfile): one sample type goroutine/count,
				// period type goroutine/count, period 1.
				if len(p.SampleType) != 1 || *p.SampleType[0] != (profile.ValueType{Type: "goroutine", Unit: "count"}) {
					t.Errorf("sample types = %v", p.SampleType)
				}
				if p.PeriodType == nil || *p.PeriodType != (profile.ValueType{Type: "goroutine", Unit: "count"}) || p.Period != 1 {
					t.Errorf("period = %v %d", p.PeriodType, p.Period)
				}
				seen := map[string]bool{}
				var found struct{ loop, session, sleep, recursion, inline bool }
				for _, s := range p.Sample {
					fs := sampleFuncs(s)
					key := strings.Join(fs, ";") + fmt.Sprint(s.Label)
					if seen[key] {
						t.Errorf("two samples for one stack and label set: %s", key)
					}
					seen[key] = true
					if s.Value[0] < 1 {
						t.Errorf("sample with count %d", s.Value[0])
					}
					for _, l := range s.Location {
						found.inline = found.inline || len(l.Line) > 1
					}
					sql := index(fs, "database/sql.(*DB).QueryContext")
					if v := index(fs, appModule+"/catalog.(*Repo).VarietyByID"); v >= 0 && sql > v && fs[len(fs)-1] == "runtime.gopark" &&
						index(fs, "internal/poll.runtime_pollWait") > sql && index(fs, "net.(*conn).Read") > sql {
						found.loop = true
						if got := s.Label["http.route"]; len(got) != 1 || got[0] != "/catalog" {
							t.Errorf("loop sample labels = %v, want http.route=/catalog", s.Label)
						}
					}
					if sql > 0 && index(fs, "github.com/mossgate/websession.(*PGStore).Get") >= 0 {
						found.session = true
						for _, f := range fs[:sql] {
							if isAppFunc(f) {
								t.Errorf("session query has application frame %s above it", f)
							}
						}
					}
					if index(fs, "time.Sleep") >= 0 {
						found.sleep = true
						if index(fs, "database/sql.(*DB).QueryContext") >= 0 || index(fs, "net.(*conn).Read") >= 0 {
							t.Errorf("sleeping worker has I/O below it: %v", fs)
						}
					}
					if count(fs, appModule+"/catalog.(*Tree).expand") >= 2 && sql > index(fs, appModule+"/catalog.(*Tree).expand") {
						found.recursion = true
					}
					if fs[0] == "net/http.(*conn).serve" && index(fs, "runtime/pprof.Do") >= 0 {
						if len(s.Label["http.route"]) != 1 {
							t.Errorf("request sample below runtime/pprof.Do without one http.route label: %v", s.Label)
						}
					}
				}
				if !found.loop || !found.session || !found.sleep || !found.recursion || !found.inline {
					t.Errorf("missing kinds of samples: %+v", found)
				}
			})
		}
	}
}

// checkGoLikeProfile checks the layout Go's runtime/pprof produces (Go 1.26
// runtime/pprof/proto.go): every Location has a Mapping and an address,
// Function.Name == SystemName, no column numbers, and file names of a
// default build ($GOROOT/src, the module cache with module@version, or the
// main module's directory).
func checkGoLikeProfile(t *testing.T, p *profile.Profile) {
	t.Helper()
	for _, l := range p.Location {
		if l.Mapping == nil || l.Address < l.Mapping.Start || l.Address >= l.Mapping.Limit {
			t.Errorf("location %d: address %#x outside its mapping", l.ID, l.Address)
		}
		if len(l.Line) == 0 {
			t.Errorf("location %d has no lines", l.ID)
		}
		for _, ln := range l.Line {
			if ln.Line <= 0 || ln.Column != 0 {
				t.Errorf("location %d: line %d column %d", l.ID, ln.Line, ln.Column)
			}
		}
	}
	for _, f := range p.Function {
		if f.Name != f.SystemName {
			t.Errorf("function %q has system name %q", f.Name, f.SystemName)
		}
		if !goFilePattern.MatchString(f.Filename) {
			t.Errorf("function %s: file %q is not a default-build Go file name", f.Name, f.Filename)
		}
		if f.StartLine <= 0 {
			t.Errorf("function %s: start line %d", f.Name, f.StartLine)
		}
	}
}

// rootCauseGoroutines sums goroutines whose stacks pass through fn over the
// snapshots of a build.
func rootCauseGoroutines(t *testing.T, b build, fns ...string) map[string]int64 {
	t.Helper()
	out := map[string]int64{}
	for i := 1; i <= snapshotCount; i++ {
		p := parseProfileFile(t, filepath.Join(demoDir, fmt.Sprintf("greenhouse-%s.goroutine.%d.pb.gz", b.version, i)))
		for _, s := range p.Sample {
			fs := sampleFuncs(s)
			for _, fn := range fns {
				if index(fs, fn) >= 0 {
					out[fn] += s.Value[0]
				}
			}
		}
	}
	return out
}

func TestDemoRegressionPlanted(t *testing.T) {
	loop := appModule + "/catalog.(*Repo).VarietyByID"
	others := []string{appModule + "/reports.(*Monthly).Build", appModule + "/checkout.(*Quoter).QuoteEach"}
	base := rootCauseGoroutines(t, buildBase, append(others, loop)...)
	cand := rootCauseGoroutines(t, buildCandidate, append(others, loop)...)
	tests := []struct {
		fn     string
		lo, hi float64
	}{
		// +35% per request, seen through three snapshots of a few hundred
		// goroutines each: allow for Poisson noise.
		{loop, 1.2, 1.55},
		{others[0], 0.8, 1.25},
		{others[1], 0.8, 1.25},
	}
	for _, tt := range tests {
		t.Run(shortName(tt.fn), func(t *testing.T) {
			if base[tt.fn] < 100 {
				t.Fatalf("only %d goroutines in %s", base[tt.fn], tt.fn)
			}
			ratio := float64(cand[tt.fn]) / float64(base[tt.fn])
			if ratio < tt.lo || ratio > tt.hi {
				t.Errorf("v42/v41 goroutines = %d/%d = %.2f, want in [%.2f, %.2f]", cand[tt.fn], base[tt.fn], ratio, tt.lo, tt.hi)
			}
		})
	}
}

func TestDemoCPUProfile(t *testing.T) {
	p := parseProfileFile(t, filepath.Join(demoDir, "greenhouse-v42.cpu.pb.gz"))
	checkGoLikeProfile(t, p)
	// Go's CPU profile (Go 1.26 runtime/pprof/proto.go, at the default
	// 100 Hz): samples/count and cpu/nanoseconds, period 10 ms of
	// cpu/nanoseconds; cpu = samples × period.
	want := []profile.ValueType{{Type: "samples", Unit: "count"}, {Type: "cpu", Unit: "nanoseconds"}}
	if len(p.SampleType) != 2 || *p.SampleType[0] != want[0] || *p.SampleType[1] != want[1] {
		t.Fatalf("sample types = %v", p.SampleType)
	}
	if *p.PeriodType != want[1] || p.Period != 10_000_000 || p.DurationNanos <= 0 {
		t.Errorf("period %v %d, duration %d", p.PeriodType, p.Period, p.DurationNanos)
	}
	var total int64
	cum := map[string]int64{}
	for _, s := range p.Sample {
		if s.Value[1] != s.Value[0]*p.Period {
			t.Errorf("cpu %d != samples %d × period", s.Value[1], s.Value[0])
		}
		total += s.Value[0]
		fs := sampleFuncs(s)
		seen := map[string]bool{}
		for _, f := range fs {
			if !seen[f] {
				seen[f] = true
				cum[f] += s.Value[0]
			}
		}
		if i := index(fs, appModule+"/pricing.ApplyDiscounts"); i >= 0 {
			for _, f := range fs[i:] {
				if strings.HasPrefix(f, "database/sql.") || strings.HasPrefix(f, "net.") || strings.HasPrefix(f, "net/http.") {
					t.Errorf("ApplyDiscounts has %s below it", f)
				}
			}
		}
	}
	top, topCum := "", int64(0)
	for f, c := range cum {
		if isAppFunc(f) && !strings.HasPrefix(f, "main.") && c > topCum {
			top, topCum = f, c
		}
	}
	if top != appModule+"/pricing.ApplyDiscounts" || float64(topCum) < 0.4*float64(total) {
		t.Errorf("top application package function %s with %d of %d samples; want pricing.ApplyDiscounts with ≥ 40%%", top, topCum, total)
	}
}

func TestDemoTraces(t *testing.T) {
	for _, b := range []build{buildBase, buildCandidate} {
		name := "greenhouse-" + b.version + ".traces.jsonl.gz"
		t.Run(name, func(t *testing.T) {
			zr, err := gzip.NewReader(bytes.NewReader(readDemoFile(t, name)))
			if err != nil {
				t.Fatal(err)
			}
			traces, _ := readOTLPLines(t, name, zr)
			if len(traces) != tracesPerBuild {
				t.Errorf("%d traces, want %d", len(traces), tracesPerBuild)
			}
			mixed := false
			routes := map[string]int{}
			for id, tr := range traces {
				root := checkTraceShape(t, id, tr)
				if n := len(tr.lines); n < 2 || n > 3 {
					t.Errorf("trace %s on %d lines, want 2–3", id, n)
				}
				if root.kind != kindServer || root.attrs["http.route"] == "" || root.attrs["http.request.method"] == "" {
					t.Errorf("trace %s: root %q kind %d attrs %v", id, root.name, root.kind, root.attrs)
				}
				routes[root.attrs["http.route"]]++
				counts := map[string]int{}
				for _, s := range tr.spans {
					if s.service != "greenhouse-web" {
						t.Errorf("span %s: service %q", s.spanID, s.service)
					}
					checkSpanAttrs(t, s)
					counts[s.name]++
				}
				switch root.attrs["http.route"] {
				case "/catalog":
					lo, hi := 20, 30
					if b == buildCandidate {
						lo, hi = 27, 41
					}
					if n := counts["SELECT varieties"]; n < lo || n > hi {
						t.Errorf("catalog trace %s: %d variety queries, want %d–%d", id, n, lo, hi)
					}
					if n := counts["SELECT categories"]; n < 2 || n > 4 {
						t.Errorf("catalog trace %s: %d category levels, want 2–4", id, n)
					}
				case "/checkout":
					if n := counts["POST"]; n < 5 || n > 15 {
						t.Errorf("checkout trace %s: %d carrier calls, want 5–15", id, n)
					}
				case "/reports/monthly":
					if n := counts["SELECT order_lines"]; n != 1 {
						t.Errorf("report trace %s: %d report queries, want 1", id, n)
					}
				}
				if counts["SELECT sessions"] != 1 {
					t.Errorf("trace %s: %d session queries, want 1", id, counts["SELECT sessions"])
				}
			}
			// Lines mix traces: some line carries spans of two traces.
			perLine := map[int]map[string]bool{}
			for id, tr := range traces {
				for l := range tr.lines {
					if perLine[l] == nil {
						perLine[l] = map[string]bool{}
					}
					perLine[l][id] = true
				}
			}
			for _, ids := range perLine {
				mixed = mixed || len(ids) > 1
			}
			if !mixed {
				t.Error("no line holds spans of more than one trace")
			}
			for _, rt := range routes {
				if rt == 0 {
					t.Errorf("routes = %v", routes)
				}
			}
			if len(routes) != len(routesList()) {
				t.Errorf("routes = %v", routes)
			}
		})
	}
}

func routesList() []string {
	var out []string
	for _, rt := range routes {
		out = append(out, rt.pattern)
	}
	return out
}

// checkSpanAttrs checks the semantic-convention attributes of a span
// (OpenTelemetry semantic conventions v1.44.0: database client spans carry
// db.system.name, db.query.text, db.operation.name and server.address; HTTP
// client spans http.request.method, url.full and server.address; code
// attributes give code.function.name fully qualified).
func checkSpanAttrs(t *testing.T, s *jsonSpan) {
	t.Helper()
	need := func(keys ...string) {
		for _, k := range keys {
			if s.attrs[k] == "" {
				t.Errorf("line %d span %s %q (kind %d): no %s", s.line, s.spanID, s.name, s.kind, k)
			}
		}
	}
	switch {
	case s.kind == kindClient && s.attrs["db.system.name"] != "":
		need("db.query.text", "db.operation.name", "server.address")
		if s.attrs["db.system.name"] != "postgresql" {
			t.Errorf("span %s: db.system.name %q", s.spanID, s.attrs["db.system.name"])
		}
		if !literalPattern.MatchString(s.attrs["db.query.text"]) {
			t.Errorf("span %s: query %q has no literal", s.spanID, s.attrs["db.query.text"])
		}
	case s.kind == kindClient:
		need("http.request.method", "url.full", "server.address")
	case s.kind == kindInternal:
		need("code.function.name")
		fn := s.attrs["code.function.name"]
		if !strings.HasPrefix(fn, "main.") && !strings.Contains(fn, "/") {
			t.Errorf("span %s: code.function.name %q is not fully qualified", s.spanID, fn)
		}
	case s.kind == kindServer:
		need("http.route", "http.request.method")
	default:
		t.Errorf("span %s: unexpected kind %d", s.spanID, s.kind)
	}
}

func TestDemoPlainTraces(t *testing.T) {
	// -plain-traces writes the same lines, uncompressed.
	dir := t.TempDir()
	if err := runDemo(demoOptions{out: dir, seed: 1, plainTraces: true}); err != nil {
		t.Fatal(err)
	}
	for _, b := range []build{buildBase, buildCandidate} {
		t.Run(b.version, func(t *testing.T) {
			zr, err := gzip.NewReader(bytes.NewReader(readDemoFile(t, "greenhouse-"+b.version+".traces.jsonl.gz")))
			if err != nil {
				t.Fatal(err)
			}
			var want bytes.Buffer
			if _, err := want.ReadFrom(zr); err != nil {
				t.Fatal(err)
			}
			got, err := os.ReadFile(filepath.Join(dir, "greenhouse-"+b.version+".traces.jsonl"))
			if err != nil {
				t.Fatal(err)
			}
			if !bytes.Equal(got, want.Bytes()) {
				t.Error("-plain-traces content differs from the decompressed default")
			}
		})
	}
}
