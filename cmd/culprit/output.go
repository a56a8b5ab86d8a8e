package main

import (
	"bufio"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strconv"

	"github.com/culprithq/culprit/report"
	"github.com/spf13/cobra"
)

// outputFlags are the flags of every command that renders a report.
type outputFlags struct {
	Format string
	Output string
	Limit  int
	Color  string
	Width  int
	// limitSet records an explicit --limit: without one the JSON and CSV
	// formats carry every row.
	limitSet func() bool
}

func (o *outputFlags) register(cmd *cobra.Command, formats []string) {
	fl := cmd.Flags()
	fl.StringVar(&o.Format, "format", "", fmt.Sprintf("output format: %v (default text)", formats))
	fl.StringVarP(&o.Output, "output", "o", "", "write the report to `FILE` (atomically) instead of standard output")
	fl.IntVar(&o.Limit, "limit", 20, "show at most N root causes (0 = all; json and csv show all unless given)")
	fl.IntVar(&o.Width, "width", 0, "lay the text format out for `N` columns (default: the terminal's, else $COLUMNS, else 100)")
	o.limitSet = func() bool { return fl.Changed("limit") }
	fl.StringVar(&o.Color, "color", "auto", "colour the text format: auto, always or never (NO_COLOR is respected)")
}

// renderOptions derives report options from the flags and the streams.
func (o *outputFlags) renderOptions(s *streams) (report.Options, error) {
	opts := report.Options{Limit: o.Limit, Width: s.Width}
	if o.Limit < 0 {
		return opts, usagef("--limit must be 0 or more")
	}
	if (o.Format == "json" || o.Format == "csv") && (o.limitSet == nil || !o.limitSet()) {
		opts.Limit = 0
	}
	if o.Width < 0 {
		return opts, usagef("--width must be 0 or more")
	}
	switch o.Color {
	case "always":
		opts.Color = true
	case "never":
	case "auto":
		opts.Color = s.OutIsTerminal && o.Output == "" && s.Getenv("NO_COLOR") == ""
	default:
		return opts, usagef("--color must be one of: auto, always, never")
	}
	if !s.OutIsTerminal || opts.Width <= 0 {
		opts.Width = 0
		if n, err := strconv.Atoi(s.Getenv("COLUMNS")); err == nil && n > 0 && o.Output == "" {
			opts.Width = n
		}
	}
	if o.Output != "" {
		opts.Width = 0
	}
	if o.Width > 0 {
		opts.Width = o.Width
	}
	return opts, nil
}

// write renders to stdout, or atomically to o.Output: a temporary file in
// the same directory, synced and renamed, so that a failed run never
// leaves a half-written report and an existing file stays untouched.
func (o *outputFlags) write(s *streams, inputs []string, render func(io.Writer) error) error {
	if o.Output == "" || o.Output == "-" {
		return render(s.Out)
	}
	return writeAtomic(o.Output, inputs, render)
}

func writeAtomic(path string, inputs []string, render func(io.Writer) error) error {
	abs, err := filepath.Abs(path)
	if err != nil {
		return err
	}
	for _, in := range inputs {
		if inAbs, err := filepath.Abs(in); err == nil && inAbs == abs {
			return usagef("refusing to write the report over input file %s", path)
		}
		if st1, err1 := os.Stat(in); err1 == nil {
			if st2, err2 := os.Stat(path); err2 == nil && os.SameFile(st1, st2) {
				return usagef("refusing to write the report over input file %s", path)
			}
		}
	}
	// CreateTemp makes the file 0600: give it the mode of the file it
	// replaces, or the usual 0644 for a new report.
	mode := os.FileMode(0o644)
	if st, err := os.Stat(abs); err == nil {
		mode = st.Mode().Perm()
	}
	tmp, err := os.CreateTemp(filepath.Dir(abs), "."+filepath.Base(abs)+".tmp-*")
	if err != nil {
		return err
	}
	if err := tmp.Chmod(mode); err != nil {
		tmp.Close()
		os.Remove(tmp.Name())
		return err
	}
	ok := false
	defer func() {
		if !ok {
			tmp.Close()
			os.Remove(tmp.Name())
		}
	}()
	bw := bufio.NewWriter(tmp)
	if err := render(bw); err != nil {
		return err
	}
	if err := bw.Flush(); err != nil {
		return err
	}
	if err := tmp.Sync(); err != nil {
		return err
	}
	if err := tmp.Close(); err != nil {
		return err
	}
	if err := os.Rename(tmp.Name(), abs); err != nil {
		return err
	}
	ok = true
	return nil
}
