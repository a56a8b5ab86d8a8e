package main

import (
	"bytes"
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"os"
	"os/exec"
	"path/filepath"
	"runtime"
	"strconv"
	"strings"
	"time"

	"github.com/google/pprof/profile"
)

// modulePath is the module whose commands culprit-bench builds.
const modulePath = "github.com/culprithq/culprit"

// childEnv is set in the environment of every culprit-bench child, so that
// a test binary standing in for culprit-bench knows to run the phase.
const childEnv = "CULPRIT_BENCH_CHILD"

// cpuProfileEnv is the variable that makes culprit write a CPU profile
// of its run (cmd/culprit's constant of the same name).
const cpuProfileEnv = "CULPRIT_CPUPROFILE"

// maxBytes is passed to culprit as --max-bytes: large enough for any input.
const maxBytes = 1 << 40

// config is the harness's command line. A zero field means "not given".
type config struct {
	Profile, Spans, SpansBig string
	GenDir                   string
	SpansN                   int
	Samples                  int64
	Stacks                   int
	Reuse                    bool
	Scale                    bool
	Culprit                  string
	Runs                     int
	// PGO, when set, names the file to write the merged CPU profile of
	// every culprit rank run to (see mergeProfiles).
	PGO string
}

// phase is one measured command.
type phase struct {
	Name  string
	Input string // input file, "" for the baselines
	argv  []string
	self  bool   // a culprit-bench child
	out   string // culprit's report file, checked after every run
	// cpuProfile, when set, is where culprit writes a CPU profile of the
	// run (through cpuProfileEnv).
	cpuProfile string
}

// phaseResult holds the measurements of one phase, one entry per run.
type phaseResult struct {
	Name  string
	Input string
	Walls []time.Duration
	CPU   []time.Duration // user + system time of the child
	RSS   []int64         // peak resident set size in bytes; -1 if unknown
	// Decoded says what the last run read, for a sanity check.
	Decoded string
	// Spans, Samples and Stacks are the counts behind Decoded (0 if not
	// applicable).
	Spans, Samples, Stacks int64
}

// inputInfo describes one input file.
type inputInfo struct {
	Role  string
	Path  string
	Bytes int64
	// Spans is the number of "spanId" keys in an OTLP/JSON file.
	Spans int64
}

// runHarness builds what it needs, generates missing inputs, runs every
// phase cfg.Runs times and returns the measurements. Progress goes to log.
func runHarness(ctx context.Context, cfg config, log io.Writer) (*report, error) {
	tmp, err := os.MkdirTemp("", "culprit-bench-")
	if err != nil {
		return nil, err
	}
	defer os.RemoveAll(tmp)

	needModule := cfg.Culprit == "" || cfg.GenDir != ""
	var root string
	if needModule {
		if root, err = moduleRoot(ctx); err != nil {
			return nil, err
		}
	}
	culprit := cfg.Culprit
	if culprit == "" {
		culprit = filepath.Join(tmp, "culprit")
		fmt.Fprintf(log, "building ./cmd/culprit\n")
		if err := goBuild(ctx, root, culprit, "./cmd/culprit"); err != nil {
			return nil, err
		}
	}
	if cfg.GenDir != "" {
		if err := generateInputs(ctx, &cfg, root, tmp, log); err != nil {
			return nil, err
		}
	}
	self, err := os.Executable()
	if err != nil {
		return nil, fmt.Errorf("finding culprit-bench's own binary: %w", err)
	}

	rep := &report{
		GOOS: runtime.GOOS, GOARCH: runtime.GOARCH, NumCPU: runtime.NumCPU(),
		GoVersion: runtime.Version(), Runs: cfg.Runs,
	}
	if rep.Inputs, err = describeInputs(cfg); err != nil {
		return nil, err
	}
	out := filepath.Join(tmp, "rank.json")
	rank := func(name, in string) phase {
		p := phase{Name: name, Input: in, out: out,
			argv: []string{culprit, "rank", in, "--format", "json", "-o", out, "--max-bytes", strconv.Itoa(maxBytes)}}
		if cfg.PGO != "" {
			p.cpuProfile = filepath.Join(tmp, name+".cpu.pprof")
		}
		return p
	}
	child := func(name, in string) phase {
		argv := []string{self, "-" + flagPhase, name}
		if in != "" {
			argv = append(argv, "-"+flagIn, in)
		}
		return phase{Name: name, Input: in, argv: argv, self: true}
	}
	phases := []phase{
		child(phaseBaselineSelf, ""),
		{Name: phaseBaselineCulprit, argv: []string{culprit, "version"}},
	}
	if cfg.Profile != "" {
		phases = append(phases, child(phasePprofParse, cfg.Profile), rank(phasePprofRank, cfg.Profile))
	}
	if cfg.Spans != "" {
		phases = append(phases, child(phaseOTLPProtojson, cfg.Spans), rank(phaseOTLPRank, cfg.Spans))
	}
	if cfg.Scale {
		phases = append(phases, rank(phaseOTLPRank10x, cfg.SpansBig))
	}

	results := make([]*phaseResult, len(phases))
	for i, p := range phases {
		results[i] = &phaseResult{Name: p.Name, Input: p.Input}
	}
	var profiles []string
	for r := 1; r <= cfg.Runs; r++ {
		for i, p := range phases {
			if err := ctx.Err(); err != nil {
				return nil, err
			}
			if err := measure(ctx, p, results[i]); err != nil {
				return nil, fmt.Errorf("run %d, phase %s: %w", r, p.Name, err)
			}
			if p.cpuProfile != "" {
				kept := fmt.Sprintf("%s.%d", p.cpuProfile, r)
				if err := os.Rename(p.cpuProfile, kept); err != nil {
					return nil, fmt.Errorf("run %d, phase %s: CPU profile: %w", r, p.Name, err)
				}
				profiles = append(profiles, kept)
			}
			res := results[i]
			fmt.Fprintf(log, "run %d/%d %-16s %9.3fs %9s  %s\n", r, cfg.Runs, p.Name,
				res.Walls[r-1].Seconds(), formatBytes(res.RSS[r-1]), res.Decoded)
		}
	}
	if cfg.PGO != "" {
		if err := mergeProfiles(cfg.PGO, profiles); err != nil {
			return nil, err
		}
		fmt.Fprintf(log, "wrote the CPU profile of %d culprit runs to %s\n", len(profiles), cfg.PGO)
		rep.Notes = append(rep.Notes, "culprit rank ran with its CPU profiler on (-pgo): its timings include the profiler's cost")
	}
	rep.Phases = results
	rep.ParentRSS = selfPeakRSS()
	rep.computeRatios()
	return rep, nil
}

// moduleRoot returns the directory of the culprit module containing the
// current directory.
func moduleRoot(ctx context.Context) (string, error) {
	cmd := exec.CommandContext(ctx, "go", "list", "-m", "-f", "{{.Path}}\t{{.Dir}}")
	var stderr bytes.Buffer
	cmd.Stderr = &stderr
	out, err := cmd.Output()
	if err != nil {
		return "", fmt.Errorf("finding the culprit module (go list -m): %w: %s", err, strings.TrimSpace(stderr.String()))
	}
	path, dir, ok := strings.Cut(strings.TrimSpace(string(out)), "\t")
	if !ok || path != modulePath {
		return "", fmt.Errorf("run culprit-bench inside the %s module (found %q), or pass -culprit and -profile/-spans", modulePath, strings.TrimSpace(string(out)))
	}
	return dir, nil
}

// goBuild builds package pkg of the module in root into the file out.
func goBuild(ctx context.Context, root, out, pkg string) error {
	cmd := exec.CommandContext(ctx, "go", "build", "-o", out, pkg)
	cmd.Dir = root
	if b, err := cmd.CombinedOutput(); err != nil {
		return fmt.Errorf("go build -o %s %s: %w\n%s", out, pkg, err, b)
	}
	return nil
}

// generateInputs writes the inputs that cfg does not name with
// cmd/culprit-gen into cfg.GenDir and sets their names in cfg.
func generateInputs(ctx context.Context, cfg *config, root, tmp string, log io.Writer) error {
	if err := os.MkdirAll(cfg.GenDir, 0o755); err != nil {
		return err
	}
	gen := filepath.Join(tmp, "culprit-gen")
	fmt.Fprintf(log, "building ./cmd/culprit-gen\n")
	if err := goBuild(ctx, root, gen, "./cmd/culprit-gen"); err != nil {
		return err
	}
	type job struct {
		target *string
		file   string
		args   []string
	}
	var jobs []job
	if cfg.Profile == "" {
		f := filepath.Join(cfg.GenDir, fmt.Sprintf("profile-%d-%d.pb.gz", cfg.Samples, cfg.Stacks))
		jobs = append(jobs, job{&cfg.Profile, f, []string{"profile", "-out", f,
			"-samples", strconv.FormatInt(cfg.Samples, 10), "-stacks", strconv.Itoa(cfg.Stacks)}})
	}
	spansJob := func(target *string, n int) {
		f := filepath.Join(cfg.GenDir, fmt.Sprintf("spans-%d.jsonl", n))
		jobs = append(jobs, job{target, f, []string{"spans", "-out", f, "-spans", strconv.Itoa(n)}})
	}
	if cfg.Spans == "" {
		spansJob(&cfg.Spans, cfg.SpansN)
	}
	if cfg.Scale && cfg.SpansBig == "" {
		spansJob(&cfg.SpansBig, 10*cfg.SpansN)
	}
	for _, j := range jobs {
		*j.target = j.file
		if cfg.Reuse {
			if st, err := os.Stat(j.file); err == nil && st.Mode().IsRegular() {
				fmt.Fprintf(log, "reusing %s\n", j.file)
				continue
			}
		}
		fmt.Fprintf(log, "generating %s\n", j.file)
		start := time.Now()
		cmd := exec.CommandContext(ctx, gen, j.args...)
		if b, err := cmd.CombinedOutput(); err != nil {
			return fmt.Errorf("culprit-gen %s: %w\n%s", strings.Join(j.args, " "), err, b)
		}
		fmt.Fprintf(log, "generated %s in %.1fs\n", j.file, time.Since(start).Seconds())
	}
	return nil
}

// describeInputs stats every input, counts the spans of OTLP files and,
// by reading them whole, leaves them in the page cache for the phases.
func describeInputs(cfg config) ([]inputInfo, error) {
	var infos []inputInfo
	add := func(role, path string, spans bool) error {
		if path == "" {
			return nil
		}
		f, err := os.Open(path)
		if err != nil {
			return err
		}
		defer f.Close()
		info := inputInfo{Role: role, Path: path}
		cr := &countingReader{r: f}
		if spans {
			info.Spans, err = countSpanIDKeys(cr)
		} else {
			_, err = io.Copy(io.Discard, cr)
		}
		if err != nil {
			return fmt.Errorf("reading %s: %w", path, err)
		}
		info.Bytes = cr.n
		infos = append(infos, info)
		return nil
	}
	if err := add("profile", cfg.Profile, false); err != nil {
		return nil, err
	}
	if err := add("spans", cfg.Spans, true); err != nil {
		return nil, err
	}
	if cfg.Scale {
		if err := add("spans-big", cfg.SpansBig, true); err != nil {
			return nil, err
		}
	}
	return infos, nil
}

// countingReader counts the bytes read through it.
type countingReader struct {
	r io.Reader
	n int64
}

func (c *countingReader) Read(p []byte) (int, error) {
	n, err := c.r.Read(p)
	c.n += int64(n)
	return n, err
}

// spanIDKey is the JSON key every OTLP span has once. Links have it too;
// the generator writes none, and the reference decode's exact count is
// preferred when it is known.
var spanIDKey = []byte(`"spanId"`)

// countSpanIDKeys counts occurrences of "spanId" in r, in constant memory.
// An escaped key inside a string value (\"spanId\") is not counted.
func countSpanIDKeys(r io.Reader) (int64, error) {
	buf := make([]byte, 1<<20)
	keep := 0 // bytes carried over from the previous read
	var n int64
	for {
		m, err := r.Read(buf[keep:])
		if m > 0 {
			data := buf[:keep+m]
			n += int64(bytes.Count(data, spanIDKey))
			// A match needs len(spanIDKey) bytes, so a shorter tail holds
			// no complete one and is never counted twice.
			keep = min(len(data), len(spanIDKey)-1)
			copy(buf, data[len(data)-keep:])
		}
		if errors.Is(err, io.EOF) {
			return n, nil
		}
		if err != nil {
			return n, err
		}
	}
}

// measure runs p once as a child process and appends its wall time, CPU
// time and peak RSS to res.
func measure(ctx context.Context, p phase, res *phaseResult) error {
	if p.out != "" {
		os.Remove(p.out)
	}
	cmd := exec.CommandContext(ctx, p.argv[0], p.argv[1:]...)
	var stdout, stderr cappedBuffer
	cmd.Stdout = &stdout
	cmd.Stderr = &stderr
	switch {
	case p.self:
		cmd.Env = append(os.Environ(), childEnv+"=1")
	case p.cpuProfile != "":
		cmd.Env = append(os.Environ(), cpuProfileEnv+"="+p.cpuProfile)
	}
	start := time.Now()
	err := cmd.Run()
	wall := time.Since(start)
	if err != nil {
		return fmt.Errorf("%s: %w\n%s", strings.Join(p.argv, " "), err, stderr.String())
	}
	res.Walls = append(res.Walls, wall)
	res.CPU = append(res.CPU, cmd.ProcessState.UserTime()+cmd.ProcessState.SystemTime())
	rss, ok := peakRSS(cmd.ProcessState)
	if !ok {
		rss = -1
	}
	res.RSS = append(res.RSS, rss)
	switch {
	case p.self:
		var cr childResult
		if err := json.Unmarshal(stdout.Bytes(), &cr); err != nil {
			return fmt.Errorf("reading the result of %s: %w", p.Name, err)
		}
		res.Spans, res.Samples, res.Stacks = cr.Spans, cr.Samples, cr.Stacks
		switch p.Name {
		case phasePprofParse:
			res.Decoded = fmt.Sprintf("%d samples over %d stacks", cr.Samples, cr.Stacks)
		case phaseOTLPProtojson:
			res.Decoded = fmt.Sprintf("%d spans on %d lines", cr.Spans, cr.Lines)
		}
	case p.out != "":
		return readRankReport(p.out, res)
	default:
		res.Decoded = strings.TrimSpace(stdout.String())
	}
	return nil
}

// rankReport is the part of culprit's JSON rank document checked here.
type rankReport struct {
	Schema     string `json:"schema"`
	SourceKind string `json:"sourceKind"`
	Totals     struct {
		Requests int   `json:"requests"`
		Samples  int64 `json:"samples"`
	} `json:"totals"`
	RootCauses []json.RawMessage `json:"rootCauses"`
}

// readRankReport checks that culprit wrote a rank document to name and
// records what it counted.
func readRankReport(name string, res *phaseResult) error {
	b, err := os.ReadFile(name)
	if err != nil {
		return fmt.Errorf("culprit wrote no report: %w", err)
	}
	var doc rankReport
	if err := json.Unmarshal(b, &doc); err != nil {
		return fmt.Errorf("reading culprit's report %s: %w", name, err)
	}
	if doc.Schema == "" || doc.Totals.Samples <= 0 {
		return fmt.Errorf("culprit's report %s counts nothing (schema %q, %d samples)", name, doc.Schema, doc.Totals.Samples)
	}
	res.Decoded = fmt.Sprintf("%s, totals: %d samples, %d requests; %d root causes",
		doc.SourceKind, doc.Totals.Samples, doc.Totals.Requests, len(doc.RootCauses))
	return nil
}

// cappedBuffer keeps the first 1 MiB written to it and drops the rest, so
// that a chatty child cannot raise the parent's peak RSS (which Linux
// carries into the next child's, see the package comment).
type cappedBuffer struct{ bytes.Buffer }

const bufferCap = 1 << 20

func (c *cappedBuffer) Write(p []byte) (int, error) {
	if room := bufferCap - c.Len(); room > 0 {
		c.Buffer.Write(p[:min(len(p), room)])
	}
	return len(p), nil
}

// mergeProfiles merges the CPU profiles in files into one, written to
// out: the profile that profile-guided optimisation builds culprit with
// (go build reads cmd/culprit/default.pgo).
func mergeProfiles(out string, files []string) error {
	var ps []*profile.Profile
	for _, f := range files {
		data, err := os.ReadFile(f)
		if err != nil {
			return err
		}
		p, err := profile.ParseData(data)
		if err != nil {
			return fmt.Errorf("%s: %w", f, err)
		}
		ps = append(ps, p)
	}
	merged, err := profile.Merge(ps)
	if err != nil {
		return fmt.Errorf("merging CPU profiles: %w", err)
	}
	// Profile-guided optimisation matches functions by name and lines by
	// their offset in the function; the paths of the source files and of
	// the binary would only write this machine's directories into the
	// repository.
	for _, f := range merged.Function {
		f.Filename = ""
	}
	for _, m := range merged.Mapping {
		m.File = filepath.Base(m.File)
	}
	var buf bytes.Buffer
	if err := merged.Write(&buf); err != nil {
		return err
	}
	return os.WriteFile(out, buf.Bytes(), 0o644)
}
