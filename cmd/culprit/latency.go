package main

import (
	"context"
	"fmt"
	"io"

	"github.com/culprithq/culprit/attribute"
	"github.com/culprithq/culprit/attribute/compare"
	"github.com/culprithq/culprit/report"
	"github.com/culprithq/culprit/traces"
	"github.com/spf13/cobra"
)

// latencyOptions holds the flags and dependencies of `culprit latency`.
type latencyOptions struct {
	streams  *streams
	analysis analysisFlags
	output   outputFlags
	inputs   []string
	command  string
	// tail is the quantile from which a request is in its entry point's tail.
	tail float64
	// save names a latency snapshot file to write beside the report.
	save string
}

func newLatencyCmd(s *streams, runF func(context.Context, *latencyOptions) error) *cobra.Command {
	opts := &latencyOptions{streams: s}
	cmd := &cobra.Command{
		Use:   "latency INPUT...",
		Short: "Show what made requests slow: critical paths per entry point, tail and median",
		Long: `Latency reads traces and computes, for every request, its critical path: the
chain of spans and gaps that decided when the request's root span ended.
Parallel calls overlap, so only the one the request waited for is on the path.
Each piece is charged like rank charges calls: a database or network call's
time to the application function that made it, an application span's own time
to itself, and time inside the server span that no span covers to
"unaccounted" (queueing, un-instrumented work).

A Go execution trace works too: each request is its goroutine, the child
goroutines it waited for and their waits. A wait that is not a call (a lock,
a channel, a sleep) is "application" time of the function that waited, and a
goroutine's time outside its waits is "running" (on a CPU or waiting for one).

Per entry point it shows the latency p50/p95/p99, and per root cause the mean
time per request on the critical path and its share of the latency, for all
requests and for the tail (requests at or above the --tail quantile), beside
the cause's summed time, so that overlap is visible.

Profiles cannot answer this: they have no requests and no order in time.`,
		Example: `  # What the slowest 5% of each route's requests waited on
  culprit latency traces.jsonl

  # The slowest 1% as JSON for a notebook
  culprit latency --tail 0.99 --format json -o latency.json traces/

  # The same from a Go execution trace of the service
  curl -o trace.out 'http://localhost:6060/debug/pprof/trace?seconds=10'
  culprit latency trace.out

  # Keep this build's latency for a later diff --latency
  culprit latency v41.traces.jsonl --save v41.latency.json

  # The critical paths of the slowest requests of one route
  culprit explain --latency 'GET /accessions' traces.jsonl`,
		Args: minArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			opts.inputs = args
			opts.command = commandLine(cmd, args)
			if runF != nil {
				return runF(cmd.Context(), opts)
			}
			return runLatency(cmd.Context(), opts)
		},
	}
	opts.analysis.register(cmd)
	opts.output.register(cmd, report.Formats)
	cmd.Flags().Float64Var(&opts.tail, "tail", attribute.DefaultTail, "quantile of latency at and above which a request is in its entry point's tail (0 < Q < 1)")
	cmd.Flags().StringVar(&opts.save, "save", "", "also write a latency snapshot (culprit.latency-snapshot/v1) to `FILE`, for diff --latency")
	return cmd
}

func runLatency(ctx context.Context, opts *latencyOptions) error {
	s := opts.streams
	if opts.tail <= 0 || opts.tail >= 1 {
		return usagef("--tail must be a quantile between 0 and 1, such as 0.95")
	}
	format := opts.output.Format
	if format == "" {
		format = "text"
	}
	renderer, err := report.ForLatencyFormat(format)
	if err != nil {
		return &usageError{err: err}
	}
	ropts, err := opts.output.renderOptions(s)
	if err != nil {
		return err
	}
	opts.analysis.skipDigest = (format == "text" || format == "csv") && opts.save == ""
	if err := checkTargets(opts.output.Output, opts.save, opts.analysis.allInputs(opts.inputs)); err != nil {
		return err
	}
	res, err := opts.analysis.latency(ctx, s, opts.inputs, attribute.LatencyOptions{Tail: opts.tail, Vectors: opts.save != ""})
	if err != nil {
		return err
	}
	var snapshot func(io.Writer) error
	if opts.save != "" {
		snap, err := compare.NewLatencySnapshot(res)
		if err != nil {
			return err
		}
		snapshot = snap.Write
	}
	ropts.Provenance = report.Provenance{Command: opts.command, Version: version}
	if err := opts.output.writeWithSnapshot(ctx, s, opts.inputs, opts.save, snapshot, func(w io.Writer) error {
		return renderer.RenderLatency(w, res, ropts)
	}); err != nil {
		return err
	}
	if format != "text" || (opts.output.Output != "" && opts.output.Output != "-") {
		for _, w := range res.Warnings {
			fmt.Fprintln(s.Err, "culprit: warning: "+w)
		}
	}
	return nil
}

// latency reads the inputs (spans or execution traces) with timing and
// computes their critical paths. A profile gets a one-line answer saying
// why it cannot.
func (f *analysisFlags) latency(ctx context.Context, s *streams, inputs []string, lopts attribute.LatencyOptions) (*attribute.LatencyResult, error) {
	rules, err := f.rules()
	if err != nil {
		return nil, err
	}
	f.timing = true
	src, err := f.load(ctx, s, inputs)
	if err != nil {
		return nil, err
	}
	if src.Kind != traces.Spans && src.Kind != traces.ExecTrace {
		return nil, attribute.ErrNoTiming
	}
	lopts.Options = f.attributeOptions()
	return await(ctx, func() (*attribute.LatencyResult, error) {
		testPause(ctx, s, "analysis")
		tree, cls, _, err := f.build(src, rules)
		if err != nil {
			return nil, err
		}
		return attribute.Latency(tree, cls, lopts)
	})
}
