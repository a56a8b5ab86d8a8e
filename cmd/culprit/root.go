package main

import (
	"github.com/spf13/cobra"
)

// version is set at build time with -ldflags "-X main.version=…".
var version = "dev"

func newRootCmd(s *streams) *cobra.Command {
	root := &cobra.Command{
		Use:   "culprit",
		Short: "Find the application code behind database and network cost",
		Long: `culprit reads a load test's pprof profiles, OpenTelemetry traces (OTLP files,
or received live with culprit listen) or Go execution traces, walks every
call path from its entry point to the database and network calls, and
charges each call's cost to the first application-owned function that caused
it. It ranks those root causes with their share of the cost, shows what the
slow requests waited on (latency), and compares two builds (diff).

Exit status: 0 success, 1 error, 2 usage error, 3 regression gate tripped,
130 or 143 stopped by SIGINT or SIGTERM.`,
		SilenceUsage:  true,
		SilenceErrors: true,
	}
	root.SetOut(s.Out)
	root.SetErr(s.Err)
	root.SetIn(s.In)
	root.SetFlagErrorFunc(func(c *cobra.Command, err error) error {
		return &usageError{err: err}
	})
	root.AddCommand(
		newRankCmd(s, nil),
		newExplainCmd(s, nil),
		newLatencyCmd(s, nil),
		newGraphCmd(s, nil),
		newRulesCmd(s, nil),
		newDiffCmd(s, nil),
		newMergeCmd(s, nil),
		newListenCmd(s, nil),
		newDemoCmd(s, nil),
		newVersionCmd(s),
	)
	return root
}

// noArgsOrUsage is cobra.NoArgs with a usage error.
func exactArgs(n int) cobra.PositionalArgs {
	return func(cmd *cobra.Command, args []string) error {
		if len(args) != n {
			return usagef("%s takes %d argument(s), got %d", cmd.CommandPath(), n, len(args))
		}
		return nil
	}
}

func minArgs(n int) cobra.PositionalArgs {
	return func(cmd *cobra.Command, args []string) error {
		if len(args) < n {
			return usagef("%s needs at least %d input (a file, a directory, or - for stdin)", cmd.CommandPath(), n)
		}
		return nil
	}
}
