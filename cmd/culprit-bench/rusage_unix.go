//go:build unix

package main

import (
	"os"
	"runtime"
	"syscall"
)

// peakRSS returns the peak resident set size of an exited child in bytes
// (ru_maxrss, which Linux and the BSDs report in KiB and Darwin in bytes).
func peakRSS(ps *os.ProcessState) (int64, bool) {
	ru, ok := ps.SysUsage().(*syscall.Rusage)
	if !ok || ru == nil {
		return 0, false
	}
	return maxrssBytes(int64(ru.Maxrss)), true
}

// selfPeakRSS returns this process's own peak RSS in bytes, or -1.
func selfPeakRSS() int64 {
	var ru syscall.Rusage
	if err := syscall.Getrusage(syscall.RUSAGE_SELF, &ru); err != nil {
		return -1
	}
	return maxrssBytes(int64(ru.Maxrss))
}

func maxrssBytes(v int64) int64 {
	if runtime.GOOS == "darwin" || runtime.GOOS == "ios" {
		return v
	}
	return v * 1024
}
