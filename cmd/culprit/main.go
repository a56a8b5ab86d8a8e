// Command culprit finds the application functions responsible for database
// and network cost in pprof profiles and OpenTelemetry traces.
package main

import "os"

func main() {
	os.Exit(run(os.Args[1:], systemStreams()))
}
