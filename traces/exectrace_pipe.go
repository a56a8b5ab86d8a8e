package traces

import (
	"errors"
	"io"

	"golang.org/x/exp/trace"
)

// eventPipe reads the state transitions of an execution trace on a
// goroutine of its own and hands them over in batches, so that the
// library's decoding (the floor of the reader's cost) and the following
// of requests run side by side. Batches are recycled: at most
// pipeBatches are in flight.
//
// Events are values whose tables (stacks, strings) belong to their
// generation of the trace; the library never changes a generation's
// tables once it is read, so events are safe to read on another
// goroutine.
type eventPipe struct {
	full chan []trace.Event
	free chan []trace.Event
	quit chan struct{}
	// err is the error that ended the reading (not io.EOF), with the
	// input position at that time; set before full is closed.
	err error
	pos int64
}

const (
	pipeBatch   = 1024
	pipeBatches = 4
)

// eventPanic is a panic of the library, carried over to the reading
// goroutine.
type eventPanic struct{ v any }

func (eventPanic) Error() string { return "panic in the trace reader" }

// startEventPipe starts reading tr; pos reports the input position
// (called on the pipe's goroutine when reading fails).
func startEventPipe(tr *trace.Reader, pos func() int64) *eventPipe {
	p := &eventPipe{
		full: make(chan []trace.Event, pipeBatches),
		free: make(chan []trace.Event, pipeBatches),
		quit: make(chan struct{}),
	}
	for range pipeBatches {
		p.free <- make([]trace.Event, 0, pipeBatch)
	}
	go p.run(tr, pos)
	return p
}

func (p *eventPipe) run(tr *trace.Reader, pos func() int64) {
	defer close(p.full)
	defer func() {
		if v := recover(); v != nil {
			p.err, p.pos = eventPanic{v}, pos()
		}
	}()
	var batch []trace.Event
	select {
	case batch = <-p.free:
	case <-p.quit:
		return
	}
	for {
		ev, err := tr.ReadEvent()
		if err != nil {
			if !errors.Is(err, io.EOF) {
				p.err, p.pos = err, pos()
			}
			break
		}
		if ev.Kind() != trace.EventStateTransition {
			continue
		}
		batch = append(batch, ev)
		if len(batch) < cap(batch) {
			continue
		}
		select {
		case p.full <- batch:
		case <-p.quit:
			return
		}
		select {
		case batch = <-p.free:
		case <-p.quit:
			return
		}
	}
	if len(batch) > 0 {
		select {
		case p.full <- batch:
		case <-p.quit:
		}
	}
}

// next returns the next batch of events; false once all are read (then
// err tells whether the reading failed).
func (p *eventPipe) next() ([]trace.Event, bool) {
	b, ok := <-p.full
	return b, ok
}

// done gives a batch back for reuse.
func (p *eventPipe) done(b []trace.Event) {
	clear(b) // drop the references to the generation's tables
	p.free <- b[:0]
}

// stop ends the reading early (the consumer failed) and waits for the
// pipe's goroutine to finish, so that nothing reads the input after the
// reader returns.
func (p *eventPipe) stop() {
	close(p.quit)
	for range p.full {
	}
}
