package main

import (
	"compress/gzip"
	"fmt"
	"io"
	"math/rand/v2"
	"os"
	"path/filepath"
	"time"

	"github.com/google/pprof/profile"
)

// demoOptions are the flags of the demo command.
type demoOptions struct {
	out  string // output directory, created if missing
	seed uint64
	// plainTraces writes the trace files uncompressed (.traces.jsonl)
	// instead of gzip-compressed (.traces.jsonl.gz).
	plainTraces bool
}

// Load model of the demo: the load test of each build starts at a fixed
// instant; goroutine snapshots are taken every 10 s while requests arrive
// at loadRate per second (a Poisson process, the same for both builds, so
// that a build whose requests take longer has more of them in flight).
const (
	loadRate        = 10000.0 // requests per second
	snapshotEvery   = 10 * time.Second
	snapshotCount   = 3
	inflightWindow  = 1500 * time.Millisecond // longer than any request
	tracesPerBuild  = 150
	traceSpacing    = 400 * time.Millisecond // mean gap between sampled traces
	cpuDuration     = 30 * time.Second
	cpuPeriod       = 10 * time.Millisecond // 100 Hz, Go's default
	cpuRate         = 200.0                 // requests per second during the CPU profile
	cpuSimRequests  = 400                   // simulated, then scaled to cpuRate×cpuDuration
	gcShareOfCPU    = 0.10
	demoExecutable  = "/srv/greenhouse/bin/greenhouse"
	traceWindow     = 4 // traces in flight while writing lines
	webInstances    = 2
	deploymentStage = "loadtest"
)

// loadStart returns when the load test of build b started.
func loadStart(b build) time.Time {
	t := time.Date(2026, 6, 3, 9, 0, 0, 0, time.UTC)
	if b == buildCandidate {
		t = t.Add(time.Hour)
	}
	return t
}

// buildID is the executable's build ID, derived from the version.
func buildID(b build) string {
	return fmt.Sprintf("%x", "greenhouse-"+b.version+"-linux-amd64")[:40]
}

// demoFiles lists the demo's output files in the order they are written.
func demoFiles(plainTraces bool) []string {
	ext := ".traces.jsonl.gz"
	if plainTraces {
		ext = ".traces.jsonl"
	}
	var names []string
	for _, b := range []build{buildBase, buildCandidate} {
		for i := 1; i <= snapshotCount; i++ {
			names = append(names, fmt.Sprintf("greenhouse-%s.goroutine.%d.pb.gz", b.version, i))
		}
		names = append(names, "greenhouse-"+b.version+ext)
	}
	return append(names, "greenhouse-"+buildCandidate.version+".cpu.pb.gz")
}

// runDemo writes the demo data set into o.out.
func runDemo(o demoOptions) error {
	if err := os.MkdirAll(o.out, 0o755); err != nil {
		return fmt.Errorf("creating output directory: %w", err)
	}
	names := demoFiles(o.plainTraces)
	k := 0
	next := func() string { k++; return filepath.Join(o.out, names[k-1]) }
	for _, b := range []build{buildBase, buildCandidate} {
		for i := 1; i <= snapshotCount; i++ {
			p := goroutineProfile(o.seed, b, i)
			if err := writeFileAtomic(next(), func(w io.Writer) error { return writeProfile(w, p) }); err != nil {
				return err
			}
		}
		err := writeFileAtomic(next(), func(w io.Writer) error {
			if o.plainTraces {
				return writeDemoTraces(w, o.seed, b)
			}
			zw, err := gzip.NewWriterLevel(w, gzip.BestCompression)
			if err != nil {
				return err
			}
			if err := writeDemoTraces(zw, o.seed, b); err != nil {
				return err
			}
			return zw.Close()
		})
		if err != nil {
			return err
		}
	}
	p := cpuProfile(o.seed, buildCandidate)
	return writeFileAtomic(next(), func(w io.Writer) error { return writeProfile(w, p) })
}

// goroutineProfile simulates snapshot n of build b: every request in flight
// at that instant contributes its goroutine's stack, plus the server's idle
// goroutines. Samples are one per distinct stack and label set, valued by
// count, as runtime/pprof writes goroutine profiles.
func goroutineProfile(seed uint64, b build, n int) *profile.Profile {
	r := newRand(seed, fmt.Sprintf("%s/goroutine/%d", b.version, n))
	g := &requestGen{r: r, b: b}
	at := loadStart(b).Add(time.Duration(n) * snapshotEvery)
	now := at.UnixNano()
	counts := newStackCounts()
	weights := routeWeights()
	for t := now - int64(inflightWindow); ; {
		t += int64(r.ExpFloat64() * float64(time.Second) / loadRate)
		if t >= now {
			break
		}
		rt := routes[pick(r, weights)]
		root := g.request(rt)
		if root.layout(t) <= now {
			continue
		}
		a := root.activeAt(now)
		tails := a.wait
		if len(tails) == 0 || (a.self > 0 && r.Float64() < float64(a.cpu)/float64(a.self)) {
			tails = a.cpuAt
		}
		stack := a.stack(pickTail(r, tails))
		route := ""
		if a.labeled {
			route = rt.pattern
		}
		counts.add(stack, route, 1)
	}
	for _, ig := range idleGoroutines {
		counts.add(ig.stack, "", float64(between(r, ig.min, ig.max)))
	}

	p := &profile.Profile{
		SampleType: []*profile.ValueType{{Type: "goroutine", Unit: "count"}},
		PeriodType: &profile.ValueType{Type: "goroutine", Unit: "count"},
		Period:     1,
		TimeNanos:  now,
	}
	pb := newProfileBuilder(p, demoExecutable, buildID(b))
	for i, s := range counts.stacks {
		pb.add(s, []int64{int64(counts.counts[i])}, counts.routes[i])
	}
	return p
}

// pickTail chooses one of tails by weight; with none it returns the
// function's first line.
func pickTail(r *rand.Rand, tails []tail) tail {
	if len(tails) == 0 {
		return tail{}
	}
	total := 0
	for _, t := range tails {
		total += t.w
	}
	x := r.IntN(total)
	for _, t := range tails {
		if x < t.w {
			return t
		}
		x -= t.w
	}
	return tails[len(tails)-1]
}

// cpuProfile simulates a CPU profile of build b: each function's CPU time is
// spread over its stacks, the garbage collector adds its share, and each
// stack's sample count is drawn from a Poisson distribution with mean
// CPU time ÷ period (a 100 Hz profiling timer).
func cpuProfile(seed uint64, b build) *profile.Profile {
	r := newRand(seed, b.version+"/cpu")
	g := &requestGen{r: r, b: b}
	weights := routeWeights()
	scale := cpuRate * cpuDuration.Seconds() / cpuSimRequests
	counts := newStackCounts()
	total := 0.0
	for range cpuSimRequests {
		rt := routes[pick(r, weights)]
		root := g.request(rt)
		root.walk(func(n *node) {
			if n.cpu <= 0 || len(n.cpuAt) == 0 {
				return
			}
			tw := 0
			for _, t := range n.cpuAt {
				tw += t.w
			}
			route := ""
			if n.labeled {
				route = rt.pattern
			}
			for _, t := range n.cpuAt {
				ns := float64(n.cpu) * float64(t.w) / float64(tw) * scale
				counts.add(n.stack(t), route, ns)
				total += ns
			}
		})
	}
	gc := total * gcShareOfCPU / (1 - gcShareOfCPU)
	gw := 0
	for _, t := range gcCPU {
		gw += t.w
	}
	for _, t := range gcCPU {
		counts.add(t.frames, "", gc*float64(t.w)/float64(gw))
	}

	start := loadStart(b).Add(5 * time.Second)
	p := &profile.Profile{
		SampleType: []*profile.ValueType{
			{Type: "samples", Unit: "count"},
			{Type: "cpu", Unit: "nanoseconds"},
		},
		PeriodType:    &profile.ValueType{Type: "cpu", Unit: "nanoseconds"},
		Period:        int64(cpuPeriod),
		TimeNanos:     start.UnixNano(),
		DurationNanos: int64(cpuDuration),
	}
	pb := newProfileBuilder(p, demoExecutable, buildID(b))
	for i, s := range counts.stacks {
		c := poisson(r, counts.counts[i]/float64(cpuPeriod))
		if c == 0 {
			continue
		}
		pb.add(s, []int64{c, c * int64(cpuPeriod)}, counts.routes[i])
	}
	return p
}

// writeDemoTraces writes the sampled traces of build b as OTLP/JSON lines.
func writeDemoTraces(w io.Writer, seed uint64, b build) error {
	r := newRand(seed, b.version+"/traces")
	g := &requestGen{r: r, b: b, spans: true}
	resources := make([][]keyValue, webInstances)
	for i := range resources {
		resources[i] = []keyValue{
			strAttr("service.name", "greenhouse-web"),
			strAttr("service.version", b.version),
			strAttr("service.instance.id", fmt.Sprintf("web-%d", i+1)),
			strAttr("deployment.environment.name", deploymentStage),
		}
	}
	tw := newTraceWriter(w, r, traceWindow, resources, demoScopes)
	t := loadStart(b).Add(2 * time.Second).UnixNano()
	for _, rt := range routeSchedule(r, tracesPerBuild) {
		t += int64(r.ExpFloat64() * float64(traceSpacing))
		root := g.request(rt)
		root.layout(t)
		if err := tw.add(emitTrace(r, root, r.IntN(webInstances))); err != nil {
			return err
		}
	}
	return tw.close()
}
