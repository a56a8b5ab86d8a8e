package traces

import (
	"bytes"

	"github.com/culprithq/culprit/traces/capture"
)

// This file decides the format of an input from its first bytes: one
// function, Sniff, used by every reader, over an ordered table of formats.

// Formats that Sniff tells apart (Input.Format names the formats read).
const (
	// FormatGzip is a gzip stream (RFC 1952), unwrapped before sniffing
	// its contents.
	FormatGzip = "gzip"
	// FormatPprof is a pprof profile (profile.proto, or a legacy text
	// profile that the pprof library reads).
	FormatPprof = "pprof"
	// FormatUTF16 is text in UTF-16, which no reader takes.
	FormatUTF16 = "utf-16"
)

// sniffPrefix is how many bytes of an input Sniff is given at most.
const sniffPrefix = 512

// format is one entry of the sniffing table: a format and the test of
// whether an input's first bytes look like it.
type format struct {
	name  string
	looks func(prefix []byte) bool
}

// formats is the sniffing table, most specific first: the first entry
// whose test accepts the prefix names the format. To read a new format,
// add its entry before the ones that would also accept it, and its reader
// to Loader.add (DEVELOPERS.md, "Adding an input format").
var formats = []format{
	{FormatGzip, looksLikeGzip},
	{FormatCapture, capture.IsSegment},
	{FormatUTF16, looksLikeUTF16},
	{FormatExecTrace, LooksLikeExecTrace},
	{FormatOTLPJSON, looksLikeJSON},
	{FormatOTLPProto, LooksLikeOTLPProto},
	// The pprof library reads protobuf and legacy text profiles, and
	// words the error for anything else: it takes the rest.
	{FormatPprof, func([]byte) bool { return true }},
}

// Sniff returns the format of an input whose first bytes (up to 512, all
// of a shorter input) are prefix, or "" for an empty one.
func Sniff(prefix []byte) string {
	if len(prefix) == 0 {
		return ""
	}
	for _, f := range formats {
		if f.looks(prefix) {
			return f.name
		}
	}
	return ""
}

var gzipMagic = []byte{0x1f, 0x8b}

// looksLikeUTF16 accepts a UTF-16 byte order mark (either byte order).
func looksLikeUTF16(prefix []byte) bool {
	return bytes.HasPrefix(prefix, []byte{0xff, 0xfe}) || bytes.HasPrefix(prefix, []byte{0xfe, 0xff})
}

func looksLikeGzip(prefix []byte) bool { return bytes.HasPrefix(prefix, gzipMagic) }

// looksLikeJSON accepts JSON text: an object or array after an optional
// UTF-8 byte order mark and whitespace (one document, or JSON lines), or
// text with a line that starts one (JSON lines whose first line is
// broken). Binary data (control characters but whitespace) is not JSON.
func looksLikeJSON(prefix []byte) bool {
	prefix = bytes.TrimPrefix(prefix, []byte(utf8BOM))
	i := 0
	for i < len(prefix) && isSpace(prefix[i]) {
		i++
	}
	if i == len(prefix) {
		return false
	}
	if prefix[i] == '{' || prefix[i] == '[' {
		return true
	}
	for _, c := range prefix {
		if c < ' ' && !isSpace(c) || c == 0x7f {
			return false
		}
	}
	for _, l := range bytes.Split(prefix, []byte{'\n'})[1:] {
		if l = bytes.TrimLeft(l, " \t\r"); len(l) > 0 && (l[0] == '{' || l[0] == '[') {
			return true
		}
	}
	return false
}

// jsonLayout decides whether JSON text holds JSON lines (one value a line)
// or documents spanning lines, from its first non-blank lines in head: it
// is JSON lines when the first or the second is a complete JSON value (the
// second, so that a broken first line does not turn JSON lines into one
// broken document: a pretty-printed document's second line is never a
// complete value). decided is false when head holds too few lines to
// tell, unless eof says there are no more.
func jsonLayout(head []byte, eof bool) (lines, decided bool) {
	var first []byte
	for len(head) > 0 {
		i := bytes.IndexByte(head, '\n')
		var l []byte
		if i < 0 {
			if !eof {
				break // the line may go on
			}
			l, head = head, nil
		} else {
			l, head = head[:i], head[i+1:]
		}
		if l = bytes.TrimSpace(l); len(l) == 0 {
			continue
		}
		if first == nil {
			if isCompleteJSON(l) {
				return true, true
			}
			first = l
			continue
		}
		return isCompleteJSON(l), true
	}
	if eof {
		return first != nil && isCompleteJSON(first), true
	}
	return false, false
}
