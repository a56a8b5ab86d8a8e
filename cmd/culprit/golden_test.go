package main

import (
	"flag"
	"os"
	"path/filepath"
	"testing"
)

var updateGolden = flag.Bool("update", false, "rewrite the end-to-end golden files in testdata/golden")

// TestDemoGolden renders the built-in demo data in every format and
// compares with testdata/golden/. Regenerate with:
//
//	go test ./cmd/culprit -run TestDemoGolden -update
func TestDemoGolden(t *testing.T) {
	runs := []struct {
		name string
		args []string
	}{
		{"demo-profiles", []string{"demo", "--limit", "0"}},
		{"demo-traces", []string{"demo", "--traces", "--limit", "0", "--domains", "../../testdata/greenhouse.domains.json"}},
		{"demo-diff", []string{"demo", "--diff"}},
	}
	exts := map[string]string{"text": "txt", "markdown": "md", "json": "json", "csv": "csv", "html": "html"}
	for _, r := range runs {
		for format, ext := range exts {
			name := r.name + "." + ext
			t.Run(name, func(t *testing.T) {
				code, out, errOut := runTest(t, "", append(r.args, "--format", format)...)
				if code != exitOK {
					t.Fatalf("exit %d: %s", code, errOut)
				}
				path := filepath.Join("..", "..", "testdata", "golden", name)
				if *updateGolden {
					if err := os.MkdirAll(filepath.Dir(path), 0o755); err != nil {
						t.Fatal(err)
					}
					if err := os.WriteFile(path, []byte(out), 0o644); err != nil {
						t.Fatal(err)
					}
					return
				}
				want, err := os.ReadFile(path)
				if err != nil {
					t.Fatalf("%v (run with -update to create it)", err)
				}
				if string(want) != out {
					t.Errorf("%s differs from the golden file (go test ./cmd/culprit -run TestDemoGolden -update rewrites it; review the diff)", name)
				}
			})
		}
	}
}
