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
func run(args []string, s *streams) int {
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt)
	defer stop()
	return runContext(ctx, args, s)
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
	return exitCode(err, s.Err)
}
