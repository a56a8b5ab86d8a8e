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
	fl.BoolVar(&f.ShowLiterals, "show-literals", false, "show statements with their literal values (may expose personal data)")
	fl.BoolVar(&f.KeepGoing, "keep-going", false, "skip unreadable files and lines, listing them as warnings")
	fl.BoolVar(&f.Strict, "strict", false, "treat every repaired span problem (orphans, duplicates, cycles, skew) as an error")
	fl.StringVar(&f.Service, "service", "", "analyse only spans of this service.name (default: the services that receive requests from outside)")
	fl.StringVar(&f.Source, "source", "", "read only `KIND` of input, traces or profiles, from inputs that hold both, skipping the other")
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
	return rules, nil
}

// expandInputs turns the command's arguments into named readers: files,
// every regular file below a directory (sorted, hidden names skipped),
// or "-" for standard input.
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
		var found []string
		err = filepath.WalkDir(a, func(p string, d fs.DirEntry, err error) error {
			if err != nil {
				return err
			}
			if strings.HasPrefix(d.Name(), ".") && p != a {
				if d.IsDir() {
					return filepath.SkipDir
				}
				return nil
			}
			if d.Type().IsRegular() {
				found = append(found, p)
			}
			return nil
		})
		if err != nil {
			return nil, err
		}
		if len(found) == 0 {
			return nil, fmt.Errorf("%s: directory has no input files", a)
		}
		sort.Strings(found)
		out = append(out, found...)
	}
	return out, nil
}

// load reads every input into one source.
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
	opts := traces.Options{
		Source:     kind,
		Limits:     f.Limits,
		KeepGoing:  f.KeepGoing,
		Strict:     f.Strict,
		Service:    f.Service,
		SkipDigest: f.skipDigest,
		Timing:     f.timing,
	}
	if !f.ShowLiterals {
		// Fingerprint while decoding: literals never reach memory, and calls
		// that differ only in literals are held once.
		opts.Statement = attribute.AppendFingerprint
	}
	loader := traces.NewLoader(opts)
	var total int64
	for _, name := range names {
		if st, err := os.Stat(name); err == nil && f.fsys == nil && name != "-" {
			total += st.Size()
		}
	}
	prog := startProgress(s.Err, s.ErrIsTerminal, total)
	defer prog.Finish()
	stdinUsed := false
	for _, name := range names {
		if err := ctx.Err(); err != nil {
			return nil, err
		}
		var r io.Reader
		if name == "-" {
			if stdinUsed {
				return nil, usagef("- (standard input) given more than once")
			}
			stdinUsed = true
			r = s.In
			name = "<stdin>"
		} else {
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
			r = fh
			defer fh.Close()
		}
		if err := loader.Add(name, ctxReader{ctx, prog.reader(r)}); err != nil {
			return nil, err
		}
	}
	src, err := loader.Source()
	debug.FreeOSMemory()
	return src, err
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

// analyse builds the tree, classifies and attributes src.
func (f *analysisFlags) analyse(src *traces.Source, rules *attribute.Rules) (*attribute.Result, error) {
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

// build checks --value against src, classifies src's frames and builds its
// calling-context tree, cut at database and network boundaries (nothing
// below them is needed). It returns the index of the value charged.
func (f *analysisFlags) build(src *traces.Source, rules *attribute.Rules) (*callgraph.Tree, *attribute.Classifier, int, error) {
	vi, err := src.ValueIndex(f.Value)
	if err != nil {
		return nil, nil, 0, usagef("--value: %v", err)
	}
	cls := attribute.NewClassifier(src, rules)
	return callgraph.NewTree(src, callgraph.TreeOptions{Keep: cls.Keep}), cls, vi, nil
}

func (f *analysisFlags) attributeOptions() attribute.Options {
	return attribute.Options{
		Value:              f.Value,
		Inclusive:          f.Inclusive,
		EntryLabels:        f.EntryLabels,
		RequestLabels:      f.RequestLabels,
		ShowLiterals:       f.ShowLiterals,
		Findings:           f.Findings,
		DropRequestVectors: f.dropVectors,
	}
}
