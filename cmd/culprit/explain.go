package main

import (
	"context"
	"io"
	"regexp"

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
expression matched against root-cause function names.`,
		Example: `  culprit explain 'VarietyByID' profiles/
  culprit explain 'catalog\.' traces.jsonl --format json`,
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
	opts.output.register(cmd, report.ExplainFormats)
	return cmd
}

func runExplain(ctx context.Context, opts *explainOptions) error {
	re, err := regexp.Compile(opts.pattern)
	if err != nil {
		return usagef("PATTERN: %v", err)
	}
	format := opts.output.Format
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
	tree, cls, vi, err := opts.analysis.build(src, rules)
	if err != nil {
		return err
	}
	ex := attribute.Explain(tree, cls, opts.analysis.attributeOptions(), re)
	if opts.output.Limit > 0 && len(ex) > opts.output.Limit {
		ex = ex[:opts.output.Limit]
	}
	ropts.Provenance = report.Provenance{Command: opts.command, Version: version}
	return opts.output.write(opts.streams, opts.inputs, func(w io.Writer) error {
		return renderer.RenderExplain(w, ex, src.ValueTypes[vi].Unit, ropts)
	})
}
