package main

import (
	"runtime/debug"
	"testing"
)

// TestResolveVersion reads build information in the text form that the go
// command prints (`go version -m`) and that debug.ParseBuildInfo parses:
// the module version recorded by `go install …@v0.3.1`, and the VCS
// settings the go command stamps into binaries built in a checkout.
func TestResolveVersion(t *testing.T) {
	tests := []struct {
		name, info, ldflags, want string
	}{
		{"installed at a version", "path\tgithub.com/culprithq/culprit/cmd/culprit\nmod\tgithub.com/culprithq/culprit\tv0.3.1\th1:AAAAAAAAAAAAAAAAAAAAAAAAAAAAAAAAAAAAAAAAAAA=\n", "", "v0.3.1"},
		{"checkout, clean", "path\tgithub.com/culprithq/culprit/cmd/culprit\nmod\tgithub.com/culprithq/culprit\t(devel)\t\nbuild\tvcs=git\nbuild\tvcs.revision=0123456789abcdef0123456789abcdef01234567\nbuild\tvcs.modified=false\n", "", "devel 0123456789ab"},
		{"checkout, dirty", "path\tgithub.com/culprithq/culprit/cmd/culprit\nmod\tgithub.com/culprithq/culprit\t(devel)\t\nbuild\tvcs=git\nbuild\tvcs.revision=0123456789abcdef0123456789abcdef01234567\nbuild\tvcs.modified=true\n", "", "devel 0123456789ab-dirty"},
		{"no VCS", "path\tgithub.com/culprithq/culprit/cmd/culprit\nmod\tgithub.com/culprithq/culprit\t(devel)\t\n", "", "dev"},
		{"ldflags win", "path\tgithub.com/culprithq/culprit/cmd/culprit\nmod\tgithub.com/culprithq/culprit\tv0.3.1\t\n", "v9.9.9", "v9.9.9"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			info, err := debug.ParseBuildInfo(tt.info)
			if err != nil {
				t.Fatal(err)
			}
			if got := resolveVersion(tt.ldflags, info, true); got != tt.want {
				t.Errorf("version %q, want %q", got, tt.want)
			}
		})
	}
	if got := resolveVersion("dev", nil, false); got != "dev" {
		t.Errorf("without build info: %q", got)
	}
}
