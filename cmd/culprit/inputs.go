package main

import (
	"context"
	"fmt"
	"io"
	"io/fs"
	"os"
	"path/filepath"
	"runtime/debug"
	"sort"
	"strings"

	"github.com/culprithq/culprit/attribute"
	"github.com/culprithq/culprit/callgraph"
	"github.com/culprithq/culprit/traces"
	"github.com/culprithq/culprit/traces/statement"
	"github.com/spf13/cobra"
)

// analysisFlags are the flags shared by every command that reads inputs
// and attributes them.
type analysisFlags struct {
	App           []string
	RulesFiles    []string
	Value         string
	EntryLabels   []string
	RequestLabels []string
	Inclusive     bool
	ShowLiterals  bool
	KeepGoing     bool
	Strict        bool
	Service       string
	Source        string
	Limits        traces.Limits
	Findings      attribute.FindingOptions
	DomainsFile   string
	Helpers       string   // --helpers: auto or off
	HelperNames   []string // --helper

	// fsys, when set, is where inputs are opened (the embedded demo data);
	// names are then taken as given, without directory expansion.
	fsys fs.FS
	// skipDigest spares hashing the inputs when nothing shows the digests,
	// and dropVectors keeping the per-request vectors when no snapshot is
	// made.
	skipDigest, dropVectors bool
	// timing keeps each span's start and parent, for the latency view.
	timing bool
}

func (f *analysisFlags) register(cmd *cobra.Command) {
	fl := cmd.Flags()
	fl.StringArrayVar(&f.App, "app", nil, "function-name or file-path `PREFIX` of application code (repeatable; default: auto-detect)")
	fl.StringArrayVar(&f.RulesFiles, "rules", nil, "JSON rules `FILE` that adds or overrides classification rules (repeatable)")
	fl.StringVar(&f.Value, "value", "", "sample type to charge, e.g. cpu or goroutine (default: the profile's default)")
	fl.StringArrayVar(&f.EntryLabels, "entry-label", nil, "profile label `KEY` naming the entry point (default: route, http.route, endpoint)")
	fl.StringArrayVar(&f.RequestLabels, "request-label", nil, "profile label `KEY` naming the request (default: request_id, request, trace_id)")
	fl.BoolVar(&f.Inclusive, "inclusive", false, "charge every application function above the call, not only the nearest")
	fl.StringVar(&f.Helpers, "helpers", "auto", "shared access helpers (your own SQL wrapper called from many packages): auto sees through them to their callers, off charges them")
	fl.StringArrayVar(&f.HelperNames, "helper", nil, "function `NAME` (or package/type prefix ending in . or /) of a shared helper to see through (repeatable)")
	fl.BoolVar(&f.ShowLiterals, "show-literals", false, "show statements with their literal values (may expose personal data)")
	fl.BoolVar(&f.KeepGoing, "keep-going", false, "skip unreadable files and lines, listing them as warnings")
	fl.BoolVar(&f.Strict, "strict", false, "treat every repaired span problem (orphans, duplicates, cycles, skew) as an error")
	fl.StringVar(&f.Service, "service", "", "analyse only spans of this service.name (default: the services that receive requests from outside)")
	fl.StringVar(&f.Source, "source", "", "read only `KIND` of input, traces, profiles or exectraces (Go execution traces), from inputs that hold several, skipping the others")
	fl.StringVar(&f.DomainsFile, "domains", "", "JSON `FILE` mapping business domains to function patterns; rolls root causes up by domain")
	fl.Int64Var(&f.Limits.MaxBytes, "max-bytes", traces.DefaultLimits.MaxBytes, "largest decompressed input in bytes")
	fl.Int64Var(&f.Limits.MaxRatio, "max-ratio", traces.DefaultLimits.MaxRatio, "largest decompression ratio of a gzip input")
	fl.IntVar(&f.Limits.MaxLineBytes, "max-line-bytes", traces.DefaultLimits.MaxLineBytes, "longest JSON line in bytes")
	fl.IntVar(&f.Limits.MaxDepth, "max-depth", traces.DefaultLimits.MaxDepth, "deepest JSON nesting and call path")
	fl.IntVar(&f.Limits.MaxFrames, "max-frames", traces.DefaultLimits.MaxFrames, "most distinct frames in one run")
	fl.IntVar(&f.Findings.RepeatMin, "repeat-min", attribute.DefaultFindingOptions.RepeatMin, "same statement this many times in one request is a repeated-statement finding")
	fl.IntVar(&f.Findings.PerItemMin, "per-item-min", attribute.DefaultFindingOptions.PerItemMin, "network calls to one peer this many times in one request is a per-item-calls finding")
	fl.Float64Var(&f.Findings.MinRequestShare, "min-request-share", attribute.DefaultFindingOptions.MinRequestShare, "fraction of a root cause's requests a pattern must occur in")
}

// rules returns the effective rules: user files first, then built-ins.
func (f *analysisFlags) rules() (*attribute.Rules, error) {
	rules := attribute.DefaultRules()
	for _, name := range f.RulesFiles {
		fh, err := os.Open(name)
		if err != nil {
			return nil, err
		}
		user, err := attribute.ParseRulesFile(name, fh)
		fh.Close()
		if err != nil {
			return nil, err
		}
		rules = attribute.Merge(rules, user)
	}
	rules.App = append(rules.App, f.App...)
	rules.Helpers = append(rules.Helpers, f.HelperNames...)
	return rules, nil
}

// allInputs is args and every other file the analysis reads: rules and
// domains files, which no output may replace either.
func (f *analysisFlags) allInputs(args []string) []string {
	all := append(append([]string(nil), args...), f.RulesFiles...)
	if f.DomainsFile != "" {
		all = append(all, f.DomainsFile)
	}
	return all
}

// expandInputs turns the command's arguments into named readers: files,
// every regular file below a directory (sorted, hidden names skipped), or
// "-" for standard input. Symbolic links are followed, a directory argument
// given as a link too; below a directory each directory and each file is
// read once, however many links lead to it, so that a link to an ancestor
// (a loop) adds nothing.
func expandInputs(args []string) ([]string, error) {
	var out []string
	for _, a := range args {
		if a == "-" {
			out = append(out, a)
			continue
		}
		st, err := os.Stat(a)
		if err != nil {
			return nil, err
		}
		if !st.IsDir() {
			out = append(out, a)
			continue
		}
		w := dirWalker{seen: map[fileID]bool{}}
		if err := w.walk(a, st); err != nil {
			return nil, err
		}
		if len(w.found) == 0 {
			return nil, fmt.Errorf("%s: directory has no input files", a)
		}
		sort.Strings(w.found)
		out = append(out, w.found...)
	}
	return out, nil
}

// dirWalker lists the regular files below a directory, following symbolic
// links, each directory and file once.
type dirWalker struct {
	found   []string
	seen    map[fileID]bool
	seenDir []os.FileInfo // directories, where no fileID is available
}

// visit reports whether st is seen for the first time, and records it.
func (w *dirWalker) visit(st os.FileInfo) bool {
	if id, ok := idOf(st); ok {
		if w.seen[id] {
			return false
		}
		w.seen[id] = true
		return true
	}
	if !st.IsDir() {
		return true
	}
	for _, d := range w.seenDir {
		if os.SameFile(d, st) {
			return false
		}
	}
	w.seenDir = append(w.seenDir, st)
	return true
}

func (w *dirWalker) walk(dir string, st os.FileInfo) error {
	if !w.visit(st) {
		return nil
	}
	entries, err := os.ReadDir(dir)
	if err != nil {
		return err
	}
	for _, e := range entries {
		if strings.HasPrefix(e.Name(), ".") {
			continue
		}
		p := filepath.Join(dir, e.Name())
		if e.Type().IsRegular() {
			if info, err := e.Info(); err != nil || w.visit(info) {
				w.found = append(w.found, p)
			}
			continue
		}
		if e.Type()&fs.ModeSymlink == 0 && !e.IsDir() {
			continue // devices, sockets and pipes are read only when named
		}
		info, err := os.Stat(p) // follows a link
		switch {
		case err != nil:
			if e.Type()&fs.ModeSymlink != 0 {
				return fmt.Errorf("%s: broken symbolic link: %w", p, err)
			}
			return err
		case info.IsDir():
			if err := w.walk(p, info); err != nil {
				return err
			}
		case info.Mode().IsRegular() && w.visit(info):
			w.found = append(w.found, p)
		}
	}
	return nil
}

// load reads every input into one source. It returns as soon as ctx is
// done, even while a read is blocked (see await).
func (f *analysisFlags) load(ctx context.Context, s *streams, args []string) (*traces.Source, error) {
	kind, err := traces.ParseKind(f.Source)
	if err != nil {
		return nil, usagef("--source: %v", err)
	}
	names := args
	if f.fsys == nil {
		var err error
		if names, err = expandInputs(args); err != nil {
			return nil, err
		}
	}
	var total int64
	if s.ErrIsTerminal {
		for _, name := range names {
			if st, err := os.Stat(name); err == nil && f.fsys == nil && name != "-" {
				total += st.Size()
			}
		}
	}
	// Finished here, not in read: an interrupted run clears the progress
	// line before it says why it stopped.
	prog := startProgress(s.Err, s.ErrIsTerminal, total)
	defer prog.Finish()
	return await(ctx, func() (*traces.Source, error) { return f.read(ctx, s, names, kind, prog) })
}

func (f *analysisFlags) read(ctx context.Context, s *streams, names []string, kind traces.Kind, prog *progress) (*traces.Source, error) {
	opts := traces.Options{
		Source:     kind,
		Limits:     f.Limits,
		KeepGoing:  f.KeepGoing,
		Strict:     f.Strict,
		Service:    f.Service,
		SkipDigest: f.skipDigest,
		Timing:     f.timing,

		ShowLiterals: f.ShowLiterals,
	}
	if !f.ShowLiterals {
		// Fingerprint while decoding: literals never reach memory, and calls
		// that differ only in literals are held once.
		opts.Statement = statement.AppendText
	}
	loader := traces.NewLoader(opts)
	testPause(ctx, s, "reading")
	stdinUsed := false
	for _, name := range names {
		if err := ctx.Err(); err != nil {
			return nil, err
		}
		if name == "-" {
			if stdinUsed {
				return nil, usagef("- (standard input) given more than once")
			}
			stdinUsed = true
			if err := loader.Add("<stdin>", ctxReader{ctx, prog.reader(s.In)}); err != nil {
				return nil, err
			}
			continue
		}
		// Each input is closed as soon as it is read: a directory of
		// thousands of files stays within the descriptor limit.
		fh, err := f.open(name)
		if err != nil {
			if f.KeepGoing {
				if err := loader.Add(name, errReader{err}); err != nil {
					return nil, err
				}
				continue
			}
			return nil, err
		}
		err = loader.AddSized(name, ctxReader{ctx, prog.reader(fh)}, regularSize(fh))
		fh.Close()
		if err != nil {
			return nil, err
		}
	}
	src, err := loader.Source()
	debug.FreeOSMemory()
	if _, set := os.LookupEnv("GOGC"); !set {
		// The source is the live heap from here on, and the analysis
		// adds tallies to it (see analysisGCPercent).
		debug.SetGCPercent(analysisGCPercent(liveHeap()))
	}
	return src, err
}

// regularSize returns the size of a regular file, -1 for anything else
// (a FIFO, a device) or when it cannot be known.
func regularSize(f io.Reader) int64 {
	st, ok := f.(interface{ Stat() (fs.FileInfo, error) })
	if !ok {
		return -1
	}
	fi, err := st.Stat()
	if err != nil || !fi.Mode().IsRegular() {
		return -1
	}
	return fi.Size()
}

// ctxReader fails its reads once ctx is done, so that an interrupt stops
// a long read promptly.
type ctxReader struct {
	ctx context.Context
	r   io.Reader
}

func (c ctxReader) Read(p []byte) (int, error) {
	if err := c.ctx.Err(); err != nil {
		return 0, err
	}
	return c.r.Read(p)
}

func (f *analysisFlags) open(name string) (io.ReadCloser, error) {
	if f.fsys != nil {
		return f.fsys.Open(name)
	}
	return os.Open(name)
}

type errReader struct{ err error }

func (e errReader) Read([]byte) (int, error) { return 0, e.err }

// analyse builds the tree, classifies and attributes src. It returns as
// soon as ctx is done (see await).
func (f *analysisFlags) analyse(ctx context.Context, s *streams, src *traces.Source, rules *attribute.Rules) (*attribute.Result, error) {
	return await(ctx, func() (*attribute.Result, error) {
		testPause(ctx, s, "analysis")
		return f.attribute(src, rules)
	})
}

func (f *analysisFlags) attribute(src *traces.Source, rules *attribute.Rules) (*attribute.Result, error) {
	tree, cls, _, err := f.build(src, rules)
	if err != nil {
		return nil, err
	}
	res := attribute.Attribute(tree, cls, f.attributeOptions())
	if f.DomainsFile != "" {
		fh, err := os.Open(f.DomainsFile)
		if err != nil {
			return nil, err
		}
		defer fh.Close()
		d, err := attribute.ParseDomainsFile(f.DomainsFile, fh)
		if err != nil {
			return nil, err
		}
		d.Rollup(res)
	}
	return res, nil
}

// built is what build makes.
type built struct {
	tree  *callgraph.Tree
	cls   *attribute.Classifier
	value int
}

// buildCtx is build, returning as soon as ctx is done (see await).
func (f *analysisFlags) buildCtx(ctx context.Context, s *streams, src *traces.Source, rules *attribute.Rules) (built, error) {
	return await(ctx, func() (built, error) {
		testPause(ctx, s, "analysis")
		tree, cls, vi, err := f.build(src, rules)
		return built{tree, cls, vi}, err
	})
}

// build checks --value against src, classifies src's frames and builds its
// calling-context tree, cut at database and network boundaries (nothing
// below them is needed). It returns the index of the value charged.
func (f *analysisFlags) build(src *traces.Source, rules *attribute.Rules) (*callgraph.Tree, *attribute.Classifier, int, error) {
	vi, err := src.ValueIndex(f.Value)
	if err != nil {
		return nil, nil, 0, usagef("--value: %v", err)
	}
	if _, err := attribute.ParseHelperMode(f.Helpers); err != nil && f.Helpers != "" {
		return nil, nil, 0, usagef("--helpers must be one of: %s", strings.Join(attribute.HelperModes, ", "))
	}
	cls := attribute.NewClassifier(src, rules)
	return callgraph.NewTree(src, callgraph.TreeOptions{Keep: cls.Keep}), cls, vi, nil
}

func (f *analysisFlags) attributeOptions() attribute.Options {
	return attribute.Options{
		Value:              f.Value,
		Inclusive:          f.Inclusive,
		Helpers:            f.helperMode(),
		EntryLabels:        f.EntryLabels,
		RequestLabels:      f.RequestLabels,
		ShowLiterals:       f.ShowLiterals,
		Findings:           f.Findings,
		DropRequestVectors: f.dropVectors,
	}
}

// helperMode returns --helpers as a mode (build has checked it; unset
// means auto).
func (f *analysisFlags) helperMode() attribute.HelperMode {
	m, _ := attribute.ParseHelperMode(f.Helpers)
	return m
}
