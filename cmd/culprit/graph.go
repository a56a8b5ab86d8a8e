package main

import (
	"context"
	"io"

	"github.com/culprithq/culprit/attribute"
	"github.com/culprithq/culprit/report"
	"github.com/spf13/cobra"
)

// graphOptions holds the flags and dependencies of `culprit graph`.
type graphOptions struct {
	streams  *streams
	analysis analysisFlags
	output   string
	minShare float64
	inputs   []string
}

func newGraphCmd(s *streams, runF func(context.Context, *graphOptions) error) *cobra.Command {
	opts := &graphOptions{streams: s}
	cmd := &cobra.Command{
		Use:   "graph INPUT...",
		Short: "Export the attribution graph as DOT",
		Long: `Graph writes the attribution subgraph in Graphviz DOT: entry points,
application functions and the database and network calls they reach, with
library frames elided. Nodes and edges are labelled with the cost charged
along them and its share of database and network cost. Shapes by class:
database cylinder, network hexagon, entry house, application bold box.
Names appear only in quoted labels. --min-share prunes functions below a
share of the database and network cost.`,
		Example: `  culprit graph profiles/ -o charge.dot && dot -Tsvg charge.dot > charge.svg
  culprit graph traces.jsonl --min-share 0.05`,
		Args: minArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			opts.inputs = args
			if runF != nil {
				return runF(cmd.Context(), opts)
			}
			return runGraph(cmd.Context(), opts)
		},
	}
	opts.analysis.register(cmd)
	cmd.Flags().StringVarP(&opts.output, "output", "o", "", "write the DOT to `FILE` (atomically) instead of standard output")
	cmd.Flags().Float64Var(&opts.minShare, "min-share", 0.01, "drop functions charged less than this share of database and network cost")
	return cmd
}

func runGraph(ctx context.Context, opts *graphOptions) error {
	if opts.minShare < 0 || opts.minShare > 1 {
		return usagef("--min-share must be between 0 and 1")
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
	aopts := opts.analysis.attributeOptions()
	g := attribute.ChargeGraph(b.tree, b.cls, aopts, opts.minShare)
	vi, err := src.ValueIndex(aopts.Value)
	if err != nil {
		vi = src.DefaultValue
	}
	unit := src.ValueTypes[vi].Unit
	g.Format = func(v float64) string { return report.FormatValue(int64(v), unit) }
	data, err := g.MarshalDOT()
	if err != nil {
		return err
	}
	out := outputFlags{Output: opts.output}
	return out.write(ctx, opts.streams, opts.inputs, func(w io.Writer) error {
		_, err := w.Write(append(data, '\n'))
		return err
	})
}
