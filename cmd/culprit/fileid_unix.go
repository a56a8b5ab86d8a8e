//go:build unix

package main

import (
	"os"
	"syscall"
)

// fileID identifies a file on this machine: device and inode.
type fileID struct{ dev, ino uint64 }

func idOf(st os.FileInfo) (fileID, bool) {
	sys, ok := st.Sys().(*syscall.Stat_t)
	if !ok {
		return fileID{}, false
	}
	return fileID{uint64(sys.Dev), uint64(sys.Ino)}, true //nolint:unconvert // the field types differ between systems
}
