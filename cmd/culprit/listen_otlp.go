package main

import (
	"bytes"
	"compress/gzip"
	"errors"
	"fmt"
	"io"
	"mime"
	"net/http"
	"strconv"
	"strings"
	"sync"
	"sync/atomic"
	"time"

	"github.com/culprithq/culprit/traces"
	"github.com/culprithq/culprit/traces/capture"
)

// This file is the receiving side of `culprit listen`: the OTLP/HTTP and
// OTLP/gRPC trace endpoints, answering as the OTLP specification
// (opentelemetry-proto docs/specification.md) says: success, partial
// success with the rejected span count, 400/INVALID_ARGUMENT for bodies
// that do not decode, 413/RESOURCE_EXHAUSTED over the size limit, 415 for
// other media types, and 503 with Retry-After / UNAVAILABLE with a retry
// delay when the receiver cannot take the request now (too many in
// flight, stopping, the disk failing), so that exporters retry. The
// gRPC transport is in listen_grpc.go, the answers' encoding in
// listen_wire.go.

// retryAfter is the delay that retryable refusals suggest.
const retryAfter = time.Second

// receiver checks and stores export requests.
type receiver struct {
	w        *capture.Writer
	opts     *listenOptions
	errOut   io.Writer
	slots    chan struct{} // one per request in flight
	checkers sync.Pool
	bufs     sync.Pool
	gzips    sync.Pool // *gzip.Reader

	mu       sync.Mutex // guards stopping against inflight.Add
	stopping bool
	inflight sync.WaitGroup

	// showStatus: the status line is shown, and ranks the recent requests.
	showStatus bool
	recent     recentRequests

	requests, spans, profiles, refused atomic.Int64
	lastDiskWarn                       atomic.Int64 // unix seconds
	errMu                              sync.Mutex   // one writer of errOut at a time
}

func newReceiver(w *capture.Writer, opts *listenOptions, errOut io.Writer) *receiver {
	rc := &receiver{w: w, opts: opts, errOut: errOut, slots: make(chan struct{}, opts.MaxInflight)}
	topts := traces.Options{Limits: opts.analysis.Limits}
	rc.checkers.New = func() any { return traces.NewRequestChecker(topts) }
	return rc
}

// refusal is why a request is not taken, with the answer it gets.
type refusal struct {
	httpStatus int
	code       rpcCode
	msg        string
}

func unavailable(msg string) *refusal {
	return &refusal{httpStatus: http.StatusServiceUnavailable, code: codeUnavailable, msg: msg}
}

func invalid(msg string) *refusal {
	return &refusal{httpStatus: http.StatusBadRequest, code: codeInvalidArgument, msg: msg}
}

func tooLarge(msg string) *refusal {
	return &refusal{httpStatus: http.StatusRequestEntityTooLarge, code: codeResourceExhausted, msg: msg}
}

// enter admits a request unless the receiver is stopping or full; leave
// must follow a nil return.
func (rc *receiver) enter() *refusal {
	rc.mu.Lock()
	if rc.stopping {
		rc.mu.Unlock()
		return unavailable("culprit is stopping; retry later")
	}
	rc.inflight.Add(1)
	rc.mu.Unlock()
	select {
	case rc.slots <- struct{}{}:
		return nil
	default:
		rc.inflight.Done()
		return unavailable(fmt.Sprintf("too many requests in flight (%d); retry later", cap(rc.slots)))
	}
}

func (rc *receiver) leave() {
	<-rc.slots
	rc.inflight.Done()
}

// stop makes new requests get a retryable refusal.
func (rc *receiver) stop() {
	rc.mu.Lock()
	rc.stopping = true
	rc.mu.Unlock()
}

// drain waits for the requests in flight.
func (rc *receiver) drain() { rc.inflight.Wait() }

// take checks one request and stores it before returning: the caller
// acknowledges only after a nil refusal.
func (rc *receiver) take(data []byte, json bool) (traces.CheckResult, *refusal) {
	k := rc.checkers.Get().(*traces.RequestChecker)
	res, err := k.Check(data, json)
	rc.checkers.Put(k)
	if err != nil {
		rc.refused.Add(1)
		return res, invalid(strings.TrimPrefix(err.Error(), "request: "))
	}
	if res.Spans == 0 {
		return res, nil // an empty request: success, nothing to store
	}
	t := capture.TraceProto
	if json {
		t = capture.TraceJSON
	}
	if err := rc.w.Append(t, data); err != nil {
		rc.diskProblem(err)
		return res, unavailable("culprit cannot store the request (" + err.Error() + "); retry later")
	}
	rc.requests.Add(1)
	rc.spans.Add(int64(res.Spans - res.Rejected))
	if rc.showStatus {
		rc.recent.add(data, json)
	}
	return res, nil
}

// diskProblem says on stderr, at most every 10 s, that storing fails.
func (rc *receiver) diskProblem(err error) {
	now := time.Now().Unix()
	if last := rc.lastDiskWarn.Load(); now-last < 10 || !rc.lastDiskWarn.CompareAndSwap(last, now) {
		return
	}
	rc.errMu.Lock()
	defer rc.errMu.Unlock()
	fmt.Fprintf(rc.errOut, "\nculprit: error: cannot write the capture: %v; answering 503/UNAVAILABLE until it works again (free disk space)\n", err)
}

// ---------------------------------------------------------------------
// OTLP/HTTP

func (rc *receiver) httpHandler() http.Handler {
	mux := http.NewServeMux()
	mux.HandleFunc("/v1/traces", rc.serveHTTP)
	return mux
}

// Media types of OTLP/HTTP bodies.
const (
	mediaProto = "application/x-protobuf"
	mediaJSON  = "application/json"
)

func (rc *receiver) serveHTTP(w http.ResponseWriter, r *http.Request) {
	if r.Method != http.MethodPost {
		w.Header().Set("Allow", http.MethodPost)
		writeHTTPStatus(w, mediaJSON, &refusal{httpStatus: http.StatusMethodNotAllowed, code: codeUnimplemented, msg: "use POST"})
		return
	}
	media, _, _ := mime.ParseMediaType(r.Header.Get("Content-Type"))
	var json bool
	switch media {
	case mediaProto:
	case mediaJSON:
		json = true
	default:
		writeHTTPStatus(w, mediaJSON, &refusal{httpStatus: http.StatusUnsupportedMediaType, code: codeInvalidArgument,
			msg: fmt.Sprintf("unsupported Content-Type %q; use %s or %s", r.Header.Get("Content-Type"), mediaProto, mediaJSON)})
		return
	}
	if ref := rc.enter(); ref != nil {
		writeHTTPStatus(w, media, ref)
		return
	}
	defer rc.leave()
	buf := rc.getBuf()
	defer rc.putBuf(buf)
	body, ref := rc.readBody(w, r, buf)
	if ref != nil {
		writeHTTPStatus(w, media, ref)
		return
	}
	res, ref := rc.take(body, json)
	if ref != nil {
		writeHTTPStatus(w, media, ref)
		return
	}
	w.Header().Set("Content-Type", media)
	w.WriteHeader(http.StatusOK)
	w.Write(exportResponse(nil, res, json))
}

// readBody reads a request's body, decompressed, within --max-body.
func (rc *receiver) readBody(w http.ResponseWriter, r *http.Request, buf *bytes.Buffer) ([]byte, *refusal) {
	max := rc.opts.MaxBody
	if r.ContentLength > max {
		return nil, tooLarge(fmt.Sprintf("request body of %d bytes exceeds the limit of %d (--max-body)", r.ContentLength, max))
	}
	var body io.Reader = http.MaxBytesReader(w, r.Body, max)
	switch enc := strings.ToLower(strings.TrimSpace(r.Header.Get("Content-Encoding"))); enc {
	case "", "identity":
	case "gzip":
		zr, err := rc.gzipReader(body)
		if err != nil {
			return nil, readRefusal(err, max)
		}
		defer rc.gzips.Put(zr)
		body = zr
	default:
		return nil, &refusal{httpStatus: http.StatusUnsupportedMediaType, code: codeInvalidArgument,
			msg: fmt.Sprintf("unsupported Content-Encoding %q; use gzip or none", enc)}
	}
	// Decompressed, the body must fit the limit too (a gzip bomb).
	n, err := buf.ReadFrom(io.LimitReader(body, max+1))
	if err != nil {
		return nil, readRefusal(err, max)
	}
	if n > max {
		return nil, tooLarge(fmt.Sprintf("request body decompresses to more than %d bytes (--max-body)", max))
	}
	return buf.Bytes(), nil
}

// readRefusal answers a body that could not be read.
func readRefusal(err error, max int64) *refusal {
	var mbe *http.MaxBytesError
	switch {
	case errors.As(err, &mbe):
		return tooLarge(fmt.Sprintf("request body exceeds the limit of %d bytes (--max-body)", max))
	case errors.Is(err, gzip.ErrHeader), errors.Is(err, gzip.ErrChecksum), errors.Is(err, io.ErrUnexpectedEOF):
		return invalid("request body is not valid gzip: " + err.Error())
	}
	// A client that stopped sending (timeout, reset): let it retry.
	return unavailable("reading the request body: " + err.Error())
}

func (rc *receiver) getBuf() *bytes.Buffer {
	if b, ok := rc.bufs.Get().(*bytes.Buffer); ok {
		b.Reset()
		return b
	}
	return new(bytes.Buffer)
}

func (rc *receiver) putBuf(b *bytes.Buffer) {
	if b.Cap() <= 4<<20 {
		rc.bufs.Put(b)
	}
}

// exportResponse appends the answer to a stored request, in protobuf or
// JSON: partial success when spans will be skipped.
func exportResponse(b []byte, res traces.CheckResult, json bool) []byte {
	var rejected int64
	var msg string
	if res.Rejected > 0 {
		rejected = int64(res.Rejected)
		msg = fmt.Sprintf("%d of %d spans have invalid IDs and will not be analysed; the first: %s", res.Rejected, res.Spans, res.Message)
	}
	if json {
		return appendExportResponseJSON(b, rejected, msg)
	}
	return appendExportResponse(b, rejected, msg)
}

// writeHTTPStatus answers with a google.rpc.Status body in the request's
// encoding, and Retry-After on 503.
func writeHTTPStatus(w http.ResponseWriter, media string, ref *refusal) {
	var out []byte
	if media == mediaProto {
		out = appendStatus(nil, ref.code, ref.msg, 0)
	} else {
		media = mediaJSON
		out = appendStatusJSON(nil, ref.code, ref.msg)
	}
	if ref.httpStatus == http.StatusServiceUnavailable {
		w.Header().Set("Retry-After", strconv.Itoa(int(retryAfter/time.Second)))
	}
	w.Header().Set("Content-Type", media)
	w.WriteHeader(ref.httpStatus)
	w.Write(out)
}
