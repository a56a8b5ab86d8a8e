package main

import (
	"context"
	"crypto/rand"
	"errors"
	"fmt"
	"net"
	"net/http"
	"os"
	"os/signal"
	"path/filepath"
	"strings"
	"sync"
	"syscall"
	"time"

	"github.com/culprithq/culprit/report"
	"github.com/culprithq/culprit/traces/capture"
	"github.com/spf13/cobra"
	"golang.org/x/net/netutil"
)

// listenOptions holds the flags and dependencies of `culprit listen`.
type listenOptions struct {
	streams  *streams
	analysis analysisFlags
	output   outputFlags
	command  string
	save     string

	HTTP, GRPC   string
	Dir          string
	AllowRemote  bool
	MaxBody      int64
	MaxInflight  int
	MaxConns     int
	Sync         time.Duration
	SegmentBytes int64
	Duration     time.Duration
	Quiet        bool
	Pprof        []string
	PprofEvery   time.Duration
	ReadTimeout  time.Duration
	IdleTimeout  time.Duration

	now func() time.Time
	// signals delivers SIGINT and SIGTERM (nil: the process's own).
	signals <-chan os.Signal
	// dir, when set, replaces the capture directory on disk (tests:
	// writes that fail on demand).
	dir capture.Dir
	// ready, when set, is told the addresses listened on.
	ready func(httpAddr, grpcAddr string)
}

func newListenCmd(s *streams, runF func(context.Context, *listenOptions) error) *cobra.Command {
	opts := &listenOptions{streams: s, now: time.Now}
	cmd := &cobra.Command{
		Use:   "listen",
		Short: "Receive spans over OTLP during a load test, then rank them",
		Long: `Listen serves the OpenTelemetry trace endpoints (OTLP/HTTP POST /v1/traces with
protobuf or JSON bodies, and OTLP/gRPC TraceService/Export), stores every
export request it accepts in a capture directory before acknowledging it, and
on Ctrl-C, SIGTERM or after --duration stops accepting, drains, and writes the
report exactly as 'culprit rank DIR' would.

It binds to loopback unless --allow-remote is given. A second signal while
the report is being made aborts the report; the capture is already complete.`,
		Example: `  # Point the service's exporter at culprit, run the load, press Ctrl-C
  OTEL_EXPORTER_OTLP_ENDPOINT=http://127.0.0.1:4318 ./service &
  culprit listen

  # Ten minutes, goroutine profiles too, a snapshot for a later diff
  culprit listen --duration 10m --pprof http://127.0.0.1:6060 --save v42.snapshot.json`,
		Args: exactArgs(0),
		RunE: func(cmd *cobra.Command, args []string) error {
			opts.command = commandLine(cmd, args)
			if runF != nil {
				return runF(cmd.Context(), opts)
			}
			return runListen(cmd.Context(), opts)
		},
	}
	fl := cmd.Flags()
	fl.StringVar(&opts.HTTP, "http", "127.0.0.1:4318", "OTLP/HTTP `ADDRESS` (empty: off)")
	fl.StringVar(&opts.GRPC, "grpc", "127.0.0.1:4317", "OTLP/gRPC `ADDRESS` (empty: off)")
	fl.StringVar(&opts.Dir, "dir", "", "capture `DIR` (default ./culprit-capture-<time>)")
	fl.BoolVar(&opts.AllowRemote, "allow-remote", false, "allow listening on addresses other than loopback")
	fl.Int64Var(&opts.MaxBody, "max-body", 64<<20, "largest request in bytes, compressed or not")
	fl.IntVar(&opts.MaxInflight, "max-inflight", 64, "requests handled at once; more get a retryable 503/UNAVAILABLE")
	fl.IntVar(&opts.MaxConns, "max-conns", 1024, "open HTTP connections at once")
	fl.DurationVar(&opts.Sync, "sync", 0, "sync the capture every `INTERVAL` (0: before acknowledging each request)")
	fl.Int64Var(&opts.SegmentBytes, "segment-bytes", capture.DefaultSegmentBytes, "start a new capture segment past this size")
	fl.DurationVar(&opts.Duration, "duration", 0, "stop after this long (0: at Ctrl-C or SIGTERM)")
	fl.BoolVar(&opts.Quiet, "quiet", false, "no live status line")
	fl.StringArrayVar(&opts.Pprof, "pprof", nil, "fetch goroutine and CPU profiles from this net/http/pprof `URL` (repeatable)")
	fl.DurationVar(&opts.PprofEvery, "pprof-every", 10*time.Second, "profile fetching interval")
	fl.DurationVar(&opts.ReadTimeout, "read-timeout", 30*time.Second, "longest time to read one request")
	fl.DurationVar(&opts.IdleTimeout, "idle-timeout", 2*time.Minute, "close idle connections after this long")
	opts.analysis.register(cmd)
	opts.output.register(cmd, report.Formats)
	fl.StringVar(&opts.save, "save", "", "also write a snapshot (culprit.snapshot/v1) to `FILE`, for diff and merge")
	return cmd
}

func runListen(ctx context.Context, opts *listenOptions) error {
	s := opts.streams
	if err := opts.check(); err != nil {
		return err
	}
	if opts.output.Format != "" {
		if _, err := report.ForFormat(opts.output.Format); err != nil {
			return &usageError{err: err}
		}
	}
	sigs := opts.signals
	if sigs == nil {
		ch := make(chan os.Signal, 2)
		signal.Notify(ch, os.Interrupt, syscall.SIGTERM)
		defer signal.Stop(ch)
		sigs = ch
	}
	dirName := opts.Dir
	if dirName == "" {
		dirName = "culprit-capture-" + opts.now().UTC().Format("20060102-150405")
	}
	dir := opts.dir
	if dir == nil {
		d, err := openCaptureDir(dirName)
		if err != nil {
			return err
		}
		dir = d
	}
	var instance [16]byte
	rand.Read(instance[:])
	w := capture.NewWriter(dir, capture.WriterOptions{Instance: instance, SegmentBytes: opts.SegmentBytes, SyncEach: opts.Sync == 0})
	rc := newReceiver(w, opts, s.Err)
	rc.showStatus = s.ErrIsTerminal && !opts.Quiet

	// Listen first: a port in use is an error before anything runs.
	var httpLn, grpcLn net.Listener
	var err error
	if opts.HTTP != "" {
		if httpLn, err = net.Listen("tcp", opts.HTTP); err != nil {
			return fmt.Errorf("--http: %w", err)
		}
		httpLn = netutil.LimitListener(httpLn, opts.MaxConns)
	}
	if opts.GRPC != "" {
		if grpcLn, err = net.Listen("tcp", opts.GRPC); err != nil {
			if httpLn != nil {
				httpLn.Close()
			}
			return fmt.Errorf("--grpc: %w", err)
		}
	}
	hs := &http.Server{
		Handler:           rc.httpHandler(),
		ReadHeaderTimeout: 10 * time.Second,
		ReadTimeout:       opts.ReadTimeout,
		WriteTimeout:      opts.ReadTimeout + 30*time.Second,
		IdleTimeout:       opts.IdleTimeout,
		MaxHeaderBytes:    64 << 10,
	}
	gs := rc.grpcServer()
	var serving sync.WaitGroup
	var httpAddr, grpcAddr string
	if httpLn != nil {
		httpAddr = httpLn.Addr().String()
		serving.Go(func() { hs.Serve(httpLn) })
	}
	if grpcLn != nil {
		grpcAddr = grpcLn.Addr().String()
		serving.Go(func() { gs.Serve(grpcLn) })
	}
	if !opts.Quiet {
		fmt.Fprintf(s.Err, "culprit: listening for OTLP on %s; capture in %s\n", listenAddrs(httpAddr, grpcAddr), dirName)
	}
	if opts.ready != nil {
		opts.ready(httpAddr, grpcAddr)
	}

	// Background work: periodic sync, status line, profile fetching.
	bg, stopBG := context.WithCancel(context.Background())
	var workers sync.WaitGroup
	if opts.Sync > 0 {
		workers.Go(func() { rc.syncEvery(bg, opts.Sync) })
	}
	if rc.showStatus {
		workers.Go(func() { rc.status(bg, s.Err) })
	}
	for _, u := range opts.Pprof {
		workers.Go(func() { rc.fetchProfiles(bg, u, opts.PprofEvery) })
	}

	// Run until a signal, the context or --duration.
	var timeout <-chan time.Time
	if opts.Duration > 0 {
		t := time.NewTimer(opts.Duration)
		defer t.Stop()
		timeout = t.C
	}
	// echo: the signal that cancelled ctx (run's handler saw it) has yet
	// to reach sigs. The runtime hands a signal to each channel in turn,
	// so it may arrive later: it is this stop, not a second signal.
	echo := false
	select {
	case <-sigs:
	case <-ctx.Done():
		var se *signalError
		if errors.As(context.Cause(ctx), &se) {
			select {
			case <-sigs:
			default:
				echo = true
			}
		}
	case <-timeout:
	}

	// Stop: new requests get 503/UNAVAILABLE, the ones in flight finish.
	rc.stop()
	var stopping sync.WaitGroup
	for _, srv := range []*http.Server{hs, gs} {
		stopping.Go(func() { stopServer(srv, opts.ReadTimeout+10*time.Second) })
	}
	stopping.Wait()
	serving.Wait()
	rc.drain()
	stopBG()
	workers.Wait()
	rc.clearStatus(s)
	closeErr := w.Close()
	records, _ := w.Stats()
	first, last := w.Segments()
	if !opts.Quiet || closeErr != nil {
		fmt.Fprintf(s.Err, "culprit: stored %d spans in %d requests and %d profiles in %s (segments %d–%d)\n",
			rc.spans.Load(), rc.requests.Load(), rc.profiles.Load(), dirName, first, last)
	}
	if closeErr != nil {
		return fmt.Errorf("closing the capture: %w", closeErr)
	}
	if records == 0 {
		fmt.Fprintln(s.Err, "culprit: nothing was received; no report")
		return nil
	}
	if opts.dir != nil {
		return nil // a test's directory is not on disk
	}

	// The report, exactly as `culprit rank DIR`; a second signal aborts it.
	rctx, abort := context.WithCancel(context.WithoutCancel(ctx))
	defer abort()
	go func() {
		for {
			select {
			case <-sigs:
				if echo {
					echo = false
					continue
				}
				abort()
			case <-rctx.Done():
			}
			return
		}
	}()
	ro := &rankOptions{streams: s, analysis: opts.analysis, output: opts.output, inputs: []string{dirName},
		command: opts.command, save: opts.save}
	if err := runRank(rctx, ro); err != nil {
		if errors.Is(err, context.Canceled) {
			return fmt.Errorf("report aborted; the capture is complete: culprit rank %s: %w", dirName, err)
		}
		return err
	}
	return nil
}

// check validates the flags.
func (o *listenOptions) check() error {
	if o.HTTP == "" && o.GRPC == "" {
		return usagef("--http and --grpc are both off: nothing to listen on")
	}
	for _, a := range []struct{ flag, addr string }{{"--http", o.HTTP}, {"--grpc", o.GRPC}} {
		if a.addr == "" {
			continue
		}
		host, _, err := net.SplitHostPort(a.addr)
		if err != nil {
			return usagef("%s %q: %v", a.flag, a.addr, err)
		}
		if !isLoopback(host) {
			if !o.AllowRemote {
				return usagef("%s %s is not a loopback address; culprit stores whatever it receives, so add --allow-remote to accept spans from other machines", a.flag, a.addr)
			}
			fmt.Fprintf(o.streams.Err, "culprit: warning: %s %s accepts spans from other machines (--allow-remote); anyone who can reach it can fill the capture\n", a.flag, a.addr)
		}
	}
	switch {
	case o.MaxBody <= 0:
		return usagef("--max-body must be positive")
	case o.MaxInflight <= 0 || o.MaxConns <= 0:
		return usagef("--max-inflight and --max-conns must be positive")
	case o.Sync < 0 || o.Duration < 0:
		return usagef("--sync and --duration must not be negative")
	case len(o.Pprof) > 0 && o.PprofEvery < time.Second:
		return usagef("--pprof-every must be at least 1s")
	case o.ReadTimeout <= 0 || o.IdleTimeout <= 0:
		return usagef("--read-timeout and --idle-timeout must be positive")
	}
	return nil
}

// isLoopback reports whether host (of an address to listen on) is a
// loopback name or address. An empty host means every interface.
func isLoopback(host string) bool {
	if host == "localhost" {
		return true
	}
	ip := net.ParseIP(host)
	return ip != nil && ip.IsLoopback()
}

func listenAddrs(httpAddr, grpcAddr string) string {
	var parts []string
	if httpAddr != "" {
		parts = append(parts, "http://"+httpAddr+"/v1/traces")
	}
	if grpcAddr != "" {
		parts = append(parts, "gRPC "+grpcAddr)
	}
	return strings.Join(parts, " and ")
}

// stopServer stops srv gracefully: it stops accepting, lets the requests
// in flight finish (HTTP/2 connections are told so with GOAWAY) and
// closes the connections; after timeout it closes them at once.
func stopServer(srv *http.Server, timeout time.Duration) {
	ctx, cancel := context.WithTimeout(context.Background(), timeout)
	defer cancel()
	if srv.Shutdown(ctx) != nil {
		srv.Close()
	}
}

// osDir is a capture directory on disk.
type osDir struct{ path string }

// openCaptureDir makes the capture directory; an existing one must hold
// no segments (a capture is one listener run).
func openCaptureDir(path string) (*osDir, error) {
	if err := os.MkdirAll(path, 0o755); err != nil {
		return nil, err
	}
	if m, _ := filepath.Glob(filepath.Join(path, "*"+capture.Ext)); len(m) > 0 {
		return nil, usagef("--dir %s already holds a capture; choose another directory", path)
	}
	return &osDir{path: path}, nil
}

func (d *osDir) Create(name string) (capture.File, error) {
	return os.OpenFile(filepath.Join(d.path, name), os.O_WRONLY|os.O_CREATE|os.O_EXCL|os.O_APPEND, 0o644)
}

func (d *osDir) Rename(from, to string) error {
	return os.Rename(filepath.Join(d.path, from), filepath.Join(d.path, to))
}

func (d *osDir) Sync() error {
	f, err := os.Open(d.path)
	if err != nil {
		return err
	}
	defer f.Close()
	return f.Sync()
}
