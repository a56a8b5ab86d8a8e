package main

import (
	"context"
	"errors"
	"fmt"
	"io"
)

// Exit statuses, documented in the README.
const (
	exitOK    = 0 // success
	exitError = 1 // the run failed: unreadable input, bad file, write error
	exitUsage = 2 // the command line is wrong
	exitGate  = 3 // a regression crossed the --fail-on budget
)

// usageError marks a command-line mistake (exit status 2).
type usageError struct{ err error }

func (e *usageError) Error() string { return e.err.Error() }
func (e *usageError) Unwrap() error { return e.err }

func usagef(format string, args ...any) error {
	return &usageError{err: fmt.Errorf(format, args...)}
}

// errGate is returned when a regression gate trips (exit status 3).
var errGate = errors.New("regression gate tripped")

// exitCode maps an error to an exit status and prints it to w.
func exitCode(err error, w io.Writer) int {
	if err == nil {
		return exitOK
	}
	var ue *usageError
	var se *signalError
	switch {
	case errors.As(err, &se):
		fmt.Fprintln(w, "culprit: "+se.Error())
		return se.code()
	case errors.Is(err, errGate):
		fmt.Fprintln(w, "culprit: "+err.Error())
		return exitGate
	case errors.As(err, &ue):
		fmt.Fprintln(w, "culprit: "+err.Error())
		fmt.Fprintln(w, "Run 'culprit --help' for usage.")
		return exitUsage
	case errors.Is(err, context.Canceled):
		fmt.Fprintln(w, "culprit: interrupted")
		return exitError
	}
	fmt.Fprintln(w, "culprit: "+err.Error())
	return exitError
}
