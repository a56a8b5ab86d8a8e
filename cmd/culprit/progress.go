package main

import (
	"fmt"
	"io"
	"sync"
	"sync/atomic"
	"time"
)

// progress reports reading progress on a terminal's stderr for long runs:
// nothing for the first progressDelay, then a line rewritten in place every
// progressEvery with bytes read, rate and ETA. It never prints when stderr
// is not a terminal.
type progress struct {
	w     io.Writer
	total int64 // bytes of all inputs whose size is known; 0 if none
	read  atomic.Int64
	start time.Time
	stop  chan struct{}
	done  sync.WaitGroup
	shown bool
}

const (
	progressDelay = 2 * time.Second
	progressEvery = 500 * time.Millisecond
)

// startProgress starts reporting to w if enabled; the returned progress is
// always usable, and Finish must be called.
func startProgress(w io.Writer, enabled bool, total int64) *progress {
	p := &progress{w: w, total: total, start: time.Now(), stop: make(chan struct{})}
	if !enabled {
		return p
	}
	p.done.Add(1)
	go func() {
		defer p.done.Done()
		delay := time.NewTimer(progressDelay)
		defer delay.Stop()
		select {
		case <-p.stop:
			return
		case <-delay.C:
		}
		tick := time.NewTicker(progressEvery)
		defer tick.Stop()
		for {
			p.print()
			select {
			case <-p.stop:
				return
			case <-tick.C:
			}
		}
	}()
	return p
}

func (p *progress) print() {
	n := p.read.Load()
	el := time.Since(p.start).Seconds()
	rate := float64(n) / el
	line := fmt.Sprintf("culprit: read %s", mib(n))
	if p.total > 0 {
		line += " of " + mib(p.total)
	}
	line += fmt.Sprintf(" (%s/s", mib(int64(rate)))
	if p.total > n && rate > 0 {
		line += fmt.Sprintf(", about %ds left", int(float64(p.total-n)/rate+0.5))
	}
	line += ")"
	fmt.Fprintf(p.w, "\r%-70s", line)
	p.shown = true
}

// Finish stops reporting and clears the progress line.
func (p *progress) Finish() {
	close(p.stop)
	p.done.Wait()
	if p.shown {
		fmt.Fprintf(p.w, "\r%-70s\r", "")
	}
}

// reader counts bytes read through r.
func (p *progress) reader(r io.Reader) io.Reader { return &progressReader{p: p, r: r} }

type progressReader struct {
	p *progress
	r io.Reader
}

func (pr *progressReader) Read(b []byte) (int, error) {
	n, err := pr.r.Read(b)
	pr.p.read.Add(int64(n))
	return n, err
}

func mib(n int64) string { return fmt.Sprintf("%.1f MiB", float64(n)/(1<<20)) }
