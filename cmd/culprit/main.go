// Command culprit finds the application functions responsible for database
// and network cost in pprof profiles and OpenTelemetry traces.
package main

import (
	"fmt"
	"os"
	"runtime/debug"
	"runtime/metrics"
	"runtime/pprof"
)

// defaultGCPercent is culprit's garbage-collection target unless GOGC is
// set: the heap may grow to 1.5× the live data instead of Go's 2×. Paths,
// trees and tallies hold no pointers, so a collection costs little; on a
// million spans this keeps about 10 MB less for no measurable time.
const defaultGCPercent = 50

// analysisGCPercent returns the garbage-collection target once the
// inputs are read, live bytes being in use: the heap is then mostly the
// source, pointer-free, and what the analysis allocates is short-lived
// tallies. A large source is collected at 1.25× (on a million spans,
// 143-146 MB of peak memory instead of 152-154, for no measurable CPU);
// a small one at 2×, since at a few megabytes a tighter target only
// means collections every few megabytes (on a 1M-sample profile, 17 MB
// live: 0.19 s instead of 0.21).
func analysisGCPercent(live uint64) int {
	if live >= 32<<20 {
		return 25
	}
	return 100
}

// liveHeap returns the bytes of heap in use (after a collection, the
// live heap).
func liveHeap() uint64 {
	s := []metrics.Sample{{Name: "/memory/classes/heap/objects:bytes"}}
	metrics.Read(s)
	if s[0].Value.Kind() != metrics.KindUint64 {
		return 0
	}
	return s[0].Value.Uint64()
}

// cpuProfileEnv names a file to write a CPU profile of the run to, for
// developers (DEVELOPERS.md, "Benchmarks"; default.pgo is made with it).
const cpuProfileEnv = "CULPRIT_CPUPROFILE"

func main() {
	if _, set := os.LookupEnv("GOGC"); !set {
		debug.SetGCPercent(defaultGCPercent)
	}
	stop := startCPUProfile(os.Getenv(cpuProfileEnv))
	code := run(os.Args[1:], systemStreams())
	stop()
	os.Exit(code)
}

// startCPUProfile starts profiling into path, if set, and returns the
// function that stops it. Failing to profile is reported, not fatal.
func startCPUProfile(path string) (stop func()) {
	if path == "" {
		return func() {}
	}
	f, err := os.Create(path)
	if err != nil {
		fmt.Fprintf(os.Stderr, "culprit: %s: %v\n", cpuProfileEnv, err)
		return func() {}
	}
	if err := pprof.StartCPUProfile(f); err != nil {
		f.Close()
		fmt.Fprintf(os.Stderr, "culprit: %s: %v\n", cpuProfileEnv, err)
		return func() {}
	}
	return func() {
		pprof.StopCPUProfile()
		if err := f.Close(); err != nil {
			fmt.Fprintf(os.Stderr, "culprit: %s: %v\n", cpuProfileEnv, err)
		}
	}
}
