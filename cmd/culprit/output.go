package main

import (
	"bufio"
	"bytes"
	"context"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"os"
	"path/filepath"
	"strconv"
	"strings"

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

// write renders to stdout, or to o.Output (see prepareOutput). A cancelled
// ctx stops the rendering and leaves no file behind.
func (o *outputFlags) write(ctx context.Context, s *streams, inputs []string, render func(io.Writer) error) error {
	if o.Output == "" || o.Output == "-" {
		testPause(ctx, s, "rendering")
		bw := bufio.NewWriter(ctxWriter{ctx, s.Out})
		if err := render(bw); err != nil {
			return err
		}
		return bw.Flush()
	}
	p, err := prepareOutput(ctx, s, o.Output, inputs, render)
	if err != nil {
		return err
	}
	return p.commit(ctx, s)
}

// writeWithSnapshot writes the report as write does and, when snapshot is
// set, the snapshot to save: both succeed or fail together. The snapshot
// is prepared first and put in place only once the report is written.
func (o *outputFlags) writeWithSnapshot(ctx context.Context, s *streams, inputs []string, save string,
	snapshot, render func(io.Writer) error) error {
	var pending *pendingOutput
	if snapshot != nil {
		var err error
		if pending, err = prepareOutput(ctx, s, save, inputs, snapshot); err != nil {
			return fmt.Errorf("writing snapshot: %w", err)
		}
		defer pending.discard()
	}
	if err := o.write(ctx, s, inputs, render); err != nil {
		return err
	}
	if pending != nil {
		if err := pending.commit(ctx, s); err != nil {
			return fmt.Errorf("writing snapshot: %w", err)
		}
	}
	return nil
}

// pendingOutput is a rendered output not yet in place: a synced temporary
// file beside a regular target, or the bytes for a device or FIFO. commit
// puts it in place; discard forgets it. Preparing every output of a run
// before committing any lets a report and its snapshot succeed or fail
// together.
type pendingOutput struct {
	path string
	tmp  string // temporary file renamed over path; "" for a direct target
	data []byte // what a direct target receives
	flag int    // how a direct target is opened
	done bool
}

// prepareOutput renders to a new path or a regular file through a
// temporary file in the same directory (synced, given the mode of the
// file it replaces), so that a failed run never leaves a half-written
// report and an existing file stays untouched. A character device or a
// FIFO (/dev/null, /dev/stdout, a named pipe) cannot be replaced by a
// rename: what goes there is rendered in memory and written straight to
// it at commit. A directory is refused, and so is any file among the
// inputs, directories expanded and symbolic links resolved.
func prepareOutput(ctx context.Context, s *streams, path string, inputs []string, render func(io.Writer) error) (*pendingOutput, error) {
	if err := checkNotInput(path, inputs); err != nil {
		return nil, err
	}
	st, err := os.Stat(path)
	direct, flag := false, os.O_WRONLY
	switch {
	case errors.Is(err, fs.ErrNotExist):
	case err != nil:
		return nil, err
	case st.IsDir():
		return nil, usagef("%s is a directory; name a file to write to", path)
	case st.Mode().IsRegular():
		// /dev/stdout, /dev/fd/N and /proc/self/fd/N name a descriptor
		// the shell opened, perhaps on a regular file: renaming over its
		// name would leave the descriptor's file unchanged. Write through
		// it instead, appending after what the file holds (nothing after
		// '>', the earlier lines after '>>').
		direct = strings.HasPrefix(path, "/dev/") || strings.HasPrefix(path, "/proc/")
		flag |= os.O_APPEND
	case st.Mode()&(fs.ModeCharDevice|fs.ModeNamedPipe) != 0:
		direct = true
	default:
		return nil, usagef("%s is neither a regular file, a character device nor a named pipe; not writing to it", path)
	}
	if direct {
		testPause(ctx, s, "rendering")
		var buf bytes.Buffer
		if err := render(ctxWriter{ctx, &buf}); err != nil {
			return nil, err
		}
		return &pendingOutput{path: path, data: buf.Bytes(), flag: flag}, ctx.Err()
	}
	// Write beside the file a symbolic link names, so that the rename
	// replaces the file and keeps the link.
	target := path
	if st != nil {
		if target, err = filepath.EvalSymlinks(path); err != nil {
			return nil, err
		}
	}
	abs, err := filepath.Abs(target)
	if err != nil {
		return nil, err
	}
	// CreateTemp makes the file 0600: give it the mode of the file it
	// replaces, or the usual 0644 for a new report.
	mode := os.FileMode(0o644)
	if st != nil {
		mode = st.Mode().Perm()
	}
	tmp, err := os.CreateTemp(filepath.Dir(abs), "."+filepath.Base(abs)+".tmp-*")
	if err != nil {
		return nil, err
	}
	p := &pendingOutput{path: abs, tmp: tmp.Name()}
	err = func() error {
		if err := tmp.Chmod(mode); err != nil {
			return err
		}
		testPause(ctx, s, "rendering")
		bw := bufio.NewWriter(ctxWriter{ctx, tmp})
		if err := render(bw); err != nil {
			return err
		}
		if err := bw.Flush(); err != nil {
			return err
		}
		return tmp.Sync()
	}()
	if cerr := tmp.Close(); err == nil {
		err = cerr
	}
	if err == nil {
		err = ctx.Err()
	}
	if err != nil {
		p.discard()
		return nil, err
	}
	return p, nil
}

// commit puts p in place, unless ctx is done: then p is discarded.
func (p *pendingOutput) commit(ctx context.Context, s *streams) error {
	testPause(ctx, s, "writing")
	if err := ctx.Err(); err != nil {
		p.discard()
		return err
	}
	p.done = true
	if p.tmp == "" {
		// Opening a FIFO waits for its reader, and writing to it for room:
		// neither may hold the command against a signal.
		_, err := await(ctx, func() (struct{}, error) {
			f, err := os.OpenFile(p.path, p.flag, 0)
			if err != nil {
				return struct{}{}, err
			}
			_, err = f.Write(p.data)
			if cerr := f.Close(); err == nil {
				err = cerr
			}
			return struct{}{}, err
		})
		return err
	}
	if err := os.Rename(p.tmp, p.path); err != nil {
		os.Remove(p.tmp)
		return err
	}
	return nil
}

// discard removes p's temporary file, if it is not committed. It may be
// called any number of times.
func (p *pendingOutput) discard() {
	if p == nil || p.done {
		return
	}
	p.done = true
	if p.tmp != "" {
		os.Remove(p.tmp)
	}
}

// checkNotInput refuses to write to path when it is one of the inputs:
// the arguments as given, every file found below an input directory, and
// whatever a symbolic link among them names.
func checkNotInput(path string, inputs []string) error {
	out, err := os.Stat(path)
	if err != nil {
		out = nil // a new path is no input, unless an input names it the same
	}
	abs, _ := filepath.Abs(path)
	files := inputs
	if expanded, err := expandInputs(inputs); err == nil {
		files = append(expanded, inputs...)
	}
	for _, in := range files {
		if in == "-" {
			continue
		}
		if inAbs, err := filepath.Abs(in); err == nil && inAbs == abs {
			return usagef("refusing to write over input file %s", path)
		}
		if out != nil && out.Mode().IsRegular() {
			if st, err := os.Stat(in); err == nil && os.SameFile(st, out) {
				return usagef("refusing to write over input file %s (it is %s)", path, in)
			}
		}
	}
	return nil
}

// ctxWriter fails its writes once ctx is done, so that an interrupt stops
// a long rendering promptly.
type ctxWriter struct {
	ctx context.Context
	w   io.Writer
}

func (c ctxWriter) Write(p []byte) (int, error) {
	if err := c.ctx.Err(); err != nil {
		return 0, err
	}
	return c.w.Write(p)
}
