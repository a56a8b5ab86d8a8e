package main

import (
	"net/http"
	"net/http/httptest"
	"net/http/pprof"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"
)

// TestListenPprof fetches profiles from Go's own net/http/pprof handlers
// into the capture; a URL that answers 404 is a warning, not a failure;
// a capture holding only profiles is ranked by them.
func TestListenPprof(t *testing.T) {
	mux := http.NewServeMux()
	mux.HandleFunc("/debug/pprof/", pprof.Index)
	mux.HandleFunc("/debug/pprof/profile", pprof.Profile)
	srv := httptest.NewServer(mux)
	defer srv.Close()
	dir := filepath.Join(t.TempDir(), "capture")
	report := filepath.Join(t.TempDir(), "rank.txt")
	// On a terminal, without --quiet, a status line is rewritten every second.
	terminal := func(o *listenOptions) { o.streams.ErrIsTerminal, o.Quiet = true, false }
	l := startListen(t, terminal, "--dir", dir, "--pprof", srv.URL, "--pprof", srv.URL+"/missing/", "--pprof-every", "1s", "-o", report)
	time.Sleep(2500 * time.Millisecond)
	l.stop(t)
	if !strings.Contains(l.stderr.String(), "\r\x1b[Kculprit: 0 spans/s · 0 requests · 0 spans stored · 0 in flight") {
		t.Errorf("no status line: %q", l.stderr)
	}
	// Once a fetch round at least; how many rounds fit in the time is the
	// scheduler's business.
	if !strings.Contains(l.stderr.String(), "404") {
		t.Errorf("no warning about the missing endpoint: %q", l.stderr)
	}
	segs, _ := filepath.Glob(filepath.Join(dir, "*.culprit-capture"))
	profiles := 0
	for _, seg := range segs {
		data, err := os.ReadFile(seg)
		if err != nil {
			t.Fatal(err)
		}
		for off := 40; off+9 <= len(data); {
			n := int(data[off]) | int(data[off+1])<<8 | int(data[off+2])<<16 | int(data[off+3])<<24
			if data[off+8] == 3 {
				profiles++
			}
			off += 9 + n
		}
	}
	if profiles < 2 {
		t.Fatalf("%d profiles in the capture, want goroutine and CPU profiles", profiles)
	}
	out, err := os.ReadFile(report)
	if err != nil {
		t.Fatalf("no report: %v\n%s", err, l.stderr)
	}
	if !strings.Contains(string(out), "goroutine") && !strings.Contains(string(out), "samples") {
		t.Errorf("the report is not of the profiles:\n%s", out)
	}
}
