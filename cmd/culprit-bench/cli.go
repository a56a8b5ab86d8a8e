package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"os"
	"os/signal"
	"strings"
)

// Exit statuses.
const (
	exitOK    = 0
	exitError = 1
	exitUsage = 2
)

// errUsage marks command-line mistakes; the message has been printed.
var errUsage = errors.New("usage error")

// Hidden flags, used only when culprit-bench re-executes itself to run a
// reference phase; they are left out of the usage text.
const (
	flagPhase = "phase"
	flagIn    = "in"
)

const usageHead = `usage:
  culprit-bench -gen DIR [-spans-n N] [-samples N] [-stacks M] [-scale] [-runs K] [-culprit PATH] [-pgo FILE]
  culprit-bench [-profile FILE] [-spans FILE] [-spans-big FILE -scale] [-runs K] [-culprit PATH]

Measures culprit rank against its performance targets; run it from inside
the culprit module. Flags:
`

// run executes culprit-bench and returns the process exit status.
func run(args []string, stdout, stderr io.Writer) int {
	cfg, phase, in, err := parseArgs(args, stderr)
	switch {
	case errors.Is(err, flag.ErrHelp):
		return exitOK
	case err != nil:
		return exitUsage
	}
	if phase != "" {
		if err := runChildPhase(phase, in, stdout); err != nil {
			fmt.Fprintf(stderr, "culprit-bench -phase %s: %v\n", phase, err)
			return exitError
		}
		return exitOK
	}
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt)
	defer stop()
	rep, err := runHarness(ctx, cfg, stderr)
	if err != nil {
		fmt.Fprintf(stderr, "culprit-bench: %v\n", err)
		return exitError
	}
	if err := rep.render(stdout); err != nil {
		fmt.Fprintf(stderr, "culprit-bench: %v\n", err)
		return exitError
	}
	return exitOK
}

// parseArgs parses the command line. A non-empty phase means that this
// process is a child running one reference phase on file in.
func parseArgs(args []string, stderr io.Writer) (cfg config, phase, in string, err error) {
	fs := flag.NewFlagSet("culprit-bench", flag.ContinueOnError)
	fs.SetOutput(stderr)
	fs.StringVar(&cfg.Profile, "profile", "", "pprof `file` to measure (pprof-parse, pprof-rank)")
	fs.StringVar(&cfg.Spans, "spans", "", "OTLP/JSON-lines `file` to measure (otlp-protojson, otlp-rank)")
	fs.StringVar(&cfg.SpansBig, "spans-big", "", "OTLP/JSON-lines `file` with 10× the spans of -spans, for -scale")
	fs.StringVar(&cfg.GenDir, "gen", "", "generate the inputs not given by -profile/-spans into `dir` with cmd/culprit-gen")
	fs.IntVar(&cfg.SpansN, "spans-n", 1_000_000, "spans to generate with -gen (`count`)")
	fs.Int64Var(&cfg.Samples, "samples", 1_000_000, "total sample `count` of the profile generated with -gen")
	fs.IntVar(&cfg.Stacks, "stacks", 50_000, "distinct `stacks` of the profile generated with -gen")
	fs.BoolVar(&cfg.Reuse, "reuse", false, "with -gen, reuse generated files already in the directory")
	fs.BoolVar(&cfg.Scale, "scale", false, "also rank 10× the spans and report the time ratio")
	fs.StringVar(&cfg.Culprit, "culprit", "", "culprit binary to measure (`path`; default: go build ./cmd/culprit)")
	fs.IntVar(&cfg.Runs, "runs", 3, "runs of every phase (`count`); the table shows the median")
	fs.StringVar(&cfg.PGO, "pgo", "", "write the merged CPU profile of the culprit rank runs to `file` (cmd/culprit/default.pgo); the timings then include the profiler")
	fs.StringVar(&phase, flagPhase, "", "internal: run one reference phase in this process")
	fs.StringVar(&in, flagIn, "", "internal: input file of -phase")
	fs.Usage = func() {
		fmt.Fprint(stderr, usageHead)
		printVisibleDefaults(fs, stderr)
	}
	if err := fs.Parse(args); err != nil {
		return cfg, "", "", err
	}
	fail := func(format string, a ...any) (config, string, string, error) {
		fmt.Fprintf(stderr, "culprit-bench: %s\n", fmt.Sprintf(format, a...))
		fs.Usage()
		return cfg, "", "", errUsage
	}
	if fs.NArg() > 0 {
		return fail("unexpected argument %q", fs.Arg(0))
	}
	if phase != "" {
		if !isChildPhase(phase) {
			return fail("-phase must be one of: %s; got %q", strings.Join(childPhases, ", "), phase)
		}
		if phase != phaseBaselineSelf && in == "" {
			return fail("-phase %s needs -in", phase)
		}
		return cfg, phase, in, nil
	}
	switch {
	case cfg.Runs < 1:
		return fail("-runs must be at least 1, got %d", cfg.Runs)
	case cfg.GenDir == "" && cfg.Profile == "" && cfg.Spans == "":
		return fail("give -gen DIR, or -profile and/or -spans")
	case cfg.GenDir != "" && cfg.SpansN < 1:
		return fail("-spans-n must be at least 1, got %d", cfg.SpansN)
	case cfg.GenDir != "" && cfg.Stacks < 1:
		return fail("-stacks must be at least 1, got %d", cfg.Stacks)
	case cfg.GenDir != "" && cfg.Samples < int64(cfg.Stacks):
		return fail("-samples (%d) must be at least -stacks (%d)", cfg.Samples, cfg.Stacks)
	case cfg.SpansBig != "" && !cfg.Scale:
		return fail("-spans-big is only used with -scale")
	case cfg.Scale && cfg.GenDir == "" && (cfg.Spans == "" || cfg.SpansBig == ""):
		return fail("-scale needs -gen DIR, or both -spans and -spans-big")
	case cfg.Scale && cfg.Spans != "" && cfg.SpansBig == "":
		return fail("-scale with -spans needs -spans-big (10× the spans)")
	}
	return cfg, "", "", nil
}

// printVisibleDefaults prints the flag defaults without the hidden ones.
func printVisibleDefaults(fs *flag.FlagSet, w io.Writer) {
	visible := flag.NewFlagSet(fs.Name(), flag.ContinueOnError)
	visible.SetOutput(w)
	fs.VisitAll(func(f *flag.Flag) {
		if f.Name != flagPhase && f.Name != flagIn {
			visible.Var(f.Value, f.Name, f.Usage)
			visible.Lookup(f.Name).DefValue = f.DefValue
		}
	})
	visible.PrintDefaults()
}
