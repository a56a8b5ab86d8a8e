package capture

import (
	"bufio"
	"bytes"
	"encoding/binary"
	"errors"
	"fmt"
	"hash/crc32"
	"io"
)

// Magic starts every segment file.
const Magic = "\x89culpcap\r\n\x1a\n"

// Version is the segment format version that this package writes and reads.
const Version = 1

// HeaderSize is the size of a segment's header in bytes.
const HeaderSize = 40

// recordHead is the size of a record's length, checksum and type.
const recordHead = 9

// Ext is the file name extension of segments.
const Ext = ".culprit-capture"

// Type is a record's type.
type Type uint8

// Record types.
const (
	TraceProto Type = 1 // an OTLP ExportTraceServiceRequest, binary protobuf
	TraceJSON  Type = 2 // an OTLP ExportTraceServiceRequest, OTLP/JSON
	Profile    Type = 3 // a pprof profile as served (usually gzipped)
)

// castagnoli is the CRC-32C table (Castagnoli, Bräuer and Herrmann,
// "Optimization of cyclic redundancy-check codes with 24 and 32 parity
// bits", IEEE Transactions on Communications, 1993).
var castagnoli = crc32.MakeTable(crc32.Castagnoli)

// Header is what a segment's header says.
type Header struct {
	Instance [16]byte // the listener run that wrote the segment
	Sequence uint64   // the segment's number in that run, from 1
}

// SegmentName returns the file name of segment seq.
func SegmentName(seq uint64) string { return fmt.Sprintf("seg-%06d%s", seq, Ext) }

// appendHeader appends h encoded.
func appendHeader(b []byte, h Header) []byte {
	b = append(b, Magic...)
	b = binary.LittleEndian.AppendUint16(b, Version)
	b = append(b, 0, 0)
	b = append(b, h.Instance[:]...)
	return binary.LittleEndian.AppendUint64(b, h.Sequence)
}

// IsSegment reports whether the first bytes of an input are a segment's
// magic.
func IsSegment(prefix []byte) bool { return bytes.HasPrefix(prefix, []byte(Magic)) }

// AppendRecord appends one record of type t holding payload.
func AppendRecord(b []byte, t Type, payload []byte) []byte {
	b = binary.LittleEndian.AppendUint32(b, uint32(len(payload)))
	crc := crc32.Update(0, castagnoli, []byte{byte(t)})
	crc = crc32.Update(crc, castagnoli, payload)
	b = binary.LittleEndian.AppendUint32(b, crc)
	b = append(b, byte(t))
	return append(b, payload...)
}

// Record is one record read from a segment.
type Record struct {
	Type    Type
	Payload []byte
	Offset  int64 // of the record's first byte in the segment
}

// TornError is a torn last record: the segment ends inside it, or it
// fails its checksum and nothing but zero bytes follow it. Everything
// before Offset was read.
type TornError struct {
	Offset int64
	Why    string
}

func (e *TornError) Error() string {
	return fmt.Sprintf("torn record at byte %d (%s), skipped with the rest of the segment; the records before it are read", e.Offset, e.Why)
}

// FormatError is a segment that is not one, or is corrupt before its end.
type FormatError struct {
	Offset int64
	Why    string
}

func (e *FormatError) Error() string {
	return fmt.Sprintf("byte %d: %s", e.Offset, e.Why)
}

// Reader reads the records of one segment.
type Reader struct {
	Header Header
	r      *bufio.Reader
	off    int64
	max    int64
	done   bool
}

// NewReader reads a segment's header from r. Records longer than
// maxRecord bytes are corrupt.
func NewReader(r io.Reader, maxRecord int64) (*Reader, error) {
	br, ok := r.(*bufio.Reader)
	if !ok {
		br = bufio.NewReaderSize(r, 64<<10)
	}
	var h [HeaderSize]byte
	if n, err := io.ReadFull(br, h[:]); err != nil {
		if n >= len(Magic) && IsSegment(h[:n]) {
			return nil, &FormatError{Offset: int64(n), Why: "capture segment header cut short"}
		}
		return nil, &FormatError{Why: "not a capture segment (no magic)"}
	}
	if !IsSegment(h[:]) {
		return nil, &FormatError{Why: "not a capture segment (no magic)"}
	}
	if v := binary.LittleEndian.Uint16(h[12:]); v != Version {
		return nil, &FormatError{Offset: 12, Why: fmt.Sprintf("capture segment version %d; this culprit reads version %d", v, Version)}
	}
	rd := &Reader{r: br, off: HeaderSize, max: maxRecord}
	copy(rd.Header.Instance[:], h[16:32])
	rd.Header.Sequence = binary.LittleEndian.Uint64(h[32:])
	return rd, nil
}

// Next returns the next record: io.EOF after the last, a *TornError for
// a torn last record (and io.EOF after it), a *FormatError for a corrupt
// record with more data after it. Payloads are fresh slices.
func (r *Reader) Next() (Record, error) {
	if r.done {
		return Record{}, io.EOF
	}
	at := r.off
	var h [recordHead]byte
	n, err := io.ReadFull(r.r, h[:])
	switch {
	case errors.Is(err, io.EOF):
		r.done = true
		return Record{}, io.EOF
	case errors.Is(err, io.ErrUnexpectedEOF):
		return r.torn(at, fmt.Sprintf("the segment ends %d bytes into its head", n))
	case err != nil:
		return Record{}, err
	}
	length := int64(binary.LittleEndian.Uint32(h[:4]))
	if length > r.max {
		if r.restIsZero() && allZero(h[:]) {
			return r.torn(at, "zero bytes")
		}
		return r.corrupt(at, fmt.Sprintf("record length %d exceeds the limit of %d bytes", length, r.max))
	}
	payload, m, err := readN(r.r, length)
	if err != nil {
		if errors.Is(err, io.ErrUnexpectedEOF) || errors.Is(err, io.EOF) {
			return r.torn(at, fmt.Sprintf("the segment ends %d bytes into its %d-byte payload", m, length))
		}
		return Record{}, err
	}
	crc := crc32.Update(0, castagnoli, h[8:9])
	crc = crc32.Update(crc, castagnoli, payload)
	if crc != binary.LittleEndian.Uint32(h[4:8]) {
		if r.restIsZero() {
			return r.torn(at, "checksum mismatch")
		}
		return r.corrupt(at, "record checksum mismatch")
	}
	r.off += recordHead + length
	return Record{Type: Type(h[8]), Payload: payload, Offset: at}, nil
}

// readN reads n bytes. A large n (a length field that a crash left
// half-written says anything up to 4 GiB) is not allocated up front: the
// buffer grows with the data that is there.
func readN(r io.Reader, n int64) ([]byte, int64, error) {
	if n <= 1<<20 {
		buf := make([]byte, n)
		m, err := io.ReadFull(r, buf)
		return buf, int64(m), err
	}
	var b bytes.Buffer
	m, err := b.ReadFrom(io.LimitReader(r, n))
	if err == nil && m < n {
		err = io.ErrUnexpectedEOF
	}
	return b.Bytes(), m, err
}

func (r *Reader) torn(at int64, why string) (Record, error) {
	r.done = true
	return Record{}, &TornError{Offset: at, Why: why}
}

func (r *Reader) corrupt(at int64, why string) (Record, error) {
	r.done = true
	return Record{}, &FormatError{Offset: at, Why: "corrupt capture segment: " + why}
}

// restIsZero reads the rest of the segment and reports whether it holds
// only zero bytes (space a file system allocated but no write filled).
func (r *Reader) restIsZero() bool {
	var buf [32 << 10]byte
	for {
		n, err := r.r.Read(buf[:])
		if !allZero(buf[:n]) {
			return false
		}
		if err != nil {
			return errors.Is(err, io.EOF)
		}
	}
}

func allZero(b []byte) bool {
	for _, c := range b {
		if c != 0 {
			return false
		}
	}
	return true
}
