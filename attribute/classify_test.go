package attribute

import (
	"strings"
	"testing"

	"github.com/culprithq/culprit/traces"
)

// Frame shapes as Go 1.26's runtime/pprof writes them (reference
// pprof-profiles.md §4–§5, observed with plain and -trimpath builds).
func TestAutoDetectGo(t *testing.T) {
	tests := []struct {
		name, fn, file string
		owned          bool
	}{
		{"GOROOT stdlib", "crypto/sha256.Sum256", "/usr/local/go/src/crypto/sha256/sha256.go", false},
		{"GOROOT runtime asm", "runtime.memmove", "/usr/local/go/src/runtime/memmove_amd64.s", false},
		{"trimpath stdlib", "crypto/sha256.Sum256", "crypto/sha256/sha256.go", false},
		{"module cache", "github.com/spf13/pflag.(*FlagSet).Int", "/home/ci/go/pkg/mod/github.com/spf13/pflag@v1.0.9/flag.go", false},
		{"module cache upper-case escape", "github.com/BurntSushi/toml.Decode", "/home/u/go/pkg/mod/github.com/!burnt!sushi/toml@v1.4.0/decode.go", false},
		{"trimpath dependency", "github.com/spf13/pflag.(*FlagSet).Int", "github.com/spf13/pflag@v1.0.9/flag.go", false},
		{"trimpath pseudo-version", "golang.org/x/sys/unix.Syscall", "golang.org/x/sys@v0.0.0-20240101000000-abcdef123456/unix/syscall.go", false},
		{"vendored", "github.com/lib/pq.(*conn).query", "/src/shop/vendor/github.com/lib/pq/conn.go", false},
		{"package main", "main.main", "/home/ci/shop/main.go", true},
		{"package main trimpath", "main.(*handler).serve", "example.com/app/main.go", true},
		{"closure in main", "main.(*handler).serve.func1.1", "/home/ci/shop/main.go", true},
		{"module package", "example.com/app/internal/store.(*Repo).Get", "/home/ci/app/internal/store/store.go", true},
		{"module package trimpath", "example.com/app/internal/store.(*Repo).Get", "example.com/app/internal/store/store.go", true},
		{"generic instantiation", "example.com/app/internal/store.Map[go.shape.int,go.shape.[32]uint8]", "/home/ci/app/internal/store/map.go", true},
		{"generic with slash in shape", "example.com/app/store.Get[go.shape.struct { example.com/app/x.A int }]", "/home/ci/app/store/get.go", true},
		{"dotted import path", "gopkg.in/yaml%2ev3.Unmarshal", "/home/ci/go/pkg/mod/gopkg.in/yaml.v3@v3.0.1/yaml.go", false},
		{"range-over-func body", "example.com/app/store.All-range1", "/home/ci/app/store/all.go", true},
		{"no file, stdlib name", "net/http.(*conn).serve", "", false},
		{"no file, main", "main.work", "", true},
		// A module path with no dot (module permitoffice): names and
		// files as runtime.CallersFrames printed them for such a module
		// built by go1.26 with and without -trimpath.
		{"module path with no dot", "permitoffice/a.Where", "/home/ci/permitoffice/a/a.go", true},
		{"module path with no dot trimpath", "permitoffice/a.Where", "permitoffice/a/a.go", true},
		{"module path with no dot, main package file trimpath", "main.main.func1", "permitoffice/main.go", true},
		{"module path with no dot under GOPATH", "permitoffice/a.Where", "/home/ci/go/src/permitoffice/a/a.go", true},
		{"one-element module path", "evalharness.Run", "/home/ci/evalharness/run.go", true},
		{"no file, module path with no dot", "permitoffice/permits.(*Store).Get", "", true},
		{"stdlib's vendored copy", "vendor/golang.org/x/net/http2/hpack.(*Decoder).Write", "/usr/local/go/src/vendor/golang.org/x/net/http2/hpack/hpack.go", false},
		{"trimpath stdlib asm", "runtime.memmove", "runtime/memmove_amd64.s", false},
		// A package this release's list lacks (a newer release's):
		// told by its GOROOT or -trimpath file and a std first element.
		{"stdlib of another release", "crypto/sha4.Sum", "/usr/local/go/src/crypto/sha4/sha4.go", false},
		{"stdlib of another release trimpath", "crypto/sha4.Sum", "crypto/sha4/sha4.go", false},
		{"stdlib of an older release, no file", "runtime/internal/atomic.(*Uint32).Load", "", false},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			owned, reason := autoOwnedFrame(&traces.Frame{Function: tt.fn, File: tt.file})
			if owned != tt.owned {
				t.Errorf("autoOwned(%s, %s) = %v (%s), want %v", tt.fn, tt.file, owned, reason, tt.owned)
			}
			if reason == "" {
				t.Error("no reason given")
			}
		})
	}
}

func TestAutoDetectOtherLanguages(t *testing.T) {
	tests := []struct {
		name, fn, file string
		owned          bool
	}{
		{"jvm app", "com.nursery.catalog.VarietyRepository.findById", "VarietyRepository.java", true},
		{"jvm platform", "java.util.HashMap.get", "HashMap.java", false},
		{"jvm spring", "org.springframework.web.servlet.DispatcherServlet.doDispatch", "DispatcherServlet.java", false},
		{"python app", "load_varieties", "/srv/app/catalog/repo.py", true},
		{"python package", "execute", "/usr/lib/python3.11/site-packages/psycopg2/extras.py", false},
		{"python stdlib", "request", "/usr/lib/python3.11/http/client.py", false},
		{"node app", "loadVarieties", "/srv/app/src/catalog.js", true},
		{"node module", "Client.query", "/srv/app/node_modules/pg/lib/client.js", false},
		{"node core", "ClientRequest", "node:_http_client", false},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			owned, reason := autoOwnedFrame(&traces.Frame{Function: tt.fn, File: tt.file})
			if owned != tt.owned {
				t.Errorf("autoOwned = %v (%s), want %v", owned, reason, tt.owned)
			}
		})
	}
}

func TestAutoDetectSpans(t *testing.T) {
	tests := []struct {
		kind  traces.SpanKind
		owned bool
	}{
		{traces.SpanKindServer, true},
		{traces.SpanKindInternal, true},
		{traces.SpanKindConsumer, true},
		{traces.SpanKindClient, false},
		{traces.SpanKindProducer, false},
	}
	for _, tt := range tests {
		t.Run(tt.kind.String(), func(t *testing.T) {
			owned, _ := autoOwnedFrame(&traces.Frame{Function: "op", Span: true, SpanKind: tt.kind})
			if owned != tt.owned {
				t.Errorf("owned = %v, want %v", owned, tt.owned)
			}
		})
	}
}

func TestClassifierDetectionSummary(t *testing.T) {
	src := traces.NewSource(traces.Profile, []traces.ValueType{{Type: "samples", Unit: "count"}})
	for _, f := range []traces.Frame{
		{Function: "main.main", File: "/h/app/main.go"},
		{Function: "example.com/app/store.Get", File: "/h/app/store/get.go"},
		{Function: "example.com/app/store.Put", File: "/h/app/store/put.go"},
		{Function: "example.com/app/api.Serve", File: "/h/app/api/api.go"},
		{Function: "database/sql.(*DB).Query", File: "/usr/local/go/src/database/sql/sql.go"},
	} {
		src.InternFrame(f)
	}
	c := NewClassifier(src, DefaultRules())
	if len(c.Detected) != 2 || c.Detected[0].Prefix != "example.com/app" || c.Detected[0].Functions != 3 || c.Detected[1].Prefix != "main" {
		t.Errorf("detected = %+v", c.Detected)
	}
	if v := c.Verdict(5); v.Class != Database || v.System != "sql" {
		t.Errorf("database/sql verdict = %+v", v)
	}
	if v := c.Verdict(1); v.Class != Application || !v.EntryPoint {
		t.Errorf("main.main verdict = %+v, want application entry point", v)
	}
}

func TestClassifierAppPrefix(t *testing.T) {
	rules := DefaultRules()
	rules.App = []string{"example.com/app/store"}
	src := traces.NewSource(traces.Profile, []traces.ValueType{{Type: "samples", Unit: "count"}})
	store := src.InternFrame(traces.Frame{Function: "example.com/app/store.Get", File: "/h/app/store/get.go"})
	api := src.InternFrame(traces.Frame{Function: "example.com/app/api.Serve", File: "/h/app/api/api.go"})
	trim := src.InternFrame(traces.Frame{Function: "main.run", File: "example.com/app/store/run.go"})
	c := NewClassifier(src, rules)
	if c.Verdict(store).Class != Application || c.Verdict(api).Class != Library || c.Verdict(trim).Class != Application {
		t.Errorf("verdicts: store %v api %v trimmed %v", c.Verdict(store), c.Verdict(api), c.Verdict(trim))
	}
	if len(c.Detected) != 0 {
		t.Errorf("no auto-detection expected with --app, got %+v", c.Detected)
	}
	if !strings.Contains(c.Verdict(store).Reason, "--app") {
		t.Errorf("reason = %q", c.Verdict(store).Reason)
	}
}

// autoOwnedFrame is autoOwned with the facts of f.File worked out for it.
func autoOwnedFrame(f *traces.Frame) (bool, string) {
	return autoOwned(f, newFileFacts(f.File, nil, nil))
}
