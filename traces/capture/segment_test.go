package capture

import (
	"bytes"
	"errors"
	"fmt"
	"hash/crc32"
	"io"
	"os"
	"sync"
	"testing"
)

// memDir is a Dir in memory whose writes can be made to fail.
type memDir struct {
	mu    sync.Mutex
	files map[string]*memFile
	order []string
	fail  func(name string, p []byte) error // nil: writes succeed
}

type memFile struct {
	d      *memDir
	name   string
	data   []byte
	synced int
	closed bool
}

func newMemDir() *memDir { return &memDir{files: map[string]*memFile{}} }

func (d *memDir) Create(name string) (File, error) {
	d.mu.Lock()
	defer d.mu.Unlock()
	if _, ok := d.files[name]; ok {
		return nil, os.ErrExist
	}
	f := &memFile{d: d, name: name}
	d.files[name] = f
	d.order = append(d.order, name)
	return f, nil
}

func (d *memDir) Sync() error { return nil }

func (d *memDir) Rename(from, to string) error {
	d.mu.Lock()
	defer d.mu.Unlock()
	f, ok := d.files[from]
	if !ok {
		return os.ErrNotExist
	}
	delete(d.files, from)
	f.name = to
	d.files[to] = f
	for i, n := range d.order {
		if n == from {
			d.order[i] = to
		}
	}
	return nil
}

func (f *memFile) Write(p []byte) (int, error) {
	if f.d.fail != nil {
		if err := f.d.fail(f.name, p); err != nil {
			// A short write, as a full disk makes.
			f.data = append(f.data, p[:len(p)/2]...)
			return len(p) / 2, err
		}
	}
	f.data = append(f.data, p...)
	return len(p), nil
}

func (f *memFile) Sync() error { f.synced = len(f.data); return nil }

func (f *memFile) Truncate(n int64) error { f.data = f.data[:n]; return nil }

func (f *memFile) Close() error { f.closed = true; return nil }

// readAll reads a segment, returning its payloads and the error that
// ended it (nil at a clean end).
func readAll(t *testing.T, data []byte) ([]string, error) {
	t.Helper()
	r, err := NewReader(bytes.NewReader(data), 1<<20)
	if err != nil {
		return nil, err
	}
	var out []string
	for {
		rec, err := r.Next()
		if errors.Is(err, io.EOF) {
			return out, nil
		}
		if err != nil {
			return out, err
		}
		out = append(out, fmt.Sprintf("%d:%s", rec.Type, rec.Payload))
	}
}

func TestWriterRotatesAndReads(t *testing.T) {
	d := newMemDir()
	w := NewWriter(d, WriterOptions{SegmentBytes: 200, SyncEach: true, Instance: [16]byte{1, 2, 3}})
	var want []string
	for i := range 40 {
		p := fmt.Sprintf("payload %d", i)
		if err := w.Append(TraceProto, []byte(p)); err != nil {
			t.Fatal(err)
		}
		want = append(want, "1:"+p)
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	if len(d.order) < 3 {
		t.Fatalf("%d segments, want rotation", len(d.order))
	}
	var got []string
	for i, name := range d.order {
		f := d.files[name]
		if name != SegmentName(uint64(i+1)) || f.synced != len(f.data) || !f.closed {
			t.Fatalf("segment %s: synced %d of %d, closed %v", name, f.synced, len(f.data), f.closed)
		}
		if len(f.data) > 200 {
			t.Fatalf("segment %s has %d bytes, over the rotation size", name, len(f.data))
		}
		r, err := NewReader(bytes.NewReader(f.data), 1<<20)
		if err != nil {
			t.Fatal(err)
		}
		if r.Header.Sequence != uint64(i+1) || r.Header.Instance != [16]byte{1, 2, 3} {
			t.Fatalf("header %+v", r.Header)
		}
		recs, err := readAll(t, f.data)
		if err != nil {
			t.Fatal(err)
		}
		got = append(got, recs...)
	}
	if fmt.Sprint(got) != fmt.Sprint(want) {
		t.Fatalf("read %v\nwant %v", got, want)
	}
}

// TestTornTail cuts a segment at every byte: the whole records before the
// cut are read, and a cut inside a record is a TornError at its start.
func TestTornTail(t *testing.T) {
	seg := appendHeader(nil, Header{Sequence: 1})
	var ends []int
	for i := range 3 {
		seg = AppendRecord(seg, TraceJSON, []byte(fmt.Sprintf(`{"n":%d}`, i)))
		ends = append(ends, len(seg))
	}
	for cut := HeaderSize; cut <= len(seg); cut++ {
		recs, err := readAll(t, seg[:cut])
		whole := 0
		start := HeaderSize
		for _, e := range ends {
			if e <= cut {
				whole++
				start = e
			}
		}
		if len(recs) != whole {
			t.Fatalf("cut at %d: %d records, want %d", cut, len(recs), whole)
		}
		var torn *TornError
		switch {
		case cut == start && err != nil:
			t.Fatalf("cut at %d (a record boundary): %v", cut, err)
		case cut != start && (!errors.As(err, &torn) || torn.Offset != int64(start)):
			t.Fatalf("cut at %d: %v, want a torn record at %d", cut, err, start)
		}
	}
	// A length field claiming 3 GB, with a few bytes after it: torn, read
	// without allocating the claimed size.
	huge := append(bytes.Clone(seg), 0, 0, 0, 0xb0, 1, 2, 3, 4, 1, 'x', 'y')
	r, err := NewReader(bytes.NewReader(huge), 4<<30)
	if err != nil {
		t.Fatal(err)
	}
	for range 3 {
		if _, err := r.Next(); err != nil {
			t.Fatal(err)
		}
	}
	if _, err := r.Next(); !errors.As(err, new(*TornError)) {
		t.Fatalf("huge length: %v", err)
	}
	// Zero bytes after the last record (space allocated, never written)
	// are a torn tail too.
	if recs, err := readAll(t, append(bytes.Clone(seg), make([]byte, 100)...)); len(recs) != 3 || !errors.As(err, new(*TornError)) {
		t.Fatalf("zero tail: %d records, %v", len(recs), err)
	}
}

// TestCorruptMiddle: a record failing its checksum with valid records
// after it is corruption, not a tear.
func TestCorruptMiddle(t *testing.T) {
	seg := appendHeader(nil, Header{Sequence: 1})
	seg = AppendRecord(seg, TraceProto, []byte("first"))
	at := len(seg)
	seg = AppendRecord(seg, TraceProto, []byte("second"))
	seg = AppendRecord(seg, TraceProto, []byte("third"))
	seg[at+recordHead] ^= 0x20 // flip a payload bit
	recs, err := readAll(t, seg)
	var fe *FormatError
	if len(recs) != 1 || !errors.As(err, &fe) || fe.Offset != int64(at) {
		t.Fatalf("%v, %v; want one record and a FormatError at %d", recs, err, at)
	}
}

// TestChecksumIsCRC32C pins the checksum to CRC-32C: the check value of
// the Castagnoli polynomial for "123456789" is 0xE3069283 (RFC 3720,
// iSCSI, appendix B.4, and the CRC catalogue's CRC-32/ISCSI entry).
func TestChecksumIsCRC32C(t *testing.T) {
	if got := crc32.Checksum([]byte("123456789"), castagnoli); got != 0xE3069283 {
		t.Fatalf("check value %#x", got)
	}
	rec := AppendRecord(nil, Type('1'), []byte("23456789"))
	if got := uint32(rec[4]) | uint32(rec[5])<<8 | uint32(rec[6])<<16 | uint32(rec[7])<<24; got != 0xE3069283 {
		t.Fatalf("record checksum %#x, want CRC-32C of type and payload", got)
	}
}

// TestWriteErrorLeavesNoPartialRecord: a failed write (a full disk) is
// cut back, Append reports it, and later appends go on.
func TestWriteErrorLeavesNoPartialRecord(t *testing.T) {
	d := newMemDir()
	w := NewWriter(d, WriterOptions{SyncEach: true})
	full := errors.New("no space left on device")
	if err := w.Append(TraceProto, []byte("one")); err != nil {
		t.Fatal(err)
	}
	d.fail = func(string, []byte) error { return full }
	if err := w.Append(TraceProto, []byte("two")); !errors.Is(err, full) {
		t.Fatalf("append on a full disk: %v", err)
	}
	d.fail = nil
	if err := w.Append(TraceProto, []byte("three")); err != nil {
		t.Fatal(err)
	}
	w.Close()
	recs, err := readAll(t, d.files[SegmentName(1)].data)
	if err != nil || fmt.Sprint(recs) != "[1:one 1:three]" {
		t.Fatalf("%v, %v", recs, err)
	}
}

func TestNotASegment(t *testing.T) {
	for _, data := range [][]byte{nil, []byte("{}"), []byte(Magic), append([]byte(Magic), 9, 0)} {
		if _, err := NewReader(bytes.NewReader(data), 100); !errors.As(err, new(*FormatError)) {
			t.Errorf("%q: %v", data, err)
		}
	}
	bad := appendHeader(nil, Header{})
	bad[12] = 2
	if _, err := NewReader(bytes.NewReader(bad), 100); err == nil {
		t.Error("version 2 read")
	}
}

// FuzzReader: any bytes read as a segment end cleanly (no panic, no
// endless loop), and every record returned is the bytes at its offset.
func FuzzReader(f *testing.F) {
	seg := appendHeader(nil, Header{Sequence: 1})
	seg = AppendRecord(seg, TraceProto, []byte("first"))
	seg = AppendRecord(seg, Profile, []byte("second"))
	f.Add(seg)
	f.Add(seg[:len(seg)-3])
	f.Add(append(bytes.Clone(seg), 0, 0, 0, 0))
	f.Add([]byte(Magic))
	f.Fuzz(func(t *testing.T, data []byte) {
		r, err := NewReader(bytes.NewReader(data), 1<<16)
		if err != nil {
			return
		}
		for range len(data) + 1 {
			rec, err := r.Next()
			if err != nil {
				if _, err := r.Next(); !errors.Is(err, io.EOF) {
					t.Fatalf("after an error: %v", err)
				}
				return
			}
			want := AppendRecord(nil, rec.Type, rec.Payload)
			if !bytes.Equal(data[rec.Offset:rec.Offset+int64(len(want))], want) {
				t.Fatalf("record at %d does not match its bytes", rec.Offset)
			}
		}
		t.Fatal("more records than bytes")
	})
}
