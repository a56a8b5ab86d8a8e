package main

import (
	"context"
	"errors"
	"fmt"
	"os"
	"os/signal"
	"syscall"
	"time"
)

// run executes the command line args and returns the exit status. It is
// the only place that turns errors into statuses, and it never panics:
// an internal panic is reported as an error, not a stack trace.
//
// SIGINT and SIGTERM cancel the run's context in every phase: reading
// (even blocked on standard input or a FIFO), analysis, rendering and
// writing. The command then stops, removes its temporary files, says so
// in one line and exits 128 + the signal's number (130, 143), the common
// practice of shells.
func run(args []string, s *streams) int {
	ctx, cancel := context.WithCancelCause(context.Background())
	defer cancel(nil)
	sigs := make(chan os.Signal, 1)
	signal.Notify(sigs, os.Interrupt, syscall.SIGTERM)
	defer signal.Stop(sigs)
	go func() {
		select {
		case sig := <-sigs:
			cancel(&signalError{sig: sig})
		case <-ctx.Done():
		}
	}()
	return runContext(ctx, args, s)
}

// signalError is the cause of a context cancelled by a signal.
type signalError struct{ sig os.Signal }

func (e *signalError) Error() string {
	switch e.sig {
	case os.Interrupt:
		return "interrupted (SIGINT)"
	case syscall.SIGTERM:
		return "terminated (SIGTERM)"
	}
	return "stopped by " + e.sig.String()
}

// code is the exit status for the signal: 128 + its number.
func (e *signalError) code() int {
	if n, ok := e.sig.(syscall.Signal); ok {
		return 128 + int(n)
	}
	return exitError
}

// runContext is run under a given context: cancelling it (Ctrl-C) stops
// the pipeline, and no output file is left behind.
func runContext(ctx context.Context, args []string, s *streams) (code int) {
	defer func() {
		if r := recover(); r != nil {
			fmt.Fprintf(s.Err, "culprit: internal error: %v (please report this with the command line and inputs)\n", r)
			code = exitError
		}
	}()
	root := newRootCmd(s)
	root.SetArgs(args)
	err := root.ExecuteContext(ctx)
	if err != nil && ctx.Err() != nil {
		// Whatever failed, it failed because the run was stopped.
		var se *signalError
		if errors.As(context.Cause(ctx), &se) {
			err = se
		} else {
			err = context.Canceled
		}
	}
	return exitCode(err, s.Err)
}

// await runs f on its own goroutine and returns its result, or ctx's
// error as soon as ctx is done. The phases that do not watch ctx
// themselves (a read blocked in the kernel, the analysis) run under it:
// an interrupted command returns at once, and the process exits with the
// abandoned goroutine.
func await[T any](ctx context.Context, f func() (T, error)) (T, error) {
	type result struct {
		v   T
		err error
	}
	done := make(chan result, 1)
	go func() {
		defer func() {
			if r := recover(); r != nil {
				// A panic on this goroutine would bypass run's recover.
				done <- result{err: fmt.Errorf("internal error: %v (please report this with the command line and inputs)", r)}
			}
		}()
		v, err := f()
		done <- result{v, err}
	}()
	select {
	case r := <-done:
		return r.v, r.err
	case <-ctx.Done():
		var zero T
		return zero, ctx.Err()
	}
}

// pauseEnv names a phase (reading, analysis, rendering, writing) at which
// the command stops until it is interrupted, so that the signal tests can
// interrupt each phase for certain. It is for tests only.
const pauseEnv = "CULPRIT_TEST_PAUSE"

// testPause waits at phase until ctx is done, if pauseEnv names phase;
// it says so on stderr first.
func testPause(ctx context.Context, s *streams, phase string) {
	if s.Getenv == nil || s.Getenv(pauseEnv) != phase {
		return
	}
	fmt.Fprintf(s.Err, "culprit: test: paused at %s\n", phase)
	select {
	case <-ctx.Done():
	case <-time.After(time.Minute):
	}
}
