// Package gostd knows the import paths of the Go standard library, as
// listed by the Go release that generated packages.go (go generate runs
// gen.go, which asks `go list std` on each platform of Platforms).
package gostd

import (
	"sort"
	"strings"
)

//go:generate go run gen.go

// Platforms are the GOOS/GOARCH pairs whose standard-library packages
// the list unites: a profile may come from any of them, and some
// packages (syscall/js, internal/syscall/windows, runtime/cgo) exist on
// some platforms only.
var Platforms = []string{
	"linux/amd64", "linux/arm64", "darwin/arm64", "windows/amd64",
	"freebsd/amd64", "js/wasm", "wasip1/wasm", "plan9/amd64",
}

// IsPackage reports whether pkg is the import path of a standard-library
// package of the Go release that generated the list (GoVersion).
func IsPackage(pkg string) bool {
	i := sort.SearchStrings(packages[:], pkg)
	return i < len(packages) && packages[i] == pkg
}

// IsFile reports whether a file path as written by a -trimpath build
// (net/http/server.go: the package's import path, then the file) is a
// standard-library file.
func IsFile(trimmed string) bool {
	i := strings.LastIndexByte(trimmed, '/')
	return i > 0 && IsPackage(trimmed[:i])
}

// IsTopLevel reports whether elem is the first element of a listed
// import path (net, crypto, internal, runtime…). A package of another Go
// release found in a GOROOT file path is told by it.
func IsTopLevel(elem string) bool {
	i := sort.SearchStrings(packages[:], elem)
	return i < len(packages) && (packages[i] == elem || strings.HasPrefix(packages[i], elem+"/"))
}
