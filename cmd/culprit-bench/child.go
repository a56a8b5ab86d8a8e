package main

import (
	"bufio"
	"bytes"
	"encoding/json"
	"fmt"
	"io"
	"os"
	"slices"

	"github.com/google/pprof/profile"
	tracepb "go.opentelemetry.io/proto/otlp/trace/v1"
	"google.golang.org/protobuf/encoding/protojson"
)

// Phase names. The child phases are run by culprit-bench re-executing
// itself with -phase; the others run the culprit binary.
const (
	phaseBaselineSelf    = "baseline-self"
	phaseBaselineCulprit = "baseline-culprit"
	phasePprofParse      = "pprof-parse"
	phasePprofRank       = "pprof-rank"
	phaseOTLPProtojson   = "otlp-protojson"
	phaseOTLPRank        = "otlp-rank"
	phaseOTLPRank10x     = "otlp-rank-10x"
)

// childPhases are the phases culprit-bench runs in a child of itself.
var childPhases = []string{phaseBaselineSelf, phasePprofParse, phaseOTLPProtojson}

func isChildPhase(name string) bool { return slices.Contains(childPhases, name) }

// childResult is what a child phase prints on standard output (one JSON
// object): how much it decoded, so the parent can check it did the work.
type childResult struct {
	Phase string `json:"phase"`
	// Samples is the sum of the first sample value over all samples of a
	// profile (the total sample count for a count-valued profile).
	Samples int64 `json:"samples,omitempty"`
	// Stacks is the number of pprof samples (distinct stacks).
	Stacks int64 `json:"stacks,omitempty"`
	// Lines and Spans are the non-blank JSON lines and spans decoded.
	Lines int64 `json:"lines,omitempty"`
	Spans int64 `json:"spans,omitempty"`
}

// maxLine is the longest JSON line the reference decode reads, in bytes
// (culprit's default limit).
const maxLine = 256 << 20

// runChildPhase runs one reference phase on file in and prints its
// childResult to w.
func runChildPhase(phase, in string, w io.Writer) error {
	res := childResult{Phase: phase}
	var err error
	switch phase {
	case phaseBaselineSelf:
		// Start-up only.
	case phasePprofParse:
		err = pprofParse(in, &res)
	case phaseOTLPProtojson:
		err = otlpProtojson(in, &res)
	default:
		err = fmt.Errorf("unknown phase %q", phase)
	}
	if err != nil {
		return err
	}
	return json.NewEncoder(w).Encode(res)
}

// pprofParse reads a profile with profile.Parse, as culprit's pprof reader
// has to at least.
func pprofParse(name string, res *childResult) error {
	f, err := os.Open(name)
	if err != nil {
		return err
	}
	defer f.Close()
	p, err := profile.Parse(f)
	if err != nil {
		return fmt.Errorf("parsing %s: %w", name, err)
	}
	res.Stacks = int64(len(p.Sample))
	for _, s := range p.Sample {
		if len(s.Value) > 0 {
			res.Samples += s.Value[0]
		}
	}
	return nil
}

// otlpProtojson is the reference decode of an OTLP/JSON-lines file: every
// line is unmarshalled with protojson into the official OTLP protobuf Go
// type, one line at a time, on one goroutine, ignoring unknown fields as
// the OTLP spec requires of receivers.
//
// protojson reads the hex traceId/spanId/parentSpanId of OTLP/JSON as
// base64 (hex digits are valid base64), so the IDs it produces are wrong
// (24 and 12 bytes instead of 16 and 8), without an error. A correct
// decoder would rewrite them first, which costs more; the reference is
// only about decode cost, so the lines are decoded as they are, which
// makes the reference, if anything, a little faster than a correct one.
func otlpProtojson(name string, res *childResult) error {
	f, err := os.Open(name)
	if err != nil {
		return err
	}
	defer f.Close()
	sc := bufio.NewScanner(f)
	sc.Buffer(make([]byte, 0, 1<<20), maxLine)
	opts := protojson.UnmarshalOptions{DiscardUnknown: true}
	var line int64
	for sc.Scan() {
		line++
		b := sc.Bytes()
		if len(bytes.TrimSpace(b)) == 0 {
			continue
		}
		var td tracepb.TracesData
		if err := opts.Unmarshal(b, &td); err != nil {
			return fmt.Errorf("%s:%d: %w", name, line, err)
		}
		res.Lines++
		for _, rs := range td.GetResourceSpans() {
			for _, ss := range rs.GetScopeSpans() {
				res.Spans += int64(len(ss.GetSpans()))
			}
		}
	}
	if err := sc.Err(); err != nil {
		return fmt.Errorf("%s:%d: %w", name, line+1, err)
	}
	return nil
}
