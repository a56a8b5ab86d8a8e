package main

import (
	"context"
	"fmt"
	"io"
	"net/http"
	"net/url"
	"strings"
	"sync"
	"time"

	"github.com/culprithq/culprit/traces/capture"
)

// syncEvery syncs the capture every interval until ctx is done.
func (rc *receiver) syncEvery(ctx context.Context, interval time.Duration) {
	t := time.NewTicker(interval)
	defer t.Stop()
	for {
		select {
		case <-ctx.Done():
			return
		case <-t.C:
			if err := rc.w.Sync(); err != nil {
				rc.diskProblem(err)
			}
		}
	}
}

// status rewrites one status line on the terminal every second.
func (rc *receiver) status(ctx context.Context, w io.Writer) {
	t := time.NewTicker(time.Second)
	defer t.Stop()
	last, lastAt := rc.spans.Load(), time.Now()
	for {
		select {
		case <-ctx.Done():
			return
		case now := <-t.C:
			n := rc.spans.Load()
			rate := float64(n-last) / now.Sub(lastAt).Seconds()
			last, lastAt = n, now
			line := fmt.Sprintf("culprit: %s spans/s · %s requests · %s spans stored · %d in flight",
				groupDigits(int64(rate)), groupDigits(rc.requests.Load()), groupDigits(n), len(rc.slots))
			if r := rc.refused.Load(); r > 0 {
				line += fmt.Sprintf(" · %s refused", groupDigits(r))
			}
			rc.errMu.Lock()
			fmt.Fprint(w, "\r\x1b[K"+line)
			rc.errMu.Unlock()
		}
	}
}

// clearStatus removes the status line.
func (rc *receiver) clearStatus(s *streams) {
	if s.ErrIsTerminal && !rc.opts.Quiet {
		fmt.Fprint(s.Err, "\r\x1b[K")
	}
}

// groupDigits writes n with thousands separators.
func groupDigits(n int64) string {
	s := fmt.Sprint(n)
	if n < 0 {
		return s
	}
	var b strings.Builder
	for i, c := range s {
		if i > 0 && (len(s)-i)%3 == 0 {
			b.WriteByte(',')
		}
		b.WriteRune(c)
	}
	return b.String()
}

// fetchProfiles takes a goroutine profile from a net/http/pprof endpoint
// every interval, and a CPU profile over each interval, into the
// capture. Failures are warnings; the next interval tries again.
func (rc *receiver) fetchProfiles(ctx context.Context, base string, every time.Duration) {
	goroutine, cpu, err := pprofURLs(base, every)
	if err != nil {
		rc.warn("--pprof %s: %v", base, err)
		return
	}
	client := &http.Client{Timeout: every + 30*time.Second}
	// Each URL's failures are told once, until it works again.
	var failing sync.Map
	fail := func(u, format string, args ...any) {
		if _, told := failing.LoadOrStore(u, true); !told && ctx.Err() == nil {
			rc.warn(format, args...)
		}
	}
	fetch := func(u string) {
		req, err := http.NewRequestWithContext(ctx, http.MethodGet, u, nil)
		if err != nil {
			return
		}
		resp, err := client.Do(req)
		if err != nil {
			fail(u, "fetching %s: %v (retrying every %s)", u, err, every)
			return
		}
		defer resp.Body.Close()
		data, err := io.ReadAll(io.LimitReader(resp.Body, rc.opts.MaxBody+1))
		switch {
		case err != nil:
			fail(u, "fetching %s: %v (retrying every %s)", u, err, every)
			return
		case resp.StatusCode != http.StatusOK:
			fail(u, "fetching %s: %s (retrying every %s)", u, resp.Status, every)
			return
		case int64(len(data)) > rc.opts.MaxBody:
			fail(u, "fetching %s: profile larger than --max-body", u)
			return
		}
		failing.Delete(u)
		if err := rc.w.Append(capture.Profile, data); err != nil {
			rc.diskProblem(err)
			return
		}
		rc.profiles.Add(1)
	}
	t := time.NewTicker(every)
	defer t.Stop()
	for {
		done := make(chan struct{})
		go func() { fetch(cpu); close(done) }()
		fetch(goroutine)
		select {
		case <-ctx.Done():
			<-done
			return
		case <-t.C:
		}
		<-done
	}
}

// pprofURLs returns the goroutine and CPU profile URLs of a
// net/http/pprof endpoint given as its server (http://host:port) or its
// /debug/pprof/ index.
func pprofURLs(base string, every time.Duration) (goroutine, cpu string, err error) {
	u, err := url.Parse(base)
	if err != nil {
		return "", "", err
	}
	if u.Scheme != "http" && u.Scheme != "https" {
		return "", "", fmt.Errorf("not an http(s) URL")
	}
	p := strings.TrimSuffix(u.Path, "/")
	if !strings.HasSuffix(p, "/debug/pprof") {
		p += "/debug/pprof"
	}
	g, c := *u, *u
	g.Path, g.RawQuery = p+"/goroutine", ""
	// A CPU window a little shorter than the interval, so that windows
	// do not overlap.
	secs := max(1, int((every-time.Second)/time.Second))
	c.Path, c.RawQuery = p+"/profile", fmt.Sprintf("seconds=%d", secs)
	return g.String(), c.String(), nil
}

// warn prints a warning on stderr.
func (rc *receiver) warn(format string, args ...any) {
	rc.errMu.Lock()
	defer rc.errMu.Unlock()
	fmt.Fprintf(rc.errOut, "\nculprit: warning: "+format+"\n", args...)
}
