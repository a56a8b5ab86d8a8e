package capture

import (
	"errors"
	"fmt"
	"io"
	"sync"
	"sync/atomic"
)

// File is a segment file open for appending.
type File interface {
	io.Writer
	Sync() error
	Truncate(size int64) error
	Close() error
}

// Dir is where a Writer creates segments: the caller opens files (a
// directory on disk, or a test's stand-in that fails on demand).
type Dir interface {
	// Create makes a new, empty file; it fails if the name exists.
	Create(name string) (File, error)
	// Rename gives a file created here another name (the file may be open).
	Rename(from, to string) error
	// Sync makes the directory's entries durable (new files' names).
	Sync() error
}

// WriterOptions configure a Writer. Zero values take the defaults.
type WriterOptions struct {
	Instance     [16]byte
	SegmentBytes int64 // rotate past this size (default 64 MiB)
	// SyncEach makes Append sync before it returns (concurrent appends
	// share one sync); otherwise the owner calls Sync on its schedule.
	SyncEach bool
}

// DefaultSegmentBytes is the size past which segments rotate.
const DefaultSegmentBytes = 64 << 20

// ErrClosed is returned by Append after Close.
var ErrClosed = errors.New("capture closed")

// Writer appends records to segments, rotating them by size and syncing
// each on rotation, at Close, at Sync and (with SyncEach) before Append
// returns. It is safe for concurrent use.
type Writer struct {
	dir  Dir
	opts WriterOptions

	mu      sync.Mutex // guards the fields below and writes
	f       File
	seq     uint64 // current segment, 0 before the first
	size    int64  // bytes in the current segment
	written uint64 // records written so far
	closed  bool
	buf     []byte

	smu    sync.Mutex    // one sync at a time
	synced atomic.Uint64 // records known synced

	records, bytes atomic.Int64
}

// NewWriter returns a Writer creating segments in dir; the first is made
// at the first Append.
func NewWriter(dir Dir, opts WriterOptions) *Writer {
	if opts.SegmentBytes <= 0 {
		opts.SegmentBytes = DefaultSegmentBytes
	}
	return &Writer{dir: dir, opts: opts}
}

// Append stores one record. When it returns nil the record is written
// whole (and synced, with SyncEach). On a write error the segment is cut
// back to its last whole record, so that no partial record stays; the
// error wraps the file's.
func (w *Writer) Append(t Type, payload []byte) error {
	w.mu.Lock()
	err := w.append(t, payload)
	n := w.written
	w.mu.Unlock()
	if err != nil || !w.opts.SyncEach {
		return err
	}
	return w.syncUpTo(n)
}

func (w *Writer) append(t Type, payload []byte) error {
	if w.closed {
		return ErrClosed
	}
	need := int64(recordHead + len(payload))
	if w.f == nil || w.size > HeaderSize && w.size+need > w.opts.SegmentBytes {
		if err := w.rotate(); err != nil {
			return err
		}
	}
	w.buf = AppendRecord(w.buf[:0], t, payload)
	if _, err := w.f.Write(w.buf); err != nil {
		if terr := w.f.Truncate(w.size); terr != nil {
			// The segment may keep a partial record: start a new one, so
			// that it is this segment's torn tail at worst.
			w.retire()
		}
		return fmt.Errorf("writing %s: %w", SegmentName(w.seq), err)
	}
	if cap(w.buf) > 1<<20 {
		w.buf = nil
	}
	w.size += need
	w.written++
	w.records.Add(1)
	w.bytes.Add(need)
	return nil
}

// rotate syncs and closes the current segment and starts the next.
func (w *Writer) rotate() error {
	if w.f != nil {
		if err := w.f.Sync(); err != nil {
			return fmt.Errorf("syncing %s: %w", SegmentName(w.seq), err)
		}
		w.synced.Store(w.written)
		w.retire()
	}
	// The segment gets its name only once its header is written and
	// synced, so that a crash at any point leaves either no segment or one
	// whose header is whole (the hidden temporary name is not an input).
	name := SegmentName(w.seq + 1)
	tmp := "." + name + ".tmp"
	f, err := w.dir.Create(tmp)
	if err != nil {
		return err
	}
	hdr := appendHeader(nil, Header{Instance: w.opts.Instance, Sequence: w.seq + 1})
	if _, err := f.Write(hdr); err != nil {
		f.Close()
		return fmt.Errorf("writing %s: %w", name, err)
	}
	if err := f.Sync(); err != nil {
		f.Close()
		return fmt.Errorf("syncing %s: %w", name, err)
	}
	if err := w.dir.Rename(tmp, name); err != nil {
		f.Close()
		return fmt.Errorf("naming %s: %w", name, err)
	}
	if err := w.dir.Sync(); err != nil {
		f.Close()
		return fmt.Errorf("syncing the capture directory: %w", err)
	}
	w.seq++
	w.f, w.size = f, HeaderSize
	return nil
}

// retire closes the current segment; the next append starts another.
func (w *Writer) retire() {
	if w.f != nil {
		w.f.Close()
		w.f = nil
	}
}

// syncUpTo syncs unless the first n records are synced already.
func (w *Writer) syncUpTo(n uint64) error {
	w.smu.Lock()
	defer w.smu.Unlock()
	if w.synced.Load() >= n {
		return nil
	}
	w.mu.Lock()
	defer w.mu.Unlock()
	return w.syncLocked()
}

func (w *Writer) syncLocked() error {
	if w.f == nil {
		return nil
	}
	target := w.written
	if err := w.f.Sync(); err != nil {
		w.retire() // what the file holds is unknown now
		return fmt.Errorf("syncing %s: %w", SegmentName(w.seq), err)
	}
	w.synced.Store(target)
	return nil
}

// Sync makes every record appended so far durable.
func (w *Writer) Sync() error {
	w.smu.Lock()
	defer w.smu.Unlock()
	w.mu.Lock()
	defer w.mu.Unlock()
	return w.syncLocked()
}

// Close syncs and closes the current segment; Append fails afterwards.
func (w *Writer) Close() error {
	w.smu.Lock()
	defer w.smu.Unlock()
	w.mu.Lock()
	defer w.mu.Unlock()
	if w.closed {
		return nil
	}
	err := w.syncLocked()
	if w.f != nil {
		if cerr := w.f.Close(); err == nil {
			err = cerr
		}
		w.f = nil
	}
	w.closed = true
	return err
}

// Segments returns the sequence numbers of the first and the last
// segment made (0, 0 before the first append).
func (w *Writer) Segments() (first, last uint64) {
	w.mu.Lock()
	defer w.mu.Unlock()
	if w.seq == 0 {
		return 0, 0
	}
	return 1, w.seq
}

// Stats returns how many records and bytes were appended.
func (w *Writer) Stats() (records, bytes int64) { return w.records.Load(), w.bytes.Load() }
