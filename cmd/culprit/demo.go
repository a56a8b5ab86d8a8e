package main

import (
	"context"
	"embed"
	"fmt"
	"io"
	"io/fs"
	"os"
	"path"
	"path/filepath"

	"github.com/culprithq/culprit/attribute/compare"
	"github.com/culprithq/culprit/report"
	"github.com/spf13/cobra"
)

// demoData is the built-in demo data set, made by cmd/culprit-gen (see
// DEVELOPERS.md): the invented "greenhouse" plant-nursery storefront.
//
//go:embed demo/*
var demoData embed.FS

// demoOptions holds the flags and dependencies of `culprit demo`.
type demoOptions struct {
	rank   rankOptions
	traces bool
	diff   bool
	write  string
}

func newDemoCmd(s *streams, runF func(context.Context, *demoOptions) error) *cobra.Command {
	opts := &demoOptions{rank: rankOptions{streams: s}}
	cmd := &cobra.Command{
		Use:   "demo",
		Short: "Rank the built-in demo data (an invented plant-nursery storefront)",
		Long: `Demo runs rank on data built into culprit: goroutine profiles (or, with
--traces, OpenTelemetry traces) from a load test of "greenhouse", an invented
plant-nursery web shop with planted problems: a query per catalogue item, one
heavy report query, a shipping-rate call per cart line, a recursive category
walk that queries at every level, and pure CPU work that must not be charged.
--write DIR saves the demo files so that you can run the other commands on them.`,
		Example: `  culprit demo
  culprit demo --traces --format markdown
  culprit demo --diff
  culprit demo --write ./greenhouse && culprit rank ./greenhouse/greenhouse-v42.traces.jsonl.gz`,
		Args: exactArgs(0),
		RunE: func(cmd *cobra.Command, args []string) error {
			opts.rank.command = commandLine(cmd, args)
			if runF != nil {
				return runF(cmd.Context(), opts)
			}
			return runDemo(cmd.Context(), opts)
		},
	}
	cmd.Flags().BoolVar(&opts.traces, "traces", false, "rank the demo traces instead of the goroutine profiles")
	cmd.Flags().BoolVar(&opts.diff, "diff", false, "compare build v41 with v42 (culprit diff) instead of ranking v42")
	cmd.Flags().StringVar(&opts.write, "write", "", "write the demo files into `DIR` and exit")
	opts.rank.analysis.register(cmd)
	opts.rank.output.register(cmd, report.Formats)
	return cmd
}

func runDemo(ctx context.Context, opts *demoOptions) error {
	if opts.write != "" {
		return writeDemo(ctx, opts.rank.streams, opts.write)
	}
	files := func(build string) ([]string, error) {
		pattern := "demo/greenhouse-" + build + ".goroutine.*.pb.gz"
		if opts.traces {
			pattern = "demo/greenhouse-" + build + ".traces.jsonl.gz"
		}
		names, err := fs.Glob(demoData, pattern)
		if err != nil || len(names) == 0 {
			return nil, fmt.Errorf("demo data missing from this build (%s)", pattern)
		}
		return names, nil
	}
	opts.rank.analysis.fsys = demoData
	if opts.diff {
		base, err := files("v41")
		if err != nil {
			return err
		}
		cand, err := files("v42")
		if err != nil {
			return err
		}
		d := &diffOptions{streams: opts.rank.streams, analysis: opts.rank.analysis, output: opts.rank.output,
			base: base, candidate: cand, alpha: compare.DefaultAlpha, seed: 1, command: opts.rank.command}
		return runDiff(ctx, d)
	}
	names, err := files("v42")
	if err != nil {
		return err
	}
	opts.rank.inputs = names
	return runRank(ctx, &opts.rank)
}

func writeDemo(ctx context.Context, s *streams, dir string) error {
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return err
	}
	entries, err := fs.ReadDir(demoData, "demo")
	if err != nil {
		return err
	}
	for _, e := range entries {
		if e.Name() == "README.md" {
			continue
		}
		data, err := demoData.ReadFile(path.Join("demo", e.Name()))
		if err != nil {
			return err
		}
		dst := filepath.Join(dir, e.Name())
		p, err := prepareOutput(ctx, s, dst, nil, func(w io.Writer) error { _, err := w.Write(data); return err })
		if err != nil {
			return err
		}
		if err := p.commit(ctx, s); err != nil {
			return err
		}
		fmt.Fprintln(s.Err, "wrote "+dst)
	}
	return nil
}
