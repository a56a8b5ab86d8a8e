package main

import (
	"context"
	"os"

	"github.com/culprithq/culprit/attribute/compare"
	"github.com/spf13/cobra"
)

// mergeOptions holds the flags and dependencies of `culprit merge`.
type mergeOptions struct {
	streams *streams
	output  string
	inputs  []string
}

func newMergeCmd(s *streams, runF func(context.Context, *mergeOptions) error) *cobra.Command {
	opts := &mergeOptions{streams: s}
	cmd := &cobra.Command{
		Use:   "merge SNAPSHOT... -o FILE",
		Short: "Add up snapshots of shards of one run",
		Long: `Merge adds up snapshots (rank --save) of shards of one load test — for
example one per load generator or per time window — into one snapshot.
The shards must share the value type, source kind, rules and app prefixes.`,
		Example: `  culprit merge shard-*.snapshot.json -o v42.snapshot.json`,
		Args:    minArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			opts.inputs = args
			if runF != nil {
				return runF(cmd.Context(), opts)
			}
			return runMerge(cmd.Context(), opts)
		},
	}
	cmd.Flags().StringVarP(&opts.output, "output", "o", "", "write the merged snapshot to `FILE` (atomically; default standard output)")
	return cmd
}

func runMerge(ctx context.Context, opts *mergeOptions) error {
	snaps := make([]*compare.Snapshot, 0, len(opts.inputs))
	for _, name := range opts.inputs {
		if err := ctx.Err(); err != nil {
			return err
		}
		snap, err := await(ctx, func() (*compare.Snapshot, error) { return readSnapshotFile(name) })
		if err != nil {
			return err
		}
		snaps = append(snaps, snap)
	}
	merged, err := compare.MergeSnapshots(snaps...)
	if err != nil {
		return err
	}
	out := outputFlags{Output: opts.output}
	return out.write(ctx, opts.streams, opts.inputs, merged.Write)
}

func readSnapshotFile(name string) (*compare.Snapshot, error) {
	fh, err := os.Open(name)
	if err != nil {
		return nil, err
	}
	defer fh.Close()
	return compare.ReadSnapshot(name, fh)
}
