package main

import (
	"context"
	"fmt"
	"io"
	"regexp"
	"strings"

	"github.com/culprithq/culprit/attribute"
	"github.com/culprithq/culprit/report"
	"github.com/spf13/cobra"
)

// explainOptions holds the flags and dependencies of `culprit explain`.
type explainOptions struct {
	streams  *streams
	analysis analysisFlags
	output   outputFlags
	pattern  string
	inputs   []string
	command  string
	// latency explains the critical paths of the slowest requests of the
	// entry points matching pattern instead of a root cause's paths.
	latency bool
	slowest int
}

func newExplainCmd(s *streams, runF func(context.Context, *explainOptions) error) *cobra.Command {
	opts := &explainOptions{streams: s}
	cmd := &cobra.Command{
		Use:   "explain PATTERN INPUT...",
		Short: "Show every path from entry point to call for matching root causes",
		Long: `Explain shows how a root cause reaches the database or network: every distinct
path from the entry point through the application's frames to the boundary
call, with the cost, calls or samples, call sites and statements of each step.
Library frames in between are elided and counted. PATTERN is a regular
expression matched against root-cause function names.

With --latency (traces only), PATTERN matches entry points instead, and
explain lists the critical path of each one's slowest requests: every span
the request waited on, indented under its parent, with its time on the path.`,
		Example: `  culprit explain 'VarietyByID' profiles/
  culprit explain 'catalog\.' traces.jsonl --format json
  culprit explain --latency '/accessions' traces.jsonl --slowest 5`,
		Args: minArgs(2),
		RunE: func(cmd *cobra.Command, args []string) error {
			opts.pattern, opts.inputs = args[0], args[1:]
			opts.command = commandLine(cmd, args)
			if runF != nil {
				return runF(cmd.Context(), opts)
			}
			return runExplain(cmd.Context(), opts)
		},
	}
	opts.analysis.register(cmd)
	opts.output.register(cmd, append(append([]string{}, report.ExplainFormats...), "markdown (with --latency)"))
	cmd.Flags().BoolVar(&opts.latency, "latency", false, "explain the critical paths of the slowest requests of the entry points matching PATTERN (traces)")
	cmd.Flags().IntVar(&opts.slowest, "slowest", 3, "with --latency: how many of each entry point's slowest requests to show")
	return cmd
}

func runExplain(ctx context.Context, opts *explainOptions) error {
	re, err := regexp.Compile(opts.pattern)
	if err != nil {
		return usagef("PATTERN: %v", err)
	}
	format := opts.output.Format
	if opts.latency {
		return runExplainLatency(ctx, opts, re, format)
	}
	if format == "" {
		format = "text"
	}
	renderer, err := report.ForExplainFormat(format)
	if err != nil {
		return &usageError{err: err}
	}
	ropts, err := opts.output.renderOptions(opts.streams)
	if err != nil {
		return err
	}
	rules, err := opts.analysis.rules()
	if err != nil {
		return err
	}
	src, err := opts.analysis.load(ctx, opts.streams, opts.inputs)
	if err != nil {
		return err
	}
	b, err := opts.analysis.buildCtx(ctx, opts.streams, src, rules)
	if err != nil {
		return err
	}
	tree, cls, vi := b.tree, b.cls, b.value
	ex := attribute.Explain(tree, cls, opts.analysis.attributeOptions(), re)
	if opts.output.Limit > 0 && len(ex) > opts.output.Limit {
		ex = ex[:opts.output.Limit]
	}
	ropts.Provenance = report.Provenance{Command: opts.command, Version: version}
	return opts.output.write(ctx, opts.streams, opts.inputs, func(w io.Writer) error {
		return renderer.RenderExplain(w, ex, src.ValueTypes[vi].Unit, ropts)
	})
}

// runExplainLatency lists the critical paths of the slowest requests of
// the entry points that re matches.
func runExplainLatency(ctx context.Context, opts *explainOptions, re *regexp.Regexp, format string) error {
	switch format {
	case "", "text", "markdown", "json":
	default:
		return usagef("explain --latency: --format must be one of: text, markdown, json")
	}
	if opts.slowest < 1 {
		return usagef("--slowest must be 1 or more")
	}
	res, err := opts.analysis.latency(ctx, opts.streams, opts.inputs, attribute.LatencyOptions{Slowest: opts.slowest})
	if err != nil {
		return err
	}
	var matched []*attribute.LatencyEntry
	for _, e := range res.Entries {
		if re.MatchString(e.Entry) {
			matched = append(matched, e)
		}
	}
	if len(matched) == 0 {
		names := make([]string, len(res.Entries))
		for i, e := range res.Entries {
			names[i] = e.Entry
		}
		return fmt.Errorf("no entry point matches %q; entry points: %s", opts.pattern, strings.Join(names, ", "))
	}
	return opts.output.write(ctx, opts.streams, opts.inputs, func(w io.Writer) error {
		return report.RenderLatencyPaths(w, format, matched)
	})
}
