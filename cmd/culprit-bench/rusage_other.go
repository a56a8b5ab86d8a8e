//go:build !unix

package main

import "os"

// peakRSS is unknown on this system.
func peakRSS(*os.ProcessState) (int64, bool) { return 0, false }

// selfPeakRSS is unknown on this system.
func selfPeakRSS() int64 { return -1 }
