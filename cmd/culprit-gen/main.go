// Command culprit-gen writes deterministic inputs for culprit: the built-in
// demo data set, and large inputs for benchmarks. It is a developer tool.
//
// Usage:
//
//	culprit-gen demo    -out DIR  [-seed N] [-plain-traces]
//	culprit-gen profile -out FILE [-samples N] [-stacks M] [-seed S]
//	culprit-gen spans   -out FILE [-spans N] [-seed S]
//
// The same seed always gives byte-identical files (default seed 1).
//
// # The demo scenario
//
// "greenhouse" is the web shop of an imaginary plant nursery: a Go service
// (module example.com/greenhouse, package main plus catalog, pricing,
// checkout, reports and inventory) behind net/http, using PostgreSQL through
// database/sql and the pgx driver, and a shipping carrier's HTTP API. Build
// v41 is the base, v42 the candidate. Routes and their share of requests:
//
//	GET /catalog           30%  category tree, variety listing, discounts, page
//	GET /plants/{id}       46%  one variety, discounts, page
//	POST /checkout         14%  cart, shipping quotes, discounts, order insert
//	GET /reports/monthly   10%  one heavy aggregate query, page
//
// Every request first passes the session middleware (cause 6 below).
//
// Planted causes of database and network time:
//
//  1. Per-item query loop: catalog.(*Service).List calls
//     catalog.(*Repo).VarietyByID once per variety (20–30 per request in
//     v41), each issuing "SELECT id, name, price_cents FROM varieties
//     WHERE id = <n>" through database/sql and pgx down to
//     internal/poll.runtime_pollWait.
//  2. Heavy single query: reports.(*Monthly).Build runs one large
//     aggregate SELECT … GROUP BY … per /reports/monthly request, most of
//     its time spent waiting in rows.Next.
//  3. Outbound call per item: checkout.(*Quoter).QuoteEach calls
//     net/http.(*Client).Do once per cart line (5–15 per request) on host
//     rates.carrier.test.
//  4. Recursion reaching the database: catalog.(*Tree).expand calls itself
//     2–4 levels deep, each level querying "SELECT id FROM categories WHERE
//     parent_id = <n>".
//  5. Pure CPU work that must not be charged: pricing.ApplyDiscounts (no
//     database or network below it); it dominates the CPU profile.
//  6. A query with no application frame above it: the invented third-party
//     session middleware github.com/mossgate/websession (in the module
//     cache) loads the session row before the request reaches the router;
//     its goroutine samples carry no route label because the application
//     sets the label later, in its own handler wrapper.
//
// v42 differs from v41 only in the listing loop: 35% more varieties per
// /catalog request, so cause 1 costs about 35% more per request; everything
// else is drawn from the same distributions.
//
// # The demo files
//
// Each request is simulated as a tree of timed calls (durations drawn from
// log-normal distributions), and every output is derived from those trees:
//
//   - greenhouse-v41.goroutine.{1,2,3}.pb.gz, greenhouse-v42.goroutine.{1,2,3}.pb.gz:
//     goroutine profiles (goroutine/count, period 1) taken 10 s apart while
//     requests arrive as a Poisson process (10,000/s for both builds, so a
//     build whose requests take longer has more of them in flight): the
//     stack of every request in flight at that instant, plus idle
//     goroutines (accept loop, keep-alive connections, the database pool's
//     opener, outbound keep-alive connections, an inventory syncer in
//     time.Sleep). Request samples carry the pprof label http.route.
//   - greenhouse-v42.cpu.pb.gz: a 30 s CPU profile (samples/count,
//     cpu/nanoseconds, period 10 ms); each stack's count is Poisson with
//     mean CPU time ÷ 10 ms; garbage collection adds 10%.
//   - greenhouse-v41.traces.jsonl.gz, greenhouse-v42.traces.jsonl.gz: 150
//     sampled requests per build (route mix exact, order random) as OTLP/JSON
//     lines, gzip-compressed so that the data set stays under 400 KB
//     (-plain-traces writes uncompressed .traces.jsonl files instead, about
//     5 MB together). Service greenhouse-web on two instances; SERVER, INTERNAL
//     (code.function.name), database CLIENT (db.system.name, db.query.text
//     with literals, …) and HTTP CLIENT spans; each trace's spans are spread
//     over 2–3 lines interleaved with other traces.
//
// Stacks follow what Go 1.26's runtime/pprof writes for a default build:
// leaf-first locations, inlined calls as extra lines of one location,
// $GOROOT/src, module-cache and absolute application file names.
//
// # Large inputs
//
// "profile" writes one CPU-like profile with -samples total sample count
// over -stacks distinct stacks (depth 10–40) of a synthetic code base
// shaped like greenhouse: application, library, database and network
// frames. "spans" streams -spans spans as OTLP/JSON lines, 20–60 per trace.
package main

import (
	"errors"
	"flag"
	"fmt"
	"io"
	"os"
	"path/filepath"
)

func main() {
	os.Exit(run(os.Args[1:], os.Stdout, os.Stderr))
}

// Exit statuses.
const (
	exitOK    = 0
	exitError = 1
	exitUsage = 2
)

// errUsage marks command-line mistakes; the usage has been printed.
var errUsage = errors.New("usage error")

const usage = `usage:
  culprit-gen demo    -out DIR  [-seed N] [-plain-traces]
  culprit-gen profile -out FILE [-samples N] [-stacks M] [-seed S]
  culprit-gen spans   -out FILE [-spans N] [-seed S]
`

// run executes one command and returns the process exit status.
func run(args []string, stdout, stderr io.Writer) int {
	if len(args) == 0 {
		fmt.Fprint(stderr, usage)
		return exitUsage
	}
	var err error
	switch args[0] {
	case "demo":
		err = demoCmd(args[1:], stdout, stderr)
	case "profile":
		err = profileCmd(args[1:], stdout, stderr)
	case "spans":
		err = spansCmd(args[1:], stdout, stderr)
	case "help", "-h", "-help", "--help":
		fmt.Fprint(stdout, usage)
		return exitOK
	default:
		fmt.Fprintf(stderr, "culprit-gen: unknown command %q; must be one of: demo, profile, spans\n%s", args[0], usage)
		return exitUsage
	}
	switch {
	case err == nil:
		return exitOK
	case errors.Is(err, flag.ErrHelp):
		return exitOK
	case errors.Is(err, errUsage):
		return exitUsage
	default:
		fmt.Fprintf(stderr, "culprit-gen %s: %v\n", args[0], err)
		return exitError
	}
}

// parseFlags parses a command's flags; positional arguments are an error.
func parseFlags(fs *flag.FlagSet, args []string, stderr io.Writer) error {
	fs.SetOutput(stderr)
	if err := fs.Parse(args); err != nil {
		if errors.Is(err, flag.ErrHelp) {
			return err
		}
		return errUsage
	}
	if fs.NArg() > 0 {
		fmt.Fprintf(stderr, "culprit-gen %s: unexpected argument %q\n", fs.Name(), fs.Arg(0))
		fs.Usage()
		return errUsage
	}
	return nil
}

func usageError(stderr io.Writer, fs *flag.FlagSet, format string, a ...any) error {
	fmt.Fprintf(stderr, "culprit-gen %s: %s\n", fs.Name(), fmt.Sprintf(format, a...))
	fs.Usage()
	return errUsage
}

func demoCmd(args []string, stdout, stderr io.Writer) error {
	fs := flag.NewFlagSet("demo", flag.ContinueOnError)
	var o demoOptions
	fs.StringVar(&o.out, "out", "", "output `directory` (created if missing)")
	fs.Uint64Var(&o.seed, "seed", 1, "random `seed`; the same seed gives the same files")
	fs.BoolVar(&o.plainTraces, "plain-traces", false, "write trace files uncompressed (.traces.jsonl)")
	if err := parseFlags(fs, args, stderr); err != nil {
		return err
	}
	if o.out == "" {
		return usageError(stderr, fs, "-out is required")
	}
	if err := runDemo(o); err != nil {
		return err
	}
	for _, n := range demoFiles(o.plainTraces) {
		fmt.Fprintln(stdout, filepath.Join(o.out, n))
	}
	return nil
}

func profileCmd(args []string, stdout, stderr io.Writer) error {
	fs := flag.NewFlagSet("profile", flag.ContinueOnError)
	var o bigProfileOptions
	var out string
	fs.StringVar(&out, "out", "", "output `file` (gzip-compressed pprof)")
	fs.Int64Var(&o.samples, "samples", 1_000_000, "total sample `count`")
	fs.IntVar(&o.stacks, "stacks", 50_000, "number of distinct `stacks` (pprof samples)")
	fs.Uint64Var(&o.seed, "seed", 1, "random `seed`")
	if err := parseFlags(fs, args, stderr); err != nil {
		return err
	}
	switch {
	case out == "":
		return usageError(stderr, fs, "-out is required")
	case o.stacks < 1:
		return usageError(stderr, fs, "-stacks must be at least 1, got %d", o.stacks)
	case o.samples < int64(o.stacks):
		return usageError(stderr, fs, "-samples (%d) must be at least -stacks (%d): every stack has one sample or more", o.samples, o.stacks)
	}
	p, err := bigProfile(o)
	if err != nil {
		return err
	}
	if err := writeFileAtomic(out, func(w io.Writer) error { return writeProfile(w, p) }); err != nil {
		return err
	}
	fmt.Fprintln(stdout, out)
	return nil
}

func spansCmd(args []string, stdout, stderr io.Writer) error {
	fs := flag.NewFlagSet("spans", flag.ContinueOnError)
	var o bigSpansOptions
	var out string
	fs.StringVar(&out, "out", "", "output `file` (OTLP/JSON lines)")
	fs.IntVar(&o.spans, "spans", 1_000_000, "total number of `spans`")
	fs.Uint64Var(&o.seed, "seed", 1, "random `seed`")
	if err := parseFlags(fs, args, stderr); err != nil {
		return err
	}
	switch {
	case out == "":
		return usageError(stderr, fs, "-out is required")
	case o.spans < 1:
		return usageError(stderr, fs, "-spans must be at least 1, got %d", o.spans)
	}
	if err := writeFileAtomic(out, func(w io.Writer) error { return writeBigSpans(w, o) }); err != nil {
		return err
	}
	fmt.Fprintln(stdout, out)
	return nil
}

// writeFileAtomic writes a file through write into a temporary file in the
// same directory and renames it into place, so that a failure never leaves
// a partial file at path.
func writeFileAtomic(path string, write func(io.Writer) error) (err error) {
	f, err := os.CreateTemp(filepath.Dir(path), "."+filepath.Base(path)+".tmp*")
	if err != nil {
		return fmt.Errorf("writing %s: %w", path, err)
	}
	defer func() {
		if err != nil {
			f.Close()
			os.Remove(f.Name())
		}
	}()
	if err := write(f); err != nil {
		return fmt.Errorf("writing %s: %w", path, err)
	}
	if err := f.Chmod(0o644); err != nil {
		return fmt.Errorf("writing %s: %w", path, err)
	}
	if err := f.Close(); err != nil {
		return fmt.Errorf("writing %s: %w", path, err)
	}
	if err := os.Rename(f.Name(), path); err != nil {
		return fmt.Errorf("writing %s: %w", path, err)
	}
	return nil
}
