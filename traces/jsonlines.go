package traces

import (
	"bytes"
	"errors"
	"fmt"
	"io"
	"strings"
	"unicode/utf8"

	json "github.com/goccy/go-json"
)

// This file cuts text input into lines and JSON values, and describes
// positions in it for errors.

// countLines returns the number of '\n' in p.
func countLines(p []byte) int { return bytes.Count(p, []byte{'\n'}) }

func isSpace(b byte) bool { return b == ' ' || b == '\t' || b == '\r' || b == '\n' }

// isCompleteJSON reports whether line is a complete JSON object or array.
func isCompleteJSON(line []byte) bool {
	return (line[0] == '{' || line[0] == '[') && json.Valid(line)
}

// firstBlock is the size of a blockReader's first block; each next one is
// twice as large up to the block size, so that a small input costs a small
// buffer.
const firstBlock = 32 << 10

// blockReader cuts a stream into blocks of complete lines.
type blockReader struct {
	r        io.Reader
	size     int // block size; the first blocks are smaller (see firstBlock)
	cur      int // size of the next block
	maxLine  int
	maxBytes int64
	name     string
	free     chan []byte // buffers to reuse
	pending  []byte      // bytes read after the last complete line
	line     int64       // number of the first line in pending
	eof      bool
}

// next returns the next block of complete lines (the last one may lack
// its '\n') and the number of its first line; nil at the end of input.
// Every block is a fresh slice that the caller may keep.
func (b *blockReader) next() ([]byte, int64, error) {
	if b.cur == 0 {
		b.cur = min(b.size, firstBlock)
	}
	size := max(b.cur, 2*len(b.pending))
	b.cur = min(2*b.cur, b.size)
	for {
		if b.eof {
			if len(b.pending) == 0 {
				return nil, 0, nil
			}
			if len(b.pending) > b.maxLine {
				return nil, 0, lineLimitError(b.name, b.line, b.maxLine)
			}
			data, line := b.pending, b.line
			b.pending = nil
			b.line += int64(countLines(data))
			return data, line, nil
		}
		var buf []byte
		select {
		case f := <-b.free:
			if cap(f) >= size {
				buf = f[:size]
			}
		default:
		}
		if buf == nil {
			buf = make([]byte, size)
		}
		n := copy(buf, b.pending)
		for empty := 0; n < len(buf) && !b.eof; {
			m, err := b.r.Read(buf[n:])
			n += m
			if m == 0 && err == nil {
				if empty++; empty == 100 {
					return nil, 0, &ParseError{File: b.name, Line: clampLine(b.line), Err: io.ErrNoProgress}
				}
			}
			if errors.Is(err, io.EOF) {
				b.eof = true
			} else if errors.Is(err, errInputTooLarge) {
				return nil, 0, &ParseError{File: b.name, Line: clampLine(b.line), Err: fmt.Errorf("%w: input is larger than %d bytes", ErrLimit, b.maxBytes)}
			} else if err != nil {
				return nil, 0, &ParseError{File: b.name, Line: clampLine(b.line), Err: err}
			}
		}
		buf = buf[:n]
		last := bytes.LastIndexByte(buf, '\n')
		if last < 0 {
			// No complete line yet: the current line is at least n bytes.
			if n > b.maxLine {
				return nil, 0, lineLimitError(b.name, b.line, b.maxLine)
			}
			b.pending = buf
			if !b.eof {
				size = min(2*size, b.maxLine+2)
				if size <= n {
					size = n + 1
				}
			}
			continue
		}
		data := buf[:last+1]
		b.pending = append([]byte(nil), buf[last+1:]...)
		line := b.line
		b.line += int64(countLines(data))
		return data, line, nil
	}
}

func lineLimitError(name string, line int64, limit int) error {
	return &ParseError{File: name, Line: clampLine(line),
		Err: fmt.Errorf("%w: line is longer than %d bytes (raise it with --max-line-bytes)", ErrLimit, limit)}
}

func depthError(name string, rec []byte, line, col int64, at, limit int) error {
	l, c := position(rec, line, col, at)
	return &ParseError{File: name, Line: clampLine(l), Offset: c, Snippet: snippet(rec, at),
		Err: fmt.Errorf("%w: JSON nested deeper than %d levels", ErrLimit, limit)}
}

func clampLine(l int64) int {
	const maxInt = int64(^uint(0) >> 1)
	return int(min(l, maxInt))
}

// position returns the line and byte column of rec[at], where rec[0] is at
// line and col.
func position(rec []byte, line, col int64, at int) (int64, int64) {
	at = max(0, min(at, len(rec)))
	before := rec[:at]
	nl := countLines(before)
	if nl == 0 {
		return line, col + int64(at)
	}
	return line + int64(nl), int64(at - bytes.LastIndexByte(before, '\n'))
}

// scanJSON returns the length of the JSON value at the start of data (all
// of data if it does not end) and, if the value nests deeper than maxDepth,
// the index of the first byte too deep (else -1). It checks nothing but
// nesting and string boundaries; the decoder does the rest.
func scanJSON(data []byte, maxDepth int) (end, tooDeep int) {
	depth := 0
	for i := 0; i < len(data); i++ {
		switch data[i] {
		case '"':
			j := i + 1
			for {
				k := bytes.IndexByte(data[j:], '"')
				if k < 0 {
					return len(data), -1
				}
				j += k
				bs := 0
				for m := j - 1; m > i && data[m] == '\\'; m-- {
					bs++
				}
				if bs%2 == 0 {
					break
				}
				j++
			}
			i = j
			if depth == 0 {
				return i + 1, -1
			}
		case '{', '[':
			depth++
			if depth > maxDepth {
				return i, i
			}
		case '}', ']':
			depth--
			if depth <= 0 {
				return i + 1, -1
			}
		case ' ', '\t', '\r', '\n':
		default:
			if depth == 0 {
				// A bare scalar: it runs to the next whitespace or bracket.
				j := i
				for j < len(data) && !isSpace(data[j]) && data[j] != '{' && data[j] != '[' {
					j++
				}
				return max(j, i+1), -1
			}
		}
	}
	return len(data), -1
}

// snippet returns an escaped excerpt of rec around index at: at most 60
// characters, with control characters and invalid UTF-8 escaped.
func snippet(rec []byte, at int) string {
	const maxLen = 60
	at = max(0, min(at, len(rec)))
	start := max(0, at-20)
	for start > 0 && start < len(rec) && rec[start]&0xC0 == 0x80 {
		start-- // do not begin inside a UTF-8 sequence
	}
	var b strings.Builder
	n := 0
	for i := start; i < len(rec); {
		var piece string
		r, size := utf8.DecodeRune(rec[i:])
		switch {
		case r == '\n':
			piece = `\n`
		case r == '\r':
			piece = `\r`
		case r == '\t':
			piece = `\t`
		case r < 0x20 || r == 0x7f || (r == utf8.RuneError && size <= 1):
			piece = fmt.Sprintf(`\x%02x`, rec[i])
			size = 1
		default:
			piece = string(rec[i : i+size])
		}
		w := utf8.RuneCountInString(piece)
		if n+w > maxLen {
			break
		}
		b.WriteString(piece)
		n += w
		i += size
	}
	return b.String()
}
