package main

import (
	"bytes"
	"context"
	"fmt"
	"io"
	"net/http"
	"net/url"
	"slices"
	"strings"
	"sync"
	"sync/atomic"
	"time"

	"github.com/culprithq/culprit/traces"
	"github.com/culprithq/culprit/traces/capture"
	"github.com/culprithq/culprit/traces/statement"
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

// recentRequests keeps the last requests stored, for the status line's
// top root cause.
type recentRequests struct {
	mu   sync.Mutex
	reqs []traces.Record
	next int
}

// recentKeep is how many recent requests the status line ranks.
const recentKeep = 64

func (r *recentRequests) add(data []byte, json bool) {
	rec := traces.Record{Data: bytes.Clone(data), JSON: json}
	r.mu.Lock()
	defer r.mu.Unlock()
	if len(r.reqs) < recentKeep {
		r.reqs = append(r.reqs, rec)
		return
	}
	r.reqs[r.next] = rec
	r.next = (r.next + 1) % recentKeep
}

func (r *recentRequests) list() []traces.Record {
	r.mu.Lock()
	defer r.mu.Unlock()
	return slices.Clone(r.reqs)
}

// topCause ranks the recent requests as rank would and returns the top
// root cause with its share, or "" when there is none.
func (rc *receiver) topCause() string {
	recs := rc.recent.list()
	if len(recs) == 0 {
		return ""
	}
	f := rc.opts.analysis
	opts := traces.Options{Limits: f.Limits, Service: f.Service, SkipDigest: true}
	if !f.ShowLiterals {
		opts.Statement = statement.AppendText
	}
	c := traces.NewSpanCollector(opts)
	i := 0
	if err := c.AddRecords("recent requests", traces.FormatCapture, func() (traces.Record, error) {
		if i == len(recs) {
			return traces.Record{}, io.EOF
		}
		i++
		return recs[i-1], nil
	}); err != nil {
		return ""
	}
	src, err := c.Source()
	if err != nil {
		return ""
	}
	rules, err := f.rules()
	if err != nil {
		return ""
	}
	f.DomainsFile = ""
	res, err := f.attribute(src, rules)
	if err != nil || len(res.Causes) == 0 {
		return ""
	}
	fn := res.Causes[0].Function
	if i := strings.LastIndexByte(fn, '/'); i >= 0 {
		fn = "…" + fn[i:]
	}
	return fmt.Sprintf("%s %.0f%%", fn, 100*res.Causes[0].Share)
}

// status rewrites one status line on the terminal every second; every
// 10 s it ranks the recent requests for the top root cause.
func (rc *receiver) status(ctx context.Context, w io.Writer) {
	t := time.NewTicker(time.Second)
	defer t.Stop()
	last, lastAt := rc.spans.Load(), time.Now()
	var top atomic.Value
	top.Store("")
	ranking := atomic.Bool{}
	for tick := 0; ; tick++ {
		if tick%10 == 5 && ranking.CompareAndSwap(false, true) {
			go func() {
				defer ranking.Store(false)
				top.Store(rc.topCause())
			}()
		}
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
			if tc := top.Load().(string); tc != "" {
				line += " · top (recent requests): " + tc
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
