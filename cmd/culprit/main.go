// Command culprit finds the application functions responsible for database
// and network cost in pprof profiles and OpenTelemetry traces.
package main

import (
	"os"
	"runtime/debug"
)

// defaultGCPercent is culprit's garbage-collection target unless GOGC is
// set: the heap may grow to 1.5× the live data instead of Go's 2×. Paths,
// trees and tallies hold no pointers, so a collection costs little; on a
// million spans this keeps about 10 MB less for no measurable time.
const defaultGCPercent = 50

func main() {
	if _, set := os.LookupEnv("GOGC"); !set {
		debug.SetGCPercent(defaultGCPercent)
	}
	os.Exit(run(os.Args[1:], systemStreams()))
}
