package main

import (
	"fmt"
	"runtime"
	"runtime/debug"

	"github.com/spf13/cobra"
)

func init() {
	info, ok := debug.ReadBuildInfo()
	version = resolveVersion(version, info, ok)
}

// resolveVersion returns the version to report: the one set at build time
// with -ldflags "-X main.version=…" if any; else the module version that
// `go install …@version` records in the build info; else the VCS revision
// the go command stamps into binaries built inside a repository, with
// "-dirty" when the working tree had changes; else "dev".
func resolveVersion(ldflags string, info *debug.BuildInfo, ok bool) string {
	if ldflags != "" && ldflags != "dev" {
		return ldflags
	}
	if !ok || info == nil {
		return "dev"
	}
	if v := info.Main.Version; v != "" && v != "(devel)" {
		return v
	}
	var rev, modified string
	for _, s := range info.Settings {
		switch s.Key {
		case "vcs.revision":
			rev = s.Value
		case "vcs.modified":
			modified = s.Value
		}
	}
	if rev == "" {
		return "dev"
	}
	if len(rev) > 12 {
		rev = rev[:12]
	}
	if modified == "true" {
		rev += "-dirty"
	}
	return "devel " + rev
}

func newVersionCmd(s *streams) *cobra.Command {
	return &cobra.Command{
		Use:     "version",
		Short:   "Print culprit's version",
		Example: "  culprit version",
		Args:    exactArgs(0),
		RunE: func(cmd *cobra.Command, args []string) error {
			_, err := fmt.Fprintf(s.Out, "culprit %s (%s, %s/%s)\n", version, runtime.Version(), runtime.GOOS, runtime.GOARCH)
			return err
		},
	}
}
