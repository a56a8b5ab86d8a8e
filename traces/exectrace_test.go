package traces_test

import (
	"bytes"
	"errors"
	"io"
	"net"
	"net/http"
	"runtime"
	"runtime/pprof"
	"runtime/trace"
	"strings"
	"testing"
	"time"

	"github.com/culprithq/culprit/traces"
)

// recordSmallTrace records, with Go's own runtime/trace, a few requests
// to a loopback HTTP server whose handler waits on a timer.
func recordSmallTrace(t testing.TB) []byte {
	return recordSmallTraceProtocols(t, nil)
}

// recordSmallTraceProtocols does it over the protocols p (nil: HTTP/1).
func recordSmallTraceProtocols(t testing.TB, p *http.Protocols) []byte {
	t.Helper()
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	srv := &http.Server{Protocols: p, Handler: http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		time.Sleep(100 * time.Microsecond) // a wait inside the handler: see the README's pitfalls
		io.WriteString(w, "seedlings")
	})}
	go srv.Serve(ln)
	defer srv.Close()
	var buf bytes.Buffer
	if err := trace.Start(&buf); err != nil {
		t.Skipf("execution tracer unavailable: %v", err)
	}
	c := &http.Client{Transport: &http.Transport{Protocols: p}}
	for range 3 {
		resp, err := c.Get("http://" + ln.Addr().String() + "/")
		if err != nil {
			trace.Stop()
			t.Fatal(err)
		}
		if p != nil && resp.ProtoMajor != 2 {
			t.Fatalf("protocol %s, want HTTP/2", resp.Proto)
		}
		io.Copy(io.Discard, resp.Body)
		resp.Body.Close()
	}
	trace.Stop()
	return buf.Bytes()
}

func TestLooksLikeExecTrace(t *testing.T) {
	// The header Go's runtime/trace writes (internal/trace/version,
	// "go 1.%d trace\x00\x00\x00").
	for in, want := range map[string]bool{
		"go 1.26 trace\x00\x00\x00": true,
		"go 1.5 trace\x00\x00\x00":  true,
		"go 1.26 trace":             false,
		"go 1. trace\x00\x00\x00":   false,
		"{\"resourceSpans\":[]}":    false,
		"":                          false,
	} {
		if got := traces.LooksLikeExecTrace([]byte(in)); got != want {
			t.Errorf("LooksLikeExecTrace(%q) = %v, want %v", in, got, want)
		}
	}
}

func TestExecTraceUnsupportedVersion(t *testing.T) {
	l := traces.NewLoader(traces.Options{})
	err := l.Add("future.trace", strings.NewReader("go 1.99 trace\x00\x00\x00rest"))
	if err == nil || !strings.Contains(err.Error(), "go 1.99") || !strings.Contains(err.Error(), "future.trace") {
		t.Fatalf("error %v, want one naming the file and go 1.99", err)
	}
}

// TestExecTraceDamaged cuts and corrupts a real trace: every version is
// an error naming the file or reads whole, never a panic, and with
// KeepGoing a damaged input adds nothing.
func TestExecTraceDamaged(t *testing.T) {
	data := recordSmallTrace(t)
	src := loadExec(t, data)
	if src.RequestCount() != 3 {
		t.Errorf("%d requests, want 3", src.RequestCount())
	}
	for _, n := range []int{20, len(data) / 3, len(data) / 2, len(data) - 7} {
		l := traces.NewLoader(traces.Options{KeepGoing: true})
		if err := l.Add("cut.trace", bytes.NewReader(data[:n])); err != nil {
			t.Fatalf("KeepGoing: %v", err)
		}
		_, err := l.Source()
		if err == nil {
			// A cut at a generation boundary can read whole.
			continue
		}
		if !strings.Contains(err.Error(), "cut.trace") {
			t.Errorf("cut at %d: %v does not name the file", n, err)
		}
	}
	for _, at := range []int{16, 40, len(data) / 2} {
		bad := bytes.Clone(data)
		for i := at; i < at+8 && i < len(bad); i++ {
			bad[i] ^= 0xa5
		}
		l := traces.NewLoader(traces.Options{})
		if err := l.Add("bad.trace", bytes.NewReader(bad)); err != nil && !strings.Contains(err.Error(), "bad.trace") {
			t.Errorf("corrupt at %d: %v does not name the file", at, err)
		}
	}
}

// TestExecTraceLimit: a limit exceeded part way stops the reading (the
// goroutine that reads events ahead stops too) with ErrLimit.
func TestExecTraceLimit(t *testing.T) {
	data := recordSmallTrace(t)
	before := runtime.NumGoroutine()
	for range 20 {
		c := traces.NewExecCollector(traces.Limits{MaxFrames: 8})
		if err := c.Add("small.trace", bytes.NewReader(data)); !errors.Is(err, traces.ErrLimit) {
			t.Fatalf("MaxFrames 8: %v, want ErrLimit", err)
		}
	}
	if after := runtime.NumGoroutine(); after > before+2 {
		t.Errorf("%d goroutines after 20 failed reads, %d before: the event readers did not stop", after, before)
	}
}

func loadExec(t testing.TB, data []byte) *traces.Source {
	return loadExecAs(t, traces.Options{}, data, "small.trace")
}

// loadExecAs reads data once per name, with opts.
func loadExecAs(t testing.TB, opts traces.Options, data []byte, names ...string) *traces.Source {
	t.Helper()
	l := traces.NewLoader(opts)
	for _, name := range names {
		if err := l.Add(name, bytes.NewReader(data)); err != nil {
			t.Fatal(err)
		}
	}
	src, err := l.Source()
	if err != nil {
		t.Fatal(err)
	}
	return src
}

// FuzzExecTrace: the reader returns an error or a valid source, never
// panics.
func FuzzExecTrace(f *testing.F) {
	data := recordSmallTrace(f)
	f.Add(data)
	f.Add(data[:len(data)/2])
	f.Add([]byte("go 1.26 trace\x00\x00\x00"))
	f.Add([]byte("go 1.21 trace\x00\x00\x00\x01\x02"))
	f.Fuzz(func(t *testing.T, in []byte) {
		c := traces.NewExecCollector(traces.Limits{MaxBytes: 1 << 20})
		if err := c.Add("fuzz.trace", bytes.NewReader(in)); err != nil {
			return
		}
		if err := c.Source().Validate(); err != nil {
			t.Fatalf("invalid source: %v", err)
		}
		// Read for the latency view, as trees of spans.
		l := traces.NewLoader(traces.Options{Timing: true, Limits: traces.Limits{MaxBytes: 1 << 20}})
		if err := l.Add("fuzz.trace", bytes.NewReader(in)); err != nil {
			t.Fatalf("read with timing, it fails where it reads without: %v", err)
		}
		if src, err := l.Source(); err == nil {
			if err := src.Validate(); err != nil {
				t.Fatalf("invalid source with timing: %v", err)
			}
		}
	})
}

// TestExecTraceTiming reads a trace for the latency view: each request is
// a tree of spans, its paths contiguous, its goroutine first and every
// other path below it, the same requests as without timing; a wait lies
// within its goroutine's span, and the waits of one goroutine never
// overlap. Two inputs keep their trees apart.
func TestExecTraceTiming(t *testing.T) {
	data := recordSmallTrace(t)
	src := loadExecAs(t, traces.Options{Timing: true}, data, "a.trace", "b.trace")
	if err := src.Validate(); err != nil {
		t.Fatal(err)
	}
	plain := loadExec(t, data)
	if plain.Timing != nil {
		t.Error("timing kept without Options.Timing")
	}
	if src.RequestCount() != 2*plain.RequestCount() || plain.RequestCount() != 3 {
		t.Errorf("%d requests with timing from two inputs, %d without from one, want 6 and 3", src.RequestCount(), plain.RequestCount())
	}
	tm := src.Timing
	seen := map[traces.RequestID]bool{}
	for lo := 0; lo < src.Paths.Len(); {
		req := src.Paths.At(lo).Request
		if seen[req] || req == 0 {
			t.Fatalf("request %d: paths not contiguous, or none", req)
		}
		seen[req] = true
		hi := lo + 1
		for hi < src.Paths.Len() && src.Paths.At(hi).Request == req {
			hi++
		}
		if tm.Parent[lo] != -1 || !tm.Goroutine[lo] {
			t.Fatalf("request %s: its first path is not its goroutine", src.Requests[req])
		}
		end := func(i int) int64 { return tm.Start[i] + src.Paths.Value(i, 0) }
		last := map[int32]int64{}
		for i := lo + 1; i < hi; i++ {
			par := tm.Parent[i]
			if int(par) < lo || int(par) >= hi {
				t.Fatalf("request %s: path %d has parent %d outside it", src.Requests[req], i, par)
			}
			if tm.Goroutine[i] {
				continue
			}
			if tm.Start[i] < tm.Start[par] || end(i) > end(int(par)) || tm.Start[i] < last[par] {
				t.Errorf("request %s: wait [%d, %d] outside its goroutine [%d, %d] or before the end %d of its previous wait",
					src.Requests[req], tm.Start[i], end(i), tm.Start[par], end(int(par)), last[par])
			}
			last[par] = end(i)
		}
		lo = hi
	}
}

// TestExecTraceInputs: two traces (two instances of a service) add up,
// and a trace does not mix with a profile.
func TestExecTraceInputs(t *testing.T) {
	data := recordSmallTrace(t)
	src := loadExecAs(t, traces.Options{}, data, "a.trace", "b.trace")
	one := loadExec(t, data)
	if src.RequestCount() != 2*one.RequestCount() || src.Paths.Len() != 2*one.Paths.Len() {
		t.Errorf("two inputs: %d requests, %d paths; one: %d, %d", src.RequestCount(), src.Paths.Len(), one.RequestCount(), one.Paths.Len())
	}
	if src.DurationNanos != 2*one.DurationNanos {
		t.Errorf("duration %d, want twice %d", src.DurationNanos, one.DurationNanos)
	}
	var prof bytes.Buffer
	if err := pprof.Lookup("goroutine").WriteTo(&prof, 0); err != nil {
		t.Fatal(err)
	}
	l := traces.NewLoader(traces.Options{})
	if err := l.Add("a.trace", bytes.NewReader(data)); err != nil {
		t.Fatal(err)
	}
	if err := l.Add("goroutine.pb.gz", &prof); err != nil {
		t.Fatal(err)
	}
	if _, err := l.Source(); !errors.Is(err, traces.ErrMismatch) || !strings.Contains(err.Error(), "--source exectraces") {
		t.Errorf("a profile and a trace: %v, want ErrMismatch naming --source exectraces", err)
	}
}

// TestExecTraceHTTP2 reads requests served over HTTP/2 (unencrypted, by
// net/http's own server and client): each runs in a goroutine of its own.
func TestExecTraceHTTP2(t *testing.T) {
	var p http.Protocols
	p.SetUnencryptedHTTP2(true)
	src := loadExec(t, recordSmallTraceProtocols(t, &p))
	if src.RequestCount() != 3 {
		t.Errorf("%d requests, want 3", src.RequestCount())
	}
}
