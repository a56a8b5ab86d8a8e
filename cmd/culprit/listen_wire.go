package main

import (
	"strconv"
	"strings"
	"time"
	"unicode/utf8"

	"google.golang.org/protobuf/encoding/protowire"
)

// The answers of `culprit listen`, encoded by hand: they are three small
// messages, and the official types would bring the whole protobuf runtime
// (and the gRPC library with them) into every culprit process. Field
// numbers and names are those of opentelemetry-proto's
// collector/trace/v1/trace_service.proto and googleapis'
// google/rpc/status.proto and google/rpc/error_details.proto; the JSON
// forms follow the proto3 JSON mapping (camelCase names, 64-bit integers
// as strings, default values left out). listen_wire_test.go holds them
// byte for byte to what the official types marshal.

// rpcCode is a google.rpc.Code, the status codes of gRPC.
type rpcCode int32

const (
	codeInvalidArgument   rpcCode = 3
	codeResourceExhausted rpcCode = 8
	codeUnimplemented     rpcCode = 12
	codeInternal          rpcCode = 13
	codeUnavailable       rpcCode = 14
)

// retryInfoType is the type URL of google.rpc.RetryInfo in an Any.
const retryInfoType = "type.googleapis.com/google.rpc.RetryInfo"

// appendExportResponse appends an ExportTraceServiceResponse in protobuf:
// partial_success (1) {rejected_spans (1), error_message (2)} when spans
// were rejected, nothing otherwise.
func appendExportResponse(b []byte, rejected int64, msg string) []byte {
	if rejected == 0 && msg == "" {
		return b
	}
	var ps []byte
	if rejected != 0 {
		ps = protowire.AppendTag(ps, 1, protowire.VarintType)
		ps = protowire.AppendVarint(ps, uint64(rejected))
	}
	ps = appendStringField(ps, 2, msg)
	b = protowire.AppendTag(b, 1, protowire.BytesType)
	return protowire.AppendBytes(b, ps)
}

// appendExportResponseJSON is appendExportResponse in JSON.
func appendExportResponseJSON(b []byte, rejected int64, msg string) []byte {
	if rejected == 0 && msg == "" {
		return append(b, "{}"...)
	}
	b = append(b, `{"partialSuccess":{`...)
	sep := false
	if rejected != 0 {
		b = append(b, `"rejectedSpans":"`...)
		b = strconv.AppendInt(b, rejected, 10)
		b = append(b, '"')
		sep = true
	}
	if msg != "" {
		if sep {
			b = append(b, ',')
		}
		b = append(b, `"errorMessage":`...)
		b = appendJSONString(b, msg)
	}
	return append(b, "}}"...)
}

// appendStatus appends a google.rpc.Status in protobuf: code (1), message
// (2) and, when retry is positive, one detail (3): an Any (type_url 1,
// value 2) holding a google.rpc.RetryInfo whose retry_delay (1) is a
// google.protobuf.Duration (seconds 1, nanos 2).
func appendStatus(b []byte, code rpcCode, msg string, retry time.Duration) []byte {
	if code != 0 {
		b = protowire.AppendTag(b, 1, protowire.VarintType)
		b = protowire.AppendVarint(b, uint64(int64(code))) // int32: negative values sign-extend
	}
	b = appendStringField(b, 2, msg)
	if retry <= 0 {
		return b
	}
	var d []byte
	if s := int64(retry / time.Second); s != 0 {
		d = protowire.AppendTag(d, 1, protowire.VarintType)
		d = protowire.AppendVarint(d, uint64(s))
	}
	if ns := int64(retry % time.Second); ns != 0 {
		d = protowire.AppendTag(d, 2, protowire.VarintType)
		d = protowire.AppendVarint(d, uint64(ns))
	}
	ri := protowire.AppendTag(nil, 1, protowire.BytesType)
	ri = protowire.AppendBytes(ri, d)
	anyMsg := appendStringField(nil, 1, retryInfoType)
	anyMsg = protowire.AppendTag(anyMsg, 2, protowire.BytesType)
	anyMsg = protowire.AppendBytes(anyMsg, ri)
	b = protowire.AppendTag(b, 3, protowire.BytesType)
	return protowire.AppendBytes(b, anyMsg)
}

// appendStatusJSON appends a google.rpc.Status without details in JSON.
func appendStatusJSON(b []byte, code rpcCode, msg string) []byte {
	b = append(b, '{')
	if code != 0 {
		b = append(b, `"code":`...)
		b = strconv.AppendInt(b, int64(code), 10)
	}
	if msg != "" {
		if code != 0 {
			b = append(b, ',')
		}
		b = append(b, `"message":`...)
		b = appendJSONString(b, msg)
	}
	return append(b, '}')
}

// appendStringField appends a string field unless it is empty. Protobuf
// strings must be UTF-8 (decoders refuse others), so invalid bytes
// become U+FFFD.
func appendStringField(b []byte, num protowire.Number, s string) []byte {
	if s == "" {
		return b
	}
	b = protowire.AppendTag(b, num, protowire.BytesType)
	return protowire.AppendString(b, validUTF8(s))
}

func validUTF8(s string) string {
	if utf8.ValidString(s) {
		return s
	}
	return strings.ToValidUTF8(s, "\uFFFD")
}

// appendJSONString appends s as a JSON string escaped as the protobuf
// JSON encoder escapes: quote, backslash and control characters only,
// with the short forms where JSON has them.
func appendJSONString(b []byte, s string) []byte {
	const hex = "0123456789abcdef"
	b = append(b, '"')
	for _, r := range validUTF8(s) {
		switch {
		case r == '"' || r == '\\':
			b = append(b, '\\', byte(r))
		case r >= ' ':
			b = utf8.AppendRune(b, r)
		case r == '\b':
			b = append(b, `\b`...)
		case r == '\f':
			b = append(b, `\f`...)
		case r == '\n':
			b = append(b, `\n`...)
		case r == '\r':
			b = append(b, `\r`...)
		case r == '\t':
			b = append(b, `\t`...)
		default:
			b = append(b, '\\', 'u', '0', '0', hex[r>>4], hex[r&0xf])
		}
	}
	return append(b, '"')
}
