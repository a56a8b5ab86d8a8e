package main

import (
	"context"
	"fmt"
	"os"
	"os/signal"
)

// run executes the command line args and returns the exit status. It is
// the only place that turns errors into statuses, and it never panics:
// an internal panic is reported as an error, not a stack trace.
func run(args []string, s *streams) (code int) {
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt)
	defer stop()
	defer func() {
		if r := recover(); r != nil {
			fmt.Fprintf(s.Err, "culprit: internal error: %v (please report this with the command line and inputs)\n", r)
			code = exitError
		}
	}()
	root := newRootCmd(s)
	root.SetArgs(args)
	err := root.ExecuteContext(ctx)
	return exitCode(err, s.Err)
}
