package main

import (
	"context"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"runtime"
	"strings"

	"github.com/culprithq/culprit/attribute/compare"
	"github.com/culprithq/culprit/report"
	"github.com/spf13/cobra"
	"github.com/spf13/pflag"
)

// rankOptions holds the flags and dependencies of `culprit rank`.
type rankOptions struct {
	streams  *streams
	analysis analysisFlags
	output   outputFlags
	inputs   []string
	command  string
	// save names a snapshot file to write beside the report.
	save string
}

func newRankCmd(s *streams, runF func(context.Context, *rankOptions) error) *cobra.Command {
	opts := &rankOptions{streams: s}
	cmd := &cobra.Command{
		Use:   "rank INPUT...",
		Short: "Rank the application functions behind database and network cost",
		Long: `Rank reads profiles (pprof, gzipped or not) or traces (OTLP/JSON, one export
request per line or one document; binary OTLP protobuf, one request per file;
or a 'culprit listen' capture directory), merges them, and charges every database and
network call's cost to the nearest application function above it: its root
cause. Each row shows the root cause's share of all database and network cost
(the denominator is printed), the call site, and the statements or calls it made.

INPUT is a file, a directory (every file below it), or - for standard input.
Profiles and traces are analysed in separate runs.`,
		Example: `  # Goroutine profiles taken during a load test
  culprit rank profiles/

  # Traces exported by an OpenTelemetry pipeline, as JSON for a notebook
  culprit rank traces.jsonl --format json -o rank.json

  # Name the application code explicitly and show the callers that loop
  culprit rank --app example.com/shop/ --inclusive cpu.pb.gz

  # Save a snapshot of this build for a later comparison
  culprit rank profiles/ --save v41.snapshot.json`,
		Args: minArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			opts.inputs = args
			opts.command = commandLine(cmd, args)
			if runF != nil {
				return runF(cmd.Context(), opts)
			}
			return runRank(cmd.Context(), opts)
		},
	}
	opts.analysis.register(cmd)
	opts.output.register(cmd, report.Formats)
	cmd.Flags().StringVar(&opts.save, "save", "", "also write a snapshot (culprit.snapshot/v1) to `FILE`, for diff and merge")
	return cmd
}

func runRank(ctx context.Context, opts *rankOptions) error {
	s := opts.streams
	ropts, err := opts.output.renderOptions(s)
	if err != nil {
		return err
	}
	format := opts.output.Format
	if format == "" {
		format = "text"
	}
	renderer, err := report.ForFormat(format)
	if err != nil {
		return &usageError{err: err}
	}
	// The text and CSV reports do not show the inputs' digests.
	opts.analysis.skipDigest = (format == "text" || format == "csv") && opts.save == ""
	// Only a snapshot needs the per-request vectors.
	opts.analysis.dropVectors = opts.save == ""
	rules, err := opts.analysis.rules()
	if err != nil {
		return err
	}
	if err := checkTargets(opts.output.Output, opts.save, opts.analysis.allInputs(opts.inputs)); err != nil {
		return err
	}
	src, err := opts.analysis.load(ctx, s, opts.inputs)
	if err != nil {
		return err
	}
	res, err := opts.analysis.analyse(ctx, s, src, rules)
	if err != nil {
		return err
	}
	// The source and its tree are garbage from here on (a million spans:
	// about 100 MB). Collected now, their memory takes the report, which
	// would otherwise grow the heap past its peak (a full JSON report is
	// megabytes); with little left live, the collection takes milliseconds.
	runtime.GC()
	ropts.Provenance = report.Provenance{Command: opts.command, Version: version}
	var snapshot func(io.Writer) error
	if opts.save != "" {
		snapshot = compare.NewSnapshot(res).Write
	}
	if err := opts.output.writeWithSnapshot(ctx, s, opts.inputs, opts.save, snapshot, func(w io.Writer) error {
		return renderer.Render(w, res, ropts)
	}); err != nil {
		return err
	}
	// The text report on stdout already ends with its warnings; otherwise
	// say them on stderr, where CI logs show them. They are summarised by
	// kind with a few examples, never one line per problem.
	if format != "text" || (opts.output.Output != "" && opts.output.Output != "-") {
		for _, w := range res.Warnings {
			fmt.Fprintln(s.Err, "culprit: warning: "+w)
		}
	}
	return nil
}

// checkTargets refuses, before anything is read, a report (out) and a
// snapshot (save) written to one file, or either written over an input.
func checkTargets(out, save string, inputs []string) error {
	if out == "-" {
		out = ""
	}
	if out != "" && save != "" {
		a, _ := filepath.Abs(out)
		b, _ := filepath.Abs(save)
		// Two reports may go to one device (/dev/null), not to one file.
		if st, err := os.Stat(out); a == b && (err != nil || st.Mode().IsRegular()) {
			return usagef("-o and --save name the same file %s", out)
		}
	}
	for _, target := range []string{out, save} {
		if target != "" {
			if err := checkNotInput(target, inputs); err != nil {
				return err
			}
		}
	}
	return nil
}

// commandLine reconstructs the command for the report's provenance: the
// command path, the flags the user set (in name order) and the inputs.
func commandLine(cmd *cobra.Command, args []string) string {
	parts := []string{cmd.CommandPath()}
	cmd.Flags().Visit(func(f *pflag.Flag) {
		if sv, ok := f.Value.(pflag.SliceValue); ok {
			for _, v := range sv.GetSlice() {
				parts = append(parts, "--"+f.Name+"="+shellQuote(v))
			}
			return
		}
		parts = append(parts, "--"+f.Name+"="+shellQuote(f.Value.String()))
	})
	for _, a := range args {
		parts = append(parts, shellQuote(a))
	}
	return strings.Join(parts, " ")
}

func shellQuote(s string) string {
	if s != "" && strings.IndexFunc(s, func(r rune) bool {
		return !(r == '/' || r == '.' || r == '-' || r == '_' || r == ':' || r == '=' || r == ',' ||
			(r >= '0' && r <= '9') || (r >= 'a' && r <= 'z') || (r >= 'A' && r <= 'Z'))
	}) < 0 {
		return s
	}
	return "'" + strings.ReplaceAll(s, "'", `'\''`) + "'"
}
