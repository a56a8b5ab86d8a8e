// Command culprit-bench measures culprit against its performance targets
// on generated inputs and prints the ratios side by side with peak memory.
// It is a developer tool.
//
// Usage:
//
//	culprit-bench -gen DIR [-spans-n N] [-samples N] [-stacks M] [-scale] [-runs K] [-culprit PATH] [-pgo FILE]
//	culprit-bench [-profile FILE] [-spans FILE] [-spans-big FILE -scale] [-runs K] [-culprit PATH]
//
// Run it from inside the culprit module: it builds ./cmd/culprit (unless
// -culprit names a binary) and, with -gen, ./cmd/culprit-gen, with the go
// command on the PATH.
//
// # Targets
//
//   - pprof: `culprit rank` end to end takes at most 1.3× the time of
//     reading the file and calling profile.Parse alone.
//   - OTLP/JSON: `culprit rank` end to end is at least 10× faster than the
//     reference decode: reading the same JSON-lines file one line at a time
//     with protojson into the official OTLP protobuf Go types.
//   - OTLP/JSON: the peak resident memory of `culprit rank` is at most 150
//     bytes per span.
//   - OTLP/JSON (-scale): ranking 10× the spans takes at most 11× the time.
//
// # Method
//
// Every measured phase runs in a child process, so that its peak resident
// set size can be read from the operating system when it exits
// (getrusage's ru_maxrss); wall time is measured around the whole child,
// start-up included. The phases are:
//
//	baseline-self     culprit-bench doing nothing (start-up cost of the reference phases)
//	baseline-culprit  `culprit version` (start-up cost of the rank phases)
//	pprof-parse       read the profile and profile.Parse it
//	pprof-rank        culprit rank PROFILE --format json -o TEMPFILE
//	otlp-protojson    read the spans file line by line, protojson into tracepb.TracesData
//	otlp-rank         culprit rank SPANS --format json -o TEMPFILE
//	otlp-rank-10x     the same on 10× the spans (-scale only)
//
// Each run executes every phase once, in that order; -runs K runs repeat
// that K times and the table shows the median wall time and the highest
// peak RSS. Before measuring, every input is read once so that all phases
// find it in the page cache. The "net" columns subtract the baseline of
// the same binary (median time, highest peak RSS); the targets are judged
// on the raw, end-to-end numbers.
//
// With -pgo FILE, every culprit rank run writes a CPU profile, and their
// merge is written to FILE: cmd/culprit/default.pgo, with which go build
// optimises culprit for these workloads (profile-guided optimisation).
// The timings of such a run include the profiler's cost.
//
// On Linux, os/exec starts children with vfork, and the kernel then
// carries the parent's own peak RSS into the child's ru_maxrss; so a
// child's peak reads at least the parent's. culprit-bench streams its
// inputs and keeps its own peak small (it is printed), and the baselines
// show that floor.
package main

import (
	"os"
)

func main() {
	os.Exit(run(os.Args[1:], os.Stdout, os.Stderr))
}
