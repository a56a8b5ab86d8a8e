package main

import (
	"bytes"
	"context"
	"fmt"
	"io"
	"os"
	"slices"
	"strconv"
	"strings"
	"time"

	"github.com/culprithq/culprit/attribute"
	"github.com/culprithq/culprit/attribute/compare"
	"github.com/culprithq/culprit/report"
	"github.com/spf13/cobra"
)

// diffOptions holds the flags and dependencies of `culprit diff`.
type diffOptions struct {
	streams   *streams
	analysis  analysisFlags
	output    outputFlags
	base      []string
	candidate []string
	failOn    string
	alpha     float64
	seed      uint64
	command   string
	// latency compares critical paths and route latency (traces or
	// latency snapshots) instead of root causes' summed cost.
	latency bool
	tail    float64
}

func newDiffCmd(s *streams, runF func(context.Context, *diffOptions) error) *cobra.Command {
	opts := &diffOptions{streams: s}
	cmd := &cobra.Command{
		Use:   "diff BASE CANDIDATE",
		Short: "Compare two builds: which root causes regressed or improved",
		Long: `Diff compares the root causes of two builds with a statistical verdict per root
cause: regressed, improved, unchanged, inconclusive, new or gone.

BASE and CANDIDATE are each a snapshot (rank --save), a profile or trace file,
or a directory of them; use --base and --candidate (repeatable) to list several
files per side. Costs are normalised per request when both sides know requests,
else per second of profile duration, else compared as shares; the report says
which. Sample counts are compared as Poisson rates (exact conditional test),
per-request costs and calls (traces) by a percentile bootstrap of the ratio
of means whose p-value inverts its interval; p-values are adjusted across
root causes (Benjamini-Hochberg). "Regressed" needs
q <= --alpha and an interval whose lower bound clears the budget; every
comparison prints the smallest change it could have detected.

--fail-on sets the budget (e.g. 10%, 2ms, or 10%,2ms) and makes a significant
regression beyond it exit with status 3, for CI.

With --latency (traces, or snapshots saved by culprit latency --save), diff
compares what requests waited on: per entry point the change of p50 and p95
latency with bootstrap intervals, and per root cause the change of its time
on the critical path per request, with the same verdicts, budget and gate.`,
		Example: `  culprit diff v41.snapshot.json v42/
  culprit diff --base old/cpu.pb.gz --candidate new/cpu.pb.gz --format markdown
  culprit diff v41.snapshot.json v42.snapshot.json --fail-on 10% || echo "regression"
  culprit diff --latency v41.traces.jsonl v42.traces.jsonl --fail-on 10%,5ms`,
		Args: func(cmd *cobra.Command, args []string) error {
			switch {
			case len(opts.base) > 0 || len(opts.candidate) > 0:
				if len(args) != 0 || len(opts.base) == 0 || len(opts.candidate) == 0 {
					return usagef("give both --base and --candidate, and no positional inputs")
				}
			case len(args) != 2:
				return usagef("diff takes BASE and CANDIDATE (or --base and --candidate lists), got %d argument(s)", len(args))
			}
			return nil
		},
		RunE: func(cmd *cobra.Command, args []string) error {
			if len(args) == 2 {
				opts.base, opts.candidate = args[:1], args[1:]
			}
			opts.command = commandLine(cmd, args)
			if runF != nil {
				return runF(cmd.Context(), opts)
			}
			return runDiff(cmd.Context(), opts)
		},
	}
	opts.analysis.register(cmd)
	opts.output.register(cmd, report.DiffFormats)
	fl := cmd.Flags()
	fl.StringArrayVar(&opts.base, "base", nil, "a base-side input `FILE` or directory (repeatable)")
	fl.StringArrayVar(&opts.candidate, "candidate", nil, "a candidate-side input `FILE` or directory (repeatable)")
	fl.StringVar(&opts.failOn, "fail-on", "", "regression `BUDGET`: relative (10%) and/or absolute per request or second (2ms); exit 3 beyond it")
	fl.Float64Var(&opts.alpha, "alpha", compare.DefaultAlpha, "significance level for Benjamini-Hochberg q-values")
	fl.Uint64Var(&opts.seed, "seed", 1, "bootstrap seed (same inputs and seed give the same report)")
	fl.BoolVar(&opts.latency, "latency", false, "compare latency: route p50/p95 and critical-path time per root cause (traces)")
	fl.Float64Var(&opts.tail, "tail", attribute.DefaultTail, "with --latency, for inputs: quantile from which a request is in its route's tail")
	return cmd
}

func runDiff(ctx context.Context, opts *diffOptions) error {
	if opts.alpha <= 0 || opts.alpha >= 1 {
		return usagef("--alpha must be between 0 and 1")
	}
	budget, err := parseBudget(opts.failOn)
	if err != nil {
		return usagef("--fail-on: %v", err)
	}
	format := opts.output.Format
	if format == "" {
		format = "text"
	}
	if opts.latency {
		return runDiffLatency(ctx, opts, budget, format)
	}
	renderer, err := report.ForDiffFormat(format)
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
	base, baseHelpers, err := opts.side(ctx, "base", opts.base, rules)
	if err != nil {
		return err
	}
	cand, candHelpers, err := opts.side(ctx, "candidate", opts.candidate, rules)
	if err != nil {
		return err
	}
	if union, redo := helperUnion(baseHelpers, candHelpers); redo && !slices.Contains(opts.base, "-") && !slices.Contains(opts.candidate, "-") {
		// A helper seen through on one side only would turn its callers
		// into root causes there and itself into one on the other side:
		// compare both builds with the same helpers (inputs are read again).
		named := *rules
		named.Helpers = append(slices.Clone(rules.Helpers), union...)
		if base, _, err = opts.side(ctx, "base", opts.base, &named); err != nil {
			return err
		}
		if cand, _, err = opts.side(ctx, "candidate", opts.candidate, &named); err != nil {
			return err
		}
	}
	if err := compare.CheckComparable(base, cand); err != nil {
		return err
	}
	cmp := compare.Compare(base, cand, compare.CompareOptions{Alpha: opts.alpha, Budget: budget, Seed: opts.seed})
	ropts.Provenance = report.Provenance{Command: opts.command, Version: version}
	inputs := append(append([]string(nil), opts.base...), opts.candidate...)
	if err := opts.output.write(ctx, opts.streams, inputs, func(w io.Writer) error {
		return renderer.RenderDiff(w, cmp, ropts)
	}); err != nil {
		return err
	}
	if budget.Set {
		return gateError(cmp.Gate(), opts.failOn)
	}
	return nil
}

// gateError is the error that makes culprit exit 3 when gate is not empty.
func gateError(gate []compare.Change, failOn string) error {
	if len(gate) == 0 {
		return nil
	}
	parts := make([]string, len(gate))
	for i, ch := range gate {
		parts[i] = ch.Function
		if ch.RelativeChange != nil {
			parts[i] += fmt.Sprintf(" %+.1f%%", *ch.RelativeChange*100)
		}
	}
	return fmt.Errorf("%w: %d root cause(s) regressed beyond the budget %s: %s",
		errGate, len(gate), failOn, strings.Join(parts, "; "))
}

// runDiffLatency is diff --latency.
func runDiffLatency(ctx context.Context, opts *diffOptions, budget compare.Budget, format string) error {
	renderer, err := report.ForLatencyDiffFormat(format)
	if err != nil {
		return &usageError{err: err}
	}
	if opts.tail <= 0 || opts.tail >= 1 {
		return usagef("--tail must be a quantile between 0 and 1, such as 0.95")
	}
	ropts, err := opts.output.renderOptions(opts.streams)
	if err != nil {
		return err
	}
	base, err := opts.latencySide(ctx, "base", opts.base)
	if err != nil {
		return err
	}
	cand, err := opts.latencySide(ctx, "candidate", opts.candidate)
	if err != nil {
		return err
	}
	c := compare.CompareLatency(base, cand, compare.CompareOptions{Alpha: opts.alpha, Budget: budget, Seed: opts.seed})
	ropts.Provenance = report.Provenance{Command: opts.command, Version: version}
	inputs := append(append([]string(nil), opts.base...), opts.candidate...)
	if err := opts.output.write(ctx, opts.streams, inputs, func(w io.Writer) error {
		return renderer.RenderLatencyDiff(w, c, ropts)
	}); err != nil {
		return err
	}
	if budget.Set {
		return gateError(c.Gate(), opts.failOn)
	}
	return nil
}

// latencySide loads one side of diff --latency: a latency snapshot, or
// traces whose latency is analysed with the command's flags.
func (opts *diffOptions) latencySide(ctx context.Context, label string, inputs []string) (*compare.LatencySnapshot, error) {
	if len(inputs) == 1 && hasSchema(inputs[0], "culprit.latency-snapshot/") {
		fh, err := os.Open(inputs[0])
		if err != nil {
			return nil, err
		}
		defer fh.Close()
		return compare.ReadLatencySnapshot(inputs[0], fh)
	}
	if len(inputs) == 1 && isSnapshotFile(inputs[0]) {
		return nil, usagef("%s: %s is a rank snapshot, which has no latency; save one with culprit latency --save", label, inputs[0])
	}
	res, err := opts.analysis.latency(ctx, opts.streams, inputs, attribute.LatencyOptions{Tail: opts.tail, Vectors: true})
	if err != nil {
		return nil, fmt.Errorf("%s: %w", label, err)
	}
	return compare.NewLatencySnapshot(res)
}

// side loads one side of the comparison: a snapshot file, or inputs that
// are ranked with the command's analysis flags and turned into a snapshot.
// For inputs it also returns the shared helpers seen through (non-nil,
// sorted); nil for a snapshot file.
func (opts *diffOptions) side(ctx context.Context, label string, inputs []string, rules *attribute.Rules) (*compare.Snapshot, []string, error) {
	if len(inputs) == 1 && isSnapshotFile(inputs[0]) {
		s, err := await(ctx, func() (*compare.Snapshot, error) { return readSnapshotFile(inputs[0]) })
		return s, nil, err
	}
	src, err := opts.analysis.load(ctx, opts.streams, inputs)
	if err != nil {
		return nil, nil, fmt.Errorf("%s: %w", label, err)
	}
	res, err := opts.analysis.analyse(ctx, opts.streams, src, rules)
	if err != nil {
		return nil, nil, err
	}
	helpers := []string{}
	for _, h := range res.Helpers {
		helpers = append(helpers, h.Function)
	}
	slices.Sort(helpers)
	return compare.NewSnapshot(res), helpers, nil
}

// helperUnion returns the union of the helpers seen through on two sides
// ranked from inputs, and whether the sides differ (then both must be
// ranked again with the union named).
func helperUnion(a, b []string) ([]string, bool) {
	if a == nil || b == nil || slices.Equal(a, b) {
		return nil, false
	}
	u := slices.Concat(a, b)
	slices.Sort(u)
	return slices.Compact(u), true
}

// isSnapshotFile reports whether name is a culprit snapshot: a JSON file
// whose schema field names culprit.snapshot.
func isSnapshotFile(name string) bool { return hasSchema(name, "culprit.snapshot/") }

// hasSchema reports whether name is a JSON file whose first 4 KiB name
// the schema prefix.
func hasSchema(name, schema string) bool {
	// A FIFO or device would block the open, and lose what is peeked.
	if st, err := os.Stat(name); err != nil || !st.Mode().IsRegular() {
		return false
	}
	fh, err := os.Open(name)
	if err != nil {
		return false
	}
	defer fh.Close()
	st, err := fh.Stat()
	if err != nil || st.IsDir() {
		return false
	}
	head := make([]byte, 4096)
	n, _ := io.ReadFull(fh, head)
	head = bytes.TrimLeft(head[:n], " \t\r\n")
	return bytes.HasPrefix(head, []byte("{")) && bytes.Contains(head, []byte(`"`+schema))
}

// parseBudget parses --fail-on: comma-separated parts, each a relative
// budget ("10%") or an absolute one — a Go duration ("2ms", in
// nanoseconds) or a plain number in the value's unit.
func parseBudget(s string) (compare.Budget, error) {
	var b compare.Budget
	if strings.TrimSpace(s) == "" {
		return b, nil
	}
	b.Set = true
	for _, part := range strings.Split(s, ",") {
		part = strings.TrimSpace(part)
		switch {
		case strings.HasSuffix(part, "%"):
			v, err := strconv.ParseFloat(strings.TrimSuffix(part, "%"), 64)
			if err != nil || v < 0 {
				return b, fmt.Errorf("%q is not a percentage such as 10%%", part)
			}
			b.Relative = v / 100
		default:
			if d, err := time.ParseDuration(part); err == nil && d >= 0 {
				b.Absolute = float64(d.Nanoseconds())
				continue
			}
			v, err := strconv.ParseFloat(part, 64)
			if err != nil || v < 0 {
				return b, fmt.Errorf("%q is neither a percentage (10%%), a duration (2ms) nor a number", part)
			}
			b.Absolute = v
		}
	}
	return b, nil
}
