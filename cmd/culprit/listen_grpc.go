package main

import (
	"bytes"
	"compress/gzip"
	"encoding/base64"
	"encoding/binary"
	"errors"
	"fmt"
	"io"
	"mime"
	"net/http"
	"strconv"
	"strings"
	"time"

	"github.com/culprithq/culprit/traces"
)

// OTLP/gRPC on the standard library's HTTP/2 server: the unary call
// TraceService/Export as the gRPC protocol over HTTP/2 defines it
// (grpc/grpc, doc/PROTOCOL-HTTP2.md). A request is a POST of content
// type application/grpc[+proto] carrying one length-prefixed message (a
// compressed-flag byte, a 4-byte big-endian length, the message),
// compressed with the grpc-encoding header's algorithm when the flag is
// 1. The answer is the response headers, one length-prefixed message and
// the trailers grpc-status and grpc-message; a refusal is a Trailers-Only
// answer (one HEADERS frame ending the stream) carrying the status, and
// for UNAVAILABLE a grpc-status-details-bin with the retry delay. gRPC
// clients without TLS speak HTTP/2 with prior knowledge, which the
// server accepts with Protocols set to unencrypted HTTP/2 only.

// grpcExportPath is the path of TraceService/Export
// (opentelemetry-proto collector/trace/v1/trace_service.proto).
const grpcExportPath = "/opentelemetry.proto.collector.trace.v1.TraceService/Export"

// grpcAcceptEncoding names the message encodings the receiver reads
// besides identity.
const grpcAcceptEncoding = "gzip"

// grpcServer is the HTTP/2 server of OTLP/gRPC with the limits of
// --max-body, --max-inflight, --read-timeout and --idle-timeout.
func (rc *receiver) grpcServer() *http.Server {
	var protos http.Protocols
	protos.SetUnencryptedHTTP2(true)
	o := rc.opts
	return &http.Server{
		Handler:   http.HandlerFunc(rc.serveGRPC),
		Protocols: &protos,
		// The connection preface must come within the read timeout; each
		// call's message too (HTTP/2 applies ReadTimeout per stream).
		ReadHeaderTimeout: o.ReadTimeout,
		ReadTimeout:       o.ReadTimeout,
		WriteTimeout:      o.ReadTimeout + 30*time.Second,
		IdleTimeout:       o.IdleTimeout,
		MaxHeaderBytes:    64 << 10,
		HTTP2:             &http.HTTP2Config{MaxConcurrentStreams: o.MaxInflight},
	}
}

// serveGRPC answers one call.
func (rc *receiver) serveGRPC(w http.ResponseWriter, r *http.Request) {
	w.Header().Set("Grpc-Accept-Encoding", grpcAcceptEncoding)
	if r.Method != http.MethodPost {
		w.Header().Set("Allow", http.MethodPost)
		writeGRPCStatus(w, http.StatusMethodNotAllowed, &refusal{code: codeInternal, msg: fmt.Sprintf("method %s; gRPC calls are POST", r.Method)})
		return
	}
	media, _, _ := mime.ParseMediaType(r.Header.Get("Content-Type"))
	if media != "application/grpc" && media != "application/grpc+proto" {
		writeGRPCStatus(w, http.StatusUnsupportedMediaType, &refusal{code: codeInvalidArgument,
			msg: fmt.Sprintf("unsupported content-type %q; use application/grpc or application/grpc+proto", r.Header.Get("Content-Type"))})
		return
	}
	if r.URL.Path != grpcExportPath {
		writeGRPCStatus(w, http.StatusOK, &refusal{code: codeUnimplemented,
			msg: fmt.Sprintf("unknown method %s; culprit serves %s", r.URL.Path, grpcExportPath)})
		return
	}
	enc := r.Header.Get("Grpc-Encoding")
	switch enc {
	case "", "identity", "gzip":
	default:
		writeGRPCStatus(w, http.StatusOK, &refusal{code: codeUnimplemented,
			msg: fmt.Sprintf("grpc-encoding %q is not supported; use %s or identity", enc, grpcAcceptEncoding)})
		return
	}
	if ref := rc.enter(); ref != nil {
		writeGRPCStatus(w, http.StatusOK, ref)
		return
	}
	defer rc.leave()
	buf := rc.getBuf()
	defer rc.putBuf(buf)
	data, ref := rc.readGRPCMessage(r.Body, enc == "gzip", buf)
	if ref == nil {
		var res traces.CheckResult
		res, ref = rc.take(data, false)
		if ref == nil {
			writeGRPCResponse(w, exportResponse(nil, res, false))
			return
		}
	}
	writeGRPCStatus(w, http.StatusOK, ref)
}

// Errors of the length-prefixed framing.
var (
	errShortPrefix  = errors.New("the message's 5-byte prefix is cut short")
	errShortMessage = errors.New("the message is shorter than its length prefix says")
)

// readGRPCMessage reads the one length-prefixed message of a unary call
// into buf, decompressed when its flag says so (gzip: the only
// encoding serveGRPC lets through), within --max-body before and after
// decompression.
func (rc *receiver) readGRPCMessage(body io.Reader, gzipped bool, buf *bytes.Buffer) ([]byte, *refusal) {
	max := rc.opts.MaxBody
	var prefix [5]byte
	if _, err := io.ReadFull(body, prefix[:]); err != nil {
		switch err {
		case io.EOF:
			return nil, &refusal{code: codeInternal, msg: "the call carries no request message"}
		case io.ErrUnexpectedEOF:
			return nil, &refusal{code: codeInternal, msg: errShortPrefix.Error()}
		}
		return nil, grpcReadRefusal(err)
	}
	n := int64(binary.BigEndian.Uint32(prefix[1:]))
	switch {
	case prefix[0] > 1:
		return nil, &refusal{code: codeInternal, msg: fmt.Sprintf("the message's compressed flag is %d, not 0 or 1", prefix[0])}
	case n > max:
		return nil, &refusal{code: codeResourceExhausted, msg: fmt.Sprintf("request message of %d bytes exceeds the limit of %d (--max-body)", n, max)}
	case prefix[0] == 1 && !gzipped:
		return nil, &refusal{code: codeInternal, msg: "the message is flagged compressed but the call has no grpc-encoding"}
	}
	msg := &messageReader{r: body, n: n}
	var in io.Reader = msg
	if prefix[0] == 1 {
		zr, err := rc.gzipReader(msg)
		if err != nil {
			return nil, grpcGzipRefusal(err)
		}
		defer rc.gzips.Put(zr)
		in = io.LimitReader(zr, max+1)
	}
	// Grow by what arrives, not by what the prefix claims.
	buf.Grow(int(min(n, 1<<20)) + bytes.MinRead)
	got, err := buf.ReadFrom(in)
	switch {
	case err != nil && prefix[0] == 1:
		return nil, grpcGzipRefusal(err)
	case err != nil:
		return nil, grpcReadRefusal(err)
	case got > max:
		return nil, &refusal{code: codeResourceExhausted, msg: fmt.Sprintf("request message decompresses to more than %d bytes (--max-body)", max)}
	}
	// A unary call has one message: the stream must end here.
	var one [1]byte
	k, err := io.ReadFull(body, one[:])
	if k > 0 {
		return nil, &refusal{code: codeInternal, msg: "the call carries more than one request message"}
	}
	if err != io.EOF {
		return nil, grpcReadRefusal(err)
	}
	return buf.Bytes(), nil
}

// messageReader reads the n bytes of one message.
type messageReader struct {
	r io.Reader
	n int64
}

func (m *messageReader) Read(p []byte) (int, error) {
	if m.n <= 0 {
		return 0, io.EOF
	}
	if int64(len(p)) > m.n {
		p = p[:m.n]
	}
	k, err := m.r.Read(p)
	m.n -= int64(k)
	if err == io.EOF && m.n > 0 {
		err = errShortMessage
	}
	return k, err
}

// gzipReader returns a pooled gzip reader reading r.
func (rc *receiver) gzipReader(r io.Reader) (*gzip.Reader, error) {
	if zr, ok := rc.gzips.Get().(*gzip.Reader); ok {
		if err := zr.Reset(r); err != nil {
			rc.gzips.Put(zr)
			return nil, err
		}
		return zr, nil
	}
	return gzip.NewReader(r)
}

// grpcGzipRefusal answers a compressed message that could not be read.
func grpcGzipRefusal(err error) *refusal {
	switch {
	case errors.Is(err, errShortMessage):
		return &refusal{code: codeInternal, msg: err.Error()}
	case err == io.EOF, errors.Is(err, gzip.ErrHeader), errors.Is(err, gzip.ErrChecksum), errors.Is(err, io.ErrUnexpectedEOF):
		return invalid("request message is not valid gzip: " + err.Error())
	}
	return grpcReadRefusal(err)
}

// grpcReadRefusal answers a message that could not be read: cut short
// by its prefix, or a client that stopped sending (timeout, reset),
// which may retry.
func grpcReadRefusal(err error) *refusal {
	if errors.Is(err, errShortMessage) {
		return &refusal{code: codeInternal, msg: err.Error()}
	}
	return unavailable("reading the request message: " + err.Error())
}

// writeGRPCResponse answers a call with one uncompressed message and
// the OK status.
func writeGRPCResponse(w http.ResponseWriter, msg []byte) {
	frame := make([]byte, 5, 5+len(msg))
	binary.BigEndian.PutUint32(frame[1:], uint32(len(msg)))
	frame = append(frame, msg...)
	h := w.Header()
	h.Set("Content-Type", "application/grpc")
	h.Set("Trailer", "Grpc-Status")
	w.WriteHeader(http.StatusOK)
	w.Write(frame)
	h.Set("Grpc-Status", "0")
}

// writeGRPCStatus refuses a call Trailers-Only: the status in the
// response headers, which end the stream. UNAVAILABLE carries the retry
// delay in grpc-status-details-bin: a google.rpc.Status with a
// google.rpc.RetryInfo detail, in base64 (binary headers end in -bin).
func writeGRPCStatus(w http.ResponseWriter, httpStatus int, ref *refusal) {
	h := w.Header()
	h.Set("Content-Type", "application/grpc")
	h.Set("Grpc-Status", strconv.Itoa(int(ref.code)))
	if ref.msg != "" {
		h.Set("Grpc-Message", percentEncode(ref.msg))
	}
	if ref.code == codeUnavailable {
		h.Set("Grpc-Status-Details-Bin", base64.RawStdEncoding.EncodeToString(appendStatus(nil, ref.code, ref.msg, retryAfter)))
	}
	w.WriteHeader(httpStatus)
}

// percentEncode encodes grpc-message: UTF-8 bytes outside printable
// ASCII, and '%' itself, as %XX.
func percentEncode(s string) string {
	s = validUTF8(s)
	var b strings.Builder
	for i := 0; i < len(s); i++ {
		if c := s[i]; c >= ' ' && c <= '~' && c != '%' {
			b.WriteByte(c)
		} else {
			fmt.Fprintf(&b, "%%%02X", c)
		}
	}
	return b.String()
}
