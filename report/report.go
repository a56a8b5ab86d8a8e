package report

import (
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"

	"github.com/culprithq/culprit/attribute"
)

// Provenance records how a report was produced, so that it can be reproduced.
type Provenance struct {
	Command string   `json:"command"`
	Version string   `json:"version"`
	Options []string `json:"options,omitempty"`
}

// Options control rendering. The zero value renders every row without colour.
type Options struct {
	// Limit caps the number of root causes shown; 0 shows all.
	Limit int
	// Color enables ANSI colour in the text format.
	Color bool
	// Width is the terminal width for the text format; 0 means 100.
	Width int
	// Provenance is printed in formats that carry it.
	Provenance Provenance
}

// Renderer writes a rank result in one format.
type Renderer interface {
	Render(w io.Writer, r *attribute.Result, opts Options) error
}

// shown returns the causes to show under opts.Limit.
func shown(r *attribute.Result, opts Options) []*attribute.Cause {
	if opts.Limit > 0 && len(r.Causes) > opts.Limit {
		return r.Causes[:opts.Limit]
	}
	return r.Causes
}

// FormatValue renders v in the unit of the value type: durations for
// nanoseconds, binary sizes for bytes, plain numbers otherwise.
func FormatValue(v int64, unit string) string {
	switch unit {
	case "nanoseconds":
		return formatDuration(float64(v))
	case "bytes":
		return formatBytes(float64(v))
	}
	return strconv.FormatInt(v, 10)
}

func formatDuration(ns float64) string {
	abs := math.Abs(ns)
	if abs < 0.5 {
		return "0"
	}
	switch {
	case abs >= 3600e9:
		return strconv.FormatFloat(ns/3600e9, 'f', 2, 64) + "h"
	case abs >= 60e9:
		return strconv.FormatFloat(ns/60e9, 'f', 2, 64) + "min"
	case abs >= 1e9:
		return strconv.FormatFloat(ns/1e9, 'f', 2, 64) + "s"
	case abs >= 1e6:
		return strconv.FormatFloat(ns/1e6, 'f', 1, 64) + "ms"
	case abs >= 1e3:
		return strconv.FormatFloat(ns/1e3, 'f', 1, 64) + "µs"
	}
	return strconv.FormatFloat(ns, 'f', 0, 64) + "ns"
}

func formatBytes(b float64) string {
	if b == 0 {
		return "0"
	}
	units := []string{"B", "KiB", "MiB", "GiB", "TiB"}
	i := 0
	for math.Abs(b) >= 1024 && i < len(units)-1 {
		b /= 1024
		i++
	}
	if i == 0 {
		return strconv.FormatFloat(b, 'f', 0, 64) + "B"
	}
	return strconv.FormatFloat(b, 'f', 1, 64) + units[i]
}

// Percent renders a share as a percentage with one decimal.
func Percent(share float64) string {
	return strconv.FormatFloat(share*100, 'f', 1, 64) + "%"
}

// Caveats returns the sentences a reader must see next to the numbers.
func Caveats(r *attribute.Result) []string {
	out := append([]string(nil), r.Notes...)
	if r.CPUOnly {
		out = append(out, "This is a CPU profile: it counts time on CPU only. Time spent waiting for a database or a socket is not in it, so database and network shares understate their wall-clock cost; use goroutine profiles taken during the load test, or traces, for waiting time.")
	}
	if r.Sampled {
		out = append(out, "Shares are estimated from samples; ± is a 95% margin (1.96 binomial standard errors).")
	}
	if r.Inclusive {
		out = append(out, "Inclusive view: every application function above a boundary is charged, so shares add up to more than 100%.")
	}
	if len(r.Helpers) > 0 {
		out = append(out, HelpersSummary(r))
	}
	for _, c := range r.Causes {
		if c.NoAppFrame {
			out = append(out, "Some cost has no application frame above the database or network call; name your code with --app PREFIX (or a rules file) if detection missed it.")
			break
		}
	}
	return out
}

// HelpersSummary names the shared helpers the attribution saw through.
func HelpersSummary(r *attribute.Result) string {
	parts := make([]string, 0, len(r.Helpers))
	for i, h := range r.Helpers {
		if i == 5 {
			parts = append(parts, fmt.Sprintf("and %d more (the JSON format lists all)", len(r.Helpers)-5))
			break
		}
		if h.Named {
			parts = append(parts, h.Function+" (named)")
		} else {
			parts = append(parts, fmt.Sprintf("%s (%d callers in %d packages)", h.Function, h.Callers, h.Packages))
		}
	}
	return "Shared helpers seen through (their callers are charged; --helpers=off charges the helpers): " + strings.Join(parts, ", ") + "."
}

// AppSummary describes what was taken as application code.
func AppSummary(r *attribute.Result) string {
	if len(r.App.Prefixes) > 0 {
		return "application code: --app " + strings.Join(r.App.Prefixes, ", ")
	}
	if len(r.App.Detected) == 0 {
		return "application code: none detected (use --app PREFIX)"
	}
	parts := make([]string, 0, len(r.App.Detected))
	for i, d := range r.App.Detected {
		if i == 4 {
			parts = append(parts, fmt.Sprintf("and %d more", len(r.App.Detected)-4))
			break
		}
		parts = append(parts, fmt.Sprintf("%s (%d functions: %s)", d.Prefix, d.Functions, d.Reason))
	}
	return "application code detected: " + strings.Join(parts, "; ")
}
