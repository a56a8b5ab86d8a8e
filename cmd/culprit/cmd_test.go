package main

import (
	"context"
	"encoding/json"
	"io"
	"os"
	"path/filepath"
	"regexp"
	"runtime"
	"strings"
	"testing"
	"time"

	"github.com/google/pprof/profile"
)

func runTest(t *testing.T, stdin string, args ...string) (code int, stdout, stderr string) {
	t.Helper()
	s, out, errb := testStreams(stdin)
	code = run(args, s)
	return code, out.String(), errb.String()
}

func TestDemoRanksPlantedCauses(t *testing.T) {
	code, out, errOut := runTest(t, "", "demo")
	if code != exitOK {
		t.Fatalf("exit %d: %s", code, errOut)
	}
	lines := strings.Split(out, "\n")
	var first string
	for i, l := range lines {
		if strings.HasPrefix(l, "#  ") && i+1 < len(lines) {
			first = lines[i+1]
		}
	}
	// The planted heavy report query leads the goroutine profiles; the
	// pure-CPU function must not appear at all.
	if !strings.Contains(first, "reports.(*Monthly).Build") {
		t.Errorf("first row = %q, want the monthly report builder", first)
	}
	if strings.Contains(out, "ApplyDiscounts") {
		t.Error("pure CPU work was charged")
	}
	flat := strings.Join(strings.Fields(out), " ") // lines are wrapped to the width
	for _, want := range []string{"recursive-access", "catalog.(*Tree).expand", "the denominator of every share", "QuoteEach"} {
		if !strings.Contains(flat, want) {
			t.Errorf("output lacks %q", want)
		}
	}
}

func TestRankJSON(t *testing.T) {
	code, out, errOut := runTest(t, "", "demo", "--format", "json", "--limit", "0")
	if code != exitOK {
		t.Fatalf("exit %d: %s", code, errOut)
	}
	var doc struct {
		Schema     string
		ProducedBy struct{ Command, Version string }
		Totals     struct{ Cost, Database, Network, Other, Unattributed int64 }
		RootCauses []struct {
			Function string
			Kind     string
			Cost     int64
			Share    float64
			Samples  int64
		}
		Inputs []struct{ Name, Sha256 string }
	}
	if err := json.Unmarshal([]byte(out), &doc); err != nil {
		t.Fatal(err)
	}
	if doc.Schema != "culprit.rank/v1" || !strings.HasPrefix(doc.ProducedBy.Command, "culprit demo") {
		t.Errorf("schema %q, command %q", doc.Schema, doc.ProducedBy.Command)
	}
	tt := doc.Totals
	if tt.Cost != tt.Database+tt.Network+tt.Other {
		t.Errorf("totals do not add up: %+v", tt)
	}
	var sum int64
	var shares float64
	for _, c := range doc.RootCauses {
		sum += c.Cost
		shares += c.Share
	}
	if sum != tt.Database+tt.Network || shares < 0.999 || shares > 1.001 {
		t.Errorf("causes sum to %d (shares %.4f), want the denominator %d and 100%%", sum, shares, tt.Database+tt.Network)
	}
	if len(doc.Inputs) != 3 || len(doc.Inputs[0].Sha256) != 64 {
		t.Errorf("inputs = %+v", doc.Inputs)
	}
}

func TestUsageErrors(t *testing.T) {
	tests := []struct {
		name string
		args []string
		code int
		want string
	}{
		{"no inputs", []string{"rank"}, exitUsage, "needs at least 1 input"},
		{"bad format", []string{"demo", "--format", "xml"}, exitUsage, "must be one of: text"},
		{"bad value", []string{"demo", "--value", "nope"}, exitUsage, "choose one of: goroutine"},
		{"bad color", []string{"demo", "--color", "sometimes"}, exitUsage, "auto, always, never"},
		{"unknown flag", []string{"rank", "--frobnicate", "x"}, exitUsage, "unknown flag"},
		{"missing file", []string{"rank", "does-not-exist.pb.gz"}, exitError, "does-not-exist.pb.gz"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			code, _, errOut := runTest(t, "", tt.args...)
			if code != tt.code || !strings.Contains(errOut, tt.want) {
				t.Errorf("exit %d, stderr %q; want %d containing %q", code, errOut, tt.code, tt.want)
			}
			if strings.Contains(errOut, "goroutine ") && strings.Contains(errOut, "panic") {
				t.Errorf("stack trace leaked: %s", errOut)
			}
		})
	}
}

func TestRankFilesDirsStdinAndOutput(t *testing.T) {
	dir := t.TempDir()
	if code, _, errOut := runTest(t, "", "demo", "--write", dir); code != exitOK {
		t.Fatalf("demo --write: %s", errOut)
	}
	profile := filepath.Join(dir, "greenhouse-v42.goroutine.1.pb.gz")
	data, err := os.ReadFile(profile)
	if err != nil {
		t.Fatal(err)
	}
	_, fromFile, _ := runTest(t, "", "rank", profile)
	code, fromStdin, errOut := runTest(t, string(data), "rank", "-")
	if code != exitOK {
		t.Fatalf("stdin: %s", errOut)
	}
	// Same content, other name: only the sentences above the table differ.
	if strings.SplitN(fromFile, "\n\n", 2)[1] != strings.SplitN(fromStdin, "\n\n", 2)[1] {
		t.Error("stdin and file give different reports")
	}

	// A directory is walked; traces and profiles in one run are refused,
	// naming the files of each kind and the flag that chooses.
	code, _, errOut = runTest(t, "", "rank", dir)
	if code != exitError || !strings.Contains(errOut, "--source traces") || !strings.Contains(errOut, "greenhouse-v41.traces.jsonl.gz") {
		t.Errorf("mixed directory: exit %d, %s", code, errOut)
	}
	if code, out, errOut := runTest(t, "", "rank", "--source", "traces", dir); code != exitOK || !strings.Contains(out, "greenhouse-v41.goroutine.1.pb.gz skipped") {
		t.Errorf("--source traces: exit %d, %s", code, errOut)
	}

	out := filepath.Join(dir, "report.json")
	if code, _, errOut := runTest(t, "", "rank", profile, "--format", "json", "-o", out); code != exitOK {
		t.Fatalf("-o: %s", errOut)
	}
	if b, err := os.ReadFile(out); err != nil || !json.Valid(b) {
		t.Errorf("output file: %v", err)
	}
	code, _, errOut = runTest(t, "", "rank", profile, "-o", profile)
	if code != exitUsage || !strings.Contains(errOut, "refusing to write") {
		t.Errorf("overwrite input: exit %d, %s", code, errOut)
	}
	if after, _ := os.ReadFile(profile); string(after) != string(data) {
		t.Error("input file was modified")
	}
	entries, _ := os.ReadDir(dir)
	for _, e := range entries {
		if strings.Contains(e.Name(), ".tmp-") {
			t.Errorf("temporary file left behind: %s", e.Name())
		}
	}
}

func TestColor(t *testing.T) {
	for _, tt := range []struct {
		name     string
		terminal bool
		noColor  string
		args     []string
		want     bool
	}{
		{"terminal", true, "", nil, true},
		{"NO_COLOR", true, "1", nil, false},
		{"piped", false, "", nil, false},
		{"always", false, "", []string{"--color", "always"}, true},
		{"never", true, "", []string{"--color", "never"}, false},
	} {
		t.Run(tt.name, func(t *testing.T) {
			s, out, _ := testStreams("")
			s.OutIsTerminal = tt.terminal
			s.Getenv = func(k string) string {
				if k == "NO_COLOR" {
					return tt.noColor
				}
				return ""
			}
			if code := run(append([]string{"demo"}, tt.args...), s); code != exitOK {
				t.Fatal(code)
			}
			if got := strings.Contains(out.String(), "\x1b["); got != tt.want {
				t.Errorf("colour = %v, want %v", got, tt.want)
			}
		})
	}
}

func TestRankFlagsBindIntoOptions(t *testing.T) {
	s, _, _ := testStreams("")
	var got *rankOptions
	cmd := newRankCmd(s, func(_ context.Context, o *rankOptions) error { got = o; return nil })
	cmd.SetArgs([]string{"--app", "example.com/a/", "--app", "example.com/b/", "--inclusive", "--format", "json", "--limit", "5", "x.pb.gz", "-"})
	if err := cmd.Execute(); err != nil {
		t.Fatal(err)
	}
	if len(got.analysis.App) != 2 || !got.analysis.Inclusive || got.output.Format != "json" || got.output.Limit != 5 || len(got.inputs) != 2 {
		t.Errorf("options = %+v", got)
	}
	if !strings.Contains(got.command, "--app=example.com/a/ --app=example.com/b/") {
		t.Errorf("provenance command = %q", got.command)
	}
}

func TestRulesCommand(t *testing.T) {
	code, out, _ := runTest(t, "", "rules")
	if code != exitOK || !strings.Contains(out, "database/sql.") || !strings.Contains(out, "auto-detected") {
		t.Errorf("rules: %d %s", code, out)
	}
	dir := t.TempDir()
	runTest(t, "", "demo", "--write", dir)
	code, out, errOut := runTest(t, "", "rules", filepath.Join(dir, "greenhouse-v42.goroutine.1.pb.gz"))
	if code != exitOK || !strings.Contains(out, "example.com/greenhouse") || !strings.Contains(out, "package main") {
		t.Errorf("rules with input: %d %s %s", code, out, errOut)
	}
	bad := filepath.Join(dir, "bad.json")
	os.WriteFile(bad, []byte("{\"rules\": [\n {\"class\": \"nope\", \"function\": \"x\"}]}"), 0o644)
	code, _, errOut = runTest(t, "", "rules", "--rules", bad)
	if code != exitError || !strings.Contains(errOut, "bad.json:2:2") {
		t.Errorf("bad rules file: %d %s", code, errOut)
	}
}

// slowReader yields a valid-looking JSON-lines prefix and then blocks a
// little on every read, forever: only an interrupt ends the run.
type slowReader struct{ sent bool }

func (r *slowReader) Read(p []byte) (int, error) {
	if !r.sent {
		r.sent = true
		return copy(p, `{"resourceSpans":[`), nil
	}
	time.Sleep(5 * time.Millisecond)
	return copy(p, " "), nil
}

func TestInterruptLeavesNoFiles(t *testing.T) {
	dir := t.TempDir()
	out := filepath.Join(dir, "report.html")
	existing := filepath.Join(dir, "kept.html")
	os.WriteFile(existing, []byte("previous report"), 0o644)
	for _, target := range []string{out, existing} {
		s, _, errb := testStreams("")
		s.In = &slowReader{}
		// Cancelling the context is what Ctrl-C does (run cancels it with the signal as its cause).
		ctx, cancel := context.WithCancel(context.Background())
		timer := time.AfterFunc(200*time.Millisecond, cancel)
		code := runContext(ctx, []string{"rank", "-", "--format", "html", "-o", target}, s)
		timer.Stop()
		cancel()
		if code != exitError || !strings.Contains(errb.String(), "interrupted") {
			t.Errorf("exit %d, stderr %q; want 1 and 'interrupted'", code, errb.String())
		}
	}
	entries, _ := os.ReadDir(dir)
	if len(entries) != 1 || entries[0].Name() != "kept.html" {
		t.Errorf("files left: %v", entries)
	}
	if b, _ := os.ReadFile(existing); string(b) != "previous report" {
		t.Error("an existing output file was changed by an interrupted run")
	}
}

func TestDomainsFlag(t *testing.T) {
	code, out, errOut := runTest(t, "", "demo", "--traces", "--format", "json", "--domains", "../../testdata/greenhouse.domains.json")
	if code != exitOK {
		t.Fatalf("exit %d: %s", code, errOut)
	}
	var doc struct {
		Domains []struct {
			Domain string
			Share  float64
		}
		RootCauses []struct{ Function, Domain string }
	}
	if err := json.Unmarshal([]byte(out), &doc); err != nil {
		t.Fatal(err)
	}
	if len(doc.Domains) != 4 || doc.Domains[0].Domain != "checkout" {
		t.Errorf("domains = %+v", doc.Domains)
	}
	for _, c := range doc.RootCauses {
		if strings.Contains(c.Function, "/catalog.") && c.Domain != "catalog" {
			t.Errorf("%s in domain %q", c.Function, c.Domain)
		}
	}
	code, _, errOut = runTest(t, "", "demo", "--domains", "no-such-domains.json")
	if code != exitError || !strings.Contains(errOut, "no-such-domains.json") {
		t.Errorf("missing domains file: %d %s", code, errOut)
	}
}

func TestProgressOnlyOnTerminals(t *testing.T) {
	var quiet strings.Builder
	p := startProgress(&quiet, false, 100)
	io.Copy(io.Discard, p.reader(strings.NewReader("0123456789")))
	p.Finish()
	if quiet.Len() != 0 || p.read.Load() != 10 {
		t.Errorf("piped stderr got %q (read %d)", quiet.String(), p.read.Load())
	}
	var term strings.Builder
	p = startProgress(&term, true, 100)
	p.read.Store(50)
	p.print()
	p.Finish()
	if !strings.Contains(term.String(), "read 0.0 MiB of 0.0 MiB") || !strings.Contains(term.String(), "left") {
		t.Errorf("terminal progress = %q", term.String())
	}
}

// The demo traces carry raw statements with literals (session tokens,
// ids, cart numbers). No output format may show them unless asked.
func TestLiteralsNeverLeak(t *testing.T) {
	leak := regexp.MustCompile(`(?i)(token = '[0-9a-f]+|where id = [0-9]+|values \([0-9]+)`)
	for _, format := range []string{"text", "markdown", "json", "csv", "html"} {
		t.Run(format, func(t *testing.T) {
			code, out, errOut := runTest(t, "", "demo", "--traces", "--limit", "0", "--format", format)
			if code != exitOK {
				t.Fatalf("exit %d: %s", code, errOut)
			}
			if m := leak.FindString(out); m != "" {
				t.Errorf("literal leaked: %q", m)
			}
			if !strings.Contains(strings.ToLower(out), "token = ?") {
				t.Error("the session statement's fingerprint is missing")
			}
		})
	}
	// --show-literals is the one way to see them (and this check can fail).
	_, out, _ := runTest(t, "", "demo", "--traces", "--limit", "0", "--format", "csv", "--show-literals")
	if !leak.MatchString(out) {
		t.Error("--show-literals shows no literal")
	}
}

func TestOutputFileMode(t *testing.T) {
	dir := t.TempDir()
	out := filepath.Join(dir, "r.json")
	if code, _, errOut := runTest(t, "", "demo", "--format", "json", "-o", out); code != exitOK {
		t.Fatal(errOut)
	}
	if st, _ := os.Stat(out); st.Mode().Perm() != 0o644 {
		t.Errorf("new report mode %v, want 0644", st.Mode().Perm())
	}
	os.Chmod(out, 0o600)
	runTest(t, "", "demo", "--format", "json", "-o", out)
	if st, _ := os.Stat(out); st.Mode().Perm() != 0o600 {
		t.Errorf("replaced report mode %v, want the old file's 0600", st.Mode().Perm())
	}
}

// TestCPUProfileEnv checks the developer hook behind CULPRIT_CPUPROFILE:
// the file it writes is a CPU profile the pprof library reads.
func TestCPUProfileEnv(t *testing.T) {
	path := filepath.Join(t.TempDir(), "cpu.pprof")
	stop := startCPUProfile(path)
	for end := time.Now().Add(50 * time.Millisecond); time.Now().Before(end); {
	}
	stop()
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	p, err := profile.Parse(f)
	if err != nil {
		t.Fatalf("not a profile: %v", err)
	}
	if len(p.SampleType) == 0 || p.SampleType[len(p.SampleType)-1].Type != "cpu" {
		t.Errorf("sample types %v, want cpu", p.SampleType)
	}
	startCPUProfile("")() // no path: nothing to do
}

func TestReportsDoNotDependOnCores(t *testing.T) {
	// Reading, assembly and charging use every core and hand their
	// results back in input order: the report must be byte for byte the
	// one a single core gives. (CI also runs this under the race
	// detector.)
	defer runtime.GOMAXPROCS(runtime.GOMAXPROCS(0))
	for _, args := range [][]string{
		{"demo", "--format", "json", "--limit", "0"},
		{"demo", "--traces", "--format", "json", "--limit", "0"},
		{"demo", "--traces", "--format", "csv", "--limit", "0", "--inclusive"},
	} {
		t.Run(strings.Join(args[1:], " "), func(t *testing.T) {
			var want string
			for _, procs := range []int{1, 2, 5} {
				runtime.GOMAXPROCS(procs)
				code, out, errOut := runTest(t, "", args...)
				if code != exitOK {
					t.Fatalf("GOMAXPROCS=%d: exit %d: %s", procs, code, errOut)
				}
				if procs == 1 {
					want = out
				} else if out != want {
					t.Errorf("GOMAXPROCS=%d: the report differs from the one-core report", procs)
				}
			}
		})
	}
}
