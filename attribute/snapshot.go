package attribute

import (
	"bytes"
	"cmp"
	"encoding/json"
	"errors"
	"fmt"
	"github.com/culprithq/culprit/attribute/stats"
	"io"
	"math"
	"slices"
	"sort"
	"strconv"

	"github.com/culprithq/culprit/traces"
)

// SnapshotSchema is the schema (name and major version) of the snapshot
// documents this package writes and reads. Fields may be added within a
// version; a change that old readers would misread changes the version.
const SnapshotSchema = "culprit.snapshot/v1"

// MaxVectorValues is the most values a snapshot keeps per cause for each
// per-request vector (CappedValues). Beyond it a vector is thinned by a
// deterministic systematic subsample; see CappedValues for the error.
const MaxVectorValues = 20000

// maxSnapshotBytes bounds the size of a snapshot document ReadSnapshot
// accepts (1 GiB): far above what MaxVectorValues allows for thousands of
// causes, low enough to fail cleanly on a wrong file.
const maxSnapshotBytes = 1 << 30

// Sentinel errors of ReadSnapshot, MergeSnapshots and CheckComparable, for
// errors.Is.
var (
	// ErrSnapshotSchema means the document is not a snapshot of a schema
	// version this package reads.
	ErrSnapshotSchema = errors.New("unsupported snapshot schema")
	// ErrSnapshotInvalid means the document is a snapshot whose values
	// break its invariants (negative costs, unsorted vectors, ...).
	ErrSnapshotInvalid = errors.New("invalid snapshot")
	// ErrSnapshotMismatch means snapshots cannot be merged or compared:
	// they differ in what they measure or in how code was classified.
	ErrSnapshotMismatch = errors.New("snapshots do not match")
	// ErrSameData means snapshots to be merged hold some of the same
	// data: an input with the same digest, or the same segment of one
	// listener's capture. Adding them up would count it twice.
	ErrSameData = errors.New("snapshots hold the same data")
)

// SnapshotError reports a problem in a snapshot document. Line and Column
// (1-based, Column in bytes) locate it when known; they are 0 otherwise.
type SnapshotError struct {
	File   string
	Line   int
	Column int
	Err    error
}

// Error returns "file:line:column: message", or "file: message" when the
// position is unknown.
func (e *SnapshotError) Error() string {
	if e.Line > 0 {
		return fmt.Sprintf("%s:%d:%d: %v", e.File, e.Line, e.Column, e.Err)
	}
	return fmt.Sprintf("%s: %v", e.File, e.Err)
}

// Unwrap returns the underlying error.
func (e *SnapshotError) Unwrap() error { return e.Err }

// Snapshot is the saved form of one attribution (rank --save): a versioned
// JSON document ("schema": SnapshotSchema, lowerCamelCase fields) holding
// everything a later comparison or report needs, so that a build can be
// compared without its original inputs. Snapshots of shards of one run
// merge (MergeSnapshots). Slices keep the order of the Result they come
// from: causes by cost descending, then function, file and line.
type Snapshot struct {
	// Schema is SnapshotSchema.
	Schema string `json:"schema"`
	// SourceKind is "profile" or "spans".
	SourceKind string           `json:"sourceKind"`
	ValueType  traces.ValueType `json:"valueType"`
	// Sampled is true for profiles: costs are estimates from samples.
	Sampled bool `json:"sampled"`
	// CPUOnly is true when the value type measures on-CPU time only.
	CPUOnly bool `json:"cpuOnly"`
	// Inclusive is true when the attribution used the inclusive view.
	Inclusive bool `json:"inclusive"`
	// DurationNanos is the wall-clock time the inputs cover (0 if unknown).
	DurationNanos int64           `json:"durationNanos"`
	Totals        Totals          `json:"totals"`
	App           AppInfo         `json:"app"`
	Inputs        []traces.Input  `json:"inputs"`
	Entries       []EntryTotal    `json:"entryPoints"`
	Causes        []SnapshotCause `json:"rootCauses"`
	Findings      []Finding       `json:"findings"`
	Warnings      []string        `json:"warnings"`

	// name is the file the snapshot was read from, for messages.
	name string
}

// SnapshotCause is one root cause in a Snapshot: the fields of Cause that
// are not derived from the totals, its Identity, and its per-request
// vectors. Share and ShareMargin are recomputed from the totals.
type SnapshotCause struct {
	Function string `json:"function"`
	// Identity is Identity(Function): the key that matches the cause
	// across builds. ReadSnapshot recomputes it, so that snapshots saved
	// by an older culprit match by the current rules.
	Identity   string `json:"identity"`
	File       string `json:"file,omitempty"`
	Line       int64  `json:"line,omitempty"`
	Kind       Kind   `json:"kind"`
	NoAppFrame bool   `json:"noAppFrame,omitempty"`
	// Cost = Database + Network, in the unit of the snapshot's value type.
	Cost     int64 `json:"cost"`
	Database int64 `json:"database"`
	Network  int64 `json:"network"`
	// Samples is the number of samples (profiles) or spans behind Cost.
	Samples int64 `json:"samples"`
	// Calls counts outbound calls (spans only; 0 when unknown).
	Calls int64 `json:"calls"`
	// Requests is the number of requests in which the cause appears.
	Requests        int           `json:"requests"`
	CallsPerRequest *Distribution `json:"callsPerRequest,omitempty"`
	CallSites       []CallSite    `json:"callSites"`
	Statements      []Detail      `json:"statements"`
	EntryPoints     []EntryShare  `json:"entries"`
	// RequestCosts holds the charged cost in each request where the cause
	// appears (nil when requests are unknown); RequestCalls the calls in
	// each such request (spans only).
	RequestCosts *CappedValues `json:"requestCosts,omitempty"`
	RequestCalls *CappedValues `json:"requestCalls,omitempty"`
}

// CappedValues is a mergeable sample of non-negative per-request values.
//
// Up to MaxVectorValues values it holds all of them. Beyond that it holds a
// systematic subsample of the sorted values: the k = MaxVectorValues order
// statistics at ranks ⌊(i+½)·Count/k⌋, i = 0…k−1, each standing for
// Count/k values. Sum stays exact, so means (Sum/Count, or Sum over all
// requests) are exact. The thinning error is bounded: the empirical
// distribution of Values differs from that of all values by at most 1/k in
// every quantile (Kolmogorov distance ≤ 1/k), and the plain mean of Values
// differs from the exact mean by at most (max − min)/k, because each kept
// value lies inside the block of Count/k consecutive order statistics it
// stands for. Merging thinned vectors (MergeSnapshots) thins again and can
// add the same error once more. Tests run on a thinned vector see k values,
// not Count: their p-values and intervals are those of a smaller sample,
// i.e. conservative.
type CappedValues struct {
	// Values are ascending, finite and non-negative; at most
	// MaxVectorValues of them.
	Values []float64 `json:"values"`
	// Count is the number of values Values stands for (≥ len(Values)).
	Count int64 `json:"count"`
	// Sum is the exact sum of all Count values.
	Sum float64 `json:"sum"`
}

// newCappedValues returns the capped form of the ascending values sorted,
// or nil for an empty slice.
func newCappedValues(sorted []float64) *CappedValues {
	if len(sorted) == 0 {
		return nil
	}
	s := 0.0
	for _, v := range sorted {
		s += v
	}
	return &CappedValues{Values: systematic(sorted, MaxVectorValues), Count: int64(len(sorted)), Sum: s}
}

// systematic returns sorted itself when it has at most k values, else the k
// values at ranks ⌊(i+½)·n/k⌋ in a new slice.
func systematic(sorted []float64, k int) []float64 {
	n := len(sorted)
	if n <= k {
		return sorted
	}
	out := make([]float64, k)
	for i := range out {
		out[i] = sorted[int((float64(i)+0.5)*float64(n)/float64(k))]
	}
	return out
}

// mergeCapped merges capped vectors as if all the values they stand for
// were pooled: unthinned vectors whose values fit are concatenated; else
// each value weighs Count/len(Values) and the result is the systematic
// subsample of the weighted pooled distribution. Nil vectors are skipped;
// the result is nil when all are nil.
func mergeCapped(vs ...*CappedValues) *CappedValues {
	var out CappedValues
	exact := true
	n := 0
	for _, v := range vs {
		if v == nil {
			continue
		}
		out.Count += v.Count
		out.Sum += v.Sum
		n += len(v.Values)
		if int64(len(v.Values)) != v.Count {
			exact = false
		}
	}
	if out.Count == 0 {
		return nil
	}
	if exact && n <= MaxVectorValues {
		out.Values = make([]float64, 0, n)
		for _, v := range vs {
			if v != nil {
				out.Values = append(out.Values, v.Values...)
			}
		}
		slices.Sort(out.Values)
		return &out
	}
	type wv struct{ v, w float64 }
	pool := make([]wv, 0, n)
	for _, v := range vs {
		if v == nil || len(v.Values) == 0 {
			continue
		}
		w := float64(v.Count) / float64(len(v.Values))
		for _, x := range v.Values {
			pool = append(pool, wv{x, w})
		}
	}
	if len(pool) == 0 {
		return nil // counts without values: not a valid vector
	}
	slices.SortStableFunc(pool, func(a, b wv) int { return cmp.Compare(a.v, b.v) })
	k := int(min(out.Count, MaxVectorValues))
	out.Values = make([]float64, k)
	total := float64(out.Count)
	j, cum := 0, pool[0].w
	for i := range out.Values {
		target := (float64(i) + 0.5) * total / float64(k)
		for cum <= target && j < len(pool)-1 {
			j++
			cum += pool[j].w
		}
		out.Values[i] = pool[j].v
	}
	return &out
}

// NewSnapshot returns the snapshot of r. The snapshot shares no memory
// with r except strings.
func NewSnapshot(r *Result) *Snapshot {
	s := &Snapshot{
		Schema:        SnapshotSchema,
		SourceKind:    r.Source,
		ValueType:     r.ValueType,
		Sampled:       r.Sampled,
		CPUOnly:       r.CPUOnly,
		Inclusive:     r.Inclusive,
		DurationNanos: r.DurationNanos,
		Totals:        r.Totals,
		App:           cloneApp(r.App),
		Inputs:        slices.Clone(r.Inputs),
		Entries:       slices.Clone(r.Entries),
		Findings:      cloneFindings(r.Findings),
		Warnings:      slices.Clone(r.Warnings),
	}
	if r.Causes != nil {
		s.Causes = make([]SnapshotCause, len(r.Causes))
	}
	for i, c := range r.Causes {
		s.Causes[i] = SnapshotCause{
			Function:        c.Function,
			Identity:        Identity(c.Function),
			File:            c.File,
			Line:            c.Line,
			Kind:            c.Kind,
			NoAppFrame:      c.NoAppFrame,
			Cost:            c.Cost,
			Database:        c.Database,
			Network:         c.Network,
			Samples:         c.Samples,
			Calls:           c.Calls,
			Requests:        c.Requests,
			CallsPerRequest: cloneDist(c.CallsPerRequest),
			CallSites:       slices.Clone(c.CallSites),
			Statements:      slices.Clone(c.Statements),
			EntryPoints:     slices.Clone(c.EntryPoints),
			RequestCosts:    cloneCapped(newCappedValues(c.requestCosts)),
			RequestCalls:    cloneCapped(newCappedValues(c.requestCalls)),
		}
	}
	return s
}

// Result returns the attribution the snapshot was made from: the same
// ranking, totals, statements, entries and findings, with Share and
// ShareMargin recomputed from the totals as Attribute computes them. A
// Result made from a snapshot differs from the original only in its
// unexported per-request vectors when these were thinned (see
// CappedValues): Cause.RequestCosts then returns the subsample.
func (s *Snapshot) Result() *Result {
	r := &Result{
		Inputs:        slices.Clone(s.Inputs),
		Source:        s.SourceKind,
		ValueType:     s.ValueType,
		Sampled:       s.Sampled,
		CPUOnly:       s.CPUOnly,
		Inclusive:     s.Inclusive,
		Totals:        s.Totals,
		App:           cloneApp(s.App),
		Entries:       slices.Clone(s.Entries),
		Findings:      cloneFindings(s.Findings),
		Warnings:      slices.Clone(s.Warnings),
		DurationNanos: s.DurationNanos,
	}
	denom := s.Totals.Database + s.Totals.Network
	if s.Causes != nil {
		r.Causes = make([]*Cause, len(s.Causes))
	}
	for i := range s.Causes {
		sc := &s.Causes[i]
		c := &Cause{
			Function:        sc.Function,
			File:            sc.File,
			Line:            sc.Line,
			Kind:            sc.Kind,
			NoAppFrame:      sc.NoAppFrame,
			Cost:            sc.Cost,
			Database:        sc.Database,
			Network:         sc.Network,
			Samples:         sc.Samples,
			Calls:           sc.Calls,
			Requests:        sc.Requests,
			CallsPerRequest: cloneDist(sc.CallsPerRequest),
			CallSites:       slices.Clone(sc.CallSites),
			Statements:      slices.Clone(sc.Statements),
			EntryPoints:     slices.Clone(sc.EntryPoints),
		}
		if sc.RequestCosts != nil {
			c.requestCosts = slices.Clone(sc.RequestCosts.Values)
		}
		if sc.RequestCalls != nil {
			c.requestCalls = slices.Clone(sc.RequestCalls.Values)
		}
		c.Share, c.ShareMargin = shareOf(c.Cost, c.Samples, denom, s.Totals.BoundarySamples, s.Sampled)
		r.Causes[i] = c
	}
	return r
}

// shareOf returns a cause's share of denom and its 95 % binomial margin, as
// Attribute computes them (causeAcc.finish): the margin only for sampled
// sources, with the cause's samples capped at the boundary samples.
func shareOf(cost, samples, denom, boundarySamples int64, sampled bool) (share, margin float64) {
	if denom > 0 {
		share = float64(cost) / float64(denom)
	}
	if sampled && boundarySamples > 0 {
		k := min(samples, boundarySamples)
		margin = 1.96 * stats.BinomialSE(int(k), int(boundarySamples))
	}
	return share, margin
}

// Write writes s as indented JSON followed by a newline.
func (s *Snapshot) Write(w io.Writer) error {
	enc := json.NewEncoder(w)
	enc.SetIndent("", "  ")
	enc.SetEscapeHTML(false)
	if err := enc.Encode(s); err != nil {
		return fmt.Errorf("writing snapshot: %w", err)
	}
	return nil
}

// ReadSnapshot reads a snapshot document written by Snapshot.Write. name
// labels the input in errors. A document of another schema version fails
// with ErrSnapshotSchema naming the version found; malformed JSON fails
// with the line and column of the problem; a snapshot that breaks its
// invariants (see Snapshot.Validate) fails with ErrSnapshotInvalid. Every
// error is a *SnapshotError.
func ReadSnapshot(name string, r io.Reader) (*Snapshot, error) {
	data, err := io.ReadAll(io.LimitReader(r, maxSnapshotBytes+1))
	if err != nil {
		return nil, &SnapshotError{File: name, Err: fmt.Errorf("reading: %w", err)}
	}
	if len(data) > maxSnapshotBytes {
		return nil, &SnapshotError{File: name, Err: fmt.Errorf("%w: larger than %d bytes", ErrSnapshotInvalid, maxSnapshotBytes)}
	}
	posErr := func(off int64, err error) error {
		line, col := lineCol(data, off)
		return &SnapshotError{File: name, Line: line, Column: col, Err: err}
	}
	decode := func(v any) error {
		dec := json.NewDecoder(bytes.NewReader(data))
		if err := dec.Decode(v); err != nil {
			var se *json.SyntaxError
			var te *json.UnmarshalTypeError
			switch {
			case errors.As(err, &se):
				return posErr(max(0, se.Offset-1), err) // Offset is just past the bad byte
			case errors.As(err, &te):
				return posErr(valueStart(data, te.Offset), err)
			case errors.Is(err, io.EOF):
				return &SnapshotError{File: name, Err: fmt.Errorf("%w: the file is empty", ErrSnapshotInvalid)}
			case errors.Is(err, io.ErrUnexpectedEOF):
				return posErr(int64(len(data)), fmt.Errorf("truncated JSON: %w", err))
			}
			return posErr(dec.InputOffset(), err)
		}
		if _, err := dec.Token(); !errors.Is(err, io.EOF) {
			return posErr(dec.InputOffset(), errors.New("unexpected data after the snapshot document"))
		}
		return nil
	}
	// The schema is checked before the body is decoded, so that another
	// version's layout is reported as such and not as a type error.
	var head struct {
		Schema *string `json:"schema"`
	}
	if err := decode(&head); err != nil {
		return nil, err
	}
	switch {
	case head.Schema == nil:
		return nil, &SnapshotError{File: name, Err: fmt.Errorf("%w: no \"schema\" field; not a culprit snapshot (want %q)", ErrSnapshotSchema, SnapshotSchema)}
	case *head.Schema != SnapshotSchema:
		return nil, &SnapshotError{File: name, Err: fmt.Errorf("%w %q; this culprit reads %q (re-save the snapshot with a matching culprit)", ErrSnapshotSchema, *head.Schema, SnapshotSchema)}
	}
	s := &Snapshot{}
	if err := decode(s); err != nil {
		return nil, err
	}
	// Identities are recomputed: a snapshot saved by an older culprit
	// matches causes by the rules of this one.
	for i := range s.Causes {
		s.Causes[i].Identity = Identity(s.Causes[i].Function)
	}
	if err := s.Validate(); err != nil {
		return nil, &SnapshotError{File: name, Err: err}
	}
	s.name = name
	return s, nil
}

// valueStart returns the offset where the JSON value that ends at off
// starts, for a string, a literal or an opening bracket; otherwise off.
// encoding/json reports type errors just past the offending value.
func valueStart(data []byte, off int64) int64 {
	if off <= 0 || off > int64(len(data)) {
		return off
	}
	i := off - 1
	switch c := data[i]; {
	case c == '[' || c == '{':
		return i
	case c == '"':
		for j := i - 1; j >= 0; j-- {
			if data[j] == '"' && (j == 0 || data[j-1] != '\\') {
				return j
			}
		}
	case literalByte(c):
		for i > 0 && literalByte(data[i-1]) {
			i--
		}
		return i
	}
	return off
}

func literalByte(c byte) bool {
	return c >= '0' && c <= '9' || c >= 'a' && c <= 'z' || c >= 'A' && c <= 'Z' || c == '.' || c == '-' || c == '+'
}

// Validate checks the invariants of a snapshot: the schema; non-negative
// totals, costs, counts and durations; Unattributed ≤ Database + Network;
// each cause's Cost = Database + Network and a kind that matches its
// split; per-request vectors with finite, non-negative, ascending values,
// no more than MaxVectorValues of them, standing for at least as many
// values as they hold and at most Totals.Requests, and summing to Sum when
// not thinned. Errors wrap ErrSnapshotInvalid (or ErrSnapshotSchema).
func (s *Snapshot) Validate() error {
	bad := func(format string, args ...any) error {
		return fmt.Errorf("%w: %s", ErrSnapshotInvalid, fmt.Sprintf(format, args...))
	}
	if s.Schema != SnapshotSchema {
		return fmt.Errorf("%w %q; want %q", ErrSnapshotSchema, s.Schema, SnapshotSchema)
	}
	switch s.SourceKind {
	case traces.Profile.String(), traces.Spans.String(), traces.ExecTrace.String():
	default:
		return bad("sourceKind %q is none of %q, %q, %q", s.SourceKind, traces.Profile, traces.Spans, traces.ExecTrace)
	}
	if s.ValueType.Type == "" {
		return bad("valueType has no type")
	}
	t := s.Totals
	for _, f := range []struct {
		name string
		v    int64
	}{
		{"durationNanos", s.DurationNanos}, {"totals.cost", t.Cost}, {"totals.database", t.Database},
		{"totals.network", t.Network}, {"totals.other", t.Other}, {"totals.unattributed", t.Unattributed},
		{"totals.requests", int64(t.Requests)}, {"totals.samples", t.Samples}, {"totals.boundarySamples", t.BoundarySamples},
	} {
		if f.v < 0 {
			return bad("%s is negative (%d)", f.name, f.v)
		}
	}
	if t.Unattributed > t.Database+t.Network {
		return bad("totals.unattributed %d exceeds database+network %d", t.Unattributed, t.Database+t.Network)
	}
	for i := range s.Causes {
		c := &s.Causes[i]
		where := "rootCauses[" + strconv.Itoa(i) + "] (" + strconv.Quote(c.Function) + ")"
		if c.Function == "" {
			return bad("rootCauses[%d] has no function", i)
		}
		if c.Cost < 0 || c.Database < 0 || c.Network < 0 || c.Samples < 0 || c.Calls < 0 || c.Requests < 0 {
			return bad("%s has a negative cost or count", where)
		}
		if c.Cost != c.Database+c.Network {
			return bad("%s: cost %d is not database %d + network %d", where, c.Cost, c.Database, c.Network)
		}
		if k := kindOf(c.Database, c.Network); c.Cost > 0 && c.Kind != k {
			return bad("%s: kind %q, want %q for its split", where, c.Kind, k)
		}
		if c.Requests > t.Requests && t.Requests > 0 {
			return bad("%s appears in %d requests of %d", where, c.Requests, t.Requests)
		}
		for _, v := range []struct {
			name string
			cv   *CappedValues
		}{{"requestCosts", c.RequestCosts}, {"requestCalls", c.RequestCalls}} {
			if err := v.cv.validate(int64(t.Requests)); err != nil {
				return bad("%s.%s: %v", where, v.name, err)
			}
		}
	}
	return nil
}

func (v *CappedValues) validate(requests int64) error {
	if v == nil {
		return nil
	}
	n := int64(len(v.Values))
	switch {
	case n > MaxVectorValues:
		return fmt.Errorf("%d values, more than %d", n, MaxVectorValues)
	case v.Count < n:
		return fmt.Errorf("count %d is below its %d values", v.Count, n)
	case n == 0 && v.Count > 0:
		return fmt.Errorf("count %d with no values", v.Count)
	case requests > 0 && v.Count > requests:
		return fmt.Errorf("count %d exceeds the %d requests", v.Count, requests)
	case !(v.Sum >= 0) || math.IsInf(v.Sum, 1):
		return fmt.Errorf("sum %v is not a finite non-negative number", v.Sum)
	}
	for i, x := range v.Values {
		if !(x >= 0) || math.IsInf(x, 1) {
			return fmt.Errorf("value %d (%v) is not finite and non-negative", i, x)
		}
		if i > 0 && x < v.Values[i-1] {
			return fmt.Errorf("values are not ascending at %d", i)
		}
	}
	if n == v.Count {
		var s float64
		for _, x := range v.Values {
			s += x
		}
		if math.Abs(s-v.Sum) > 1e-9*math.Max(1, math.Abs(v.Sum)) {
			return fmt.Errorf("sum %v differs from the sum of its values %v", v.Sum, s)
		}
	}
	return nil
}

// MergeSnapshots merges snapshots of shards of one run (for example one
// per instance of a service, or one per file of a split export) into the
// snapshot of the whole run. The shards must measure the same thing: the
// same source kind, value type, view (exclusive or inclusive), application
// prefixes and rules files; otherwise the error (wrapping
// ErrSnapshotMismatch) names the first difference and the shards involved.
//
// The shards are assumed to hold disjoint requests, as shards of one run
// do: totals, request counts and costs add; inputs and warnings are
// concatenated in argument order; causes merge by function (within one
// build the same function has the same name, and merging by function keeps
// the ranking that attributing all inputs together gives), entry points by
// name, call sites, statements and per-cause entries by their keys; the
// per-request vectors are pooled (then capped, see CappedValues), and
// calls per request are recomputed from the pooled vector.
//
// What cannot be recombined exactly: profile durations add up (as when
// profiles are loaded together), but span durations take the maximum,
// since shards of one trace export cover the same period; auto-detected
// application roots keep the largest function count seen in a shard; and
// a repeated-statement or per-item-calls finding reported by several
// shards adds its cost and request counts but keeps the per-request
// distribution and evidence of the shard where it fired in the most
// requests (a finding's threshold is applied per shard). Share fields are
// recomputed. The merged snapshot says so in its warnings when any of these
// apply. One snapshot merges to a copy of itself; none is an error.
func MergeSnapshots(snaps ...*Snapshot) (*Snapshot, error) {
	if len(snaps) == 0 {
		return nil, errors.New("no snapshot to merge")
	}
	first := snaps[0]
	if len(snaps) == 1 && first != nil {
		return first.clone(), nil
	}
	for i, s := range snaps {
		if s == nil {
			return nil, fmt.Errorf("snapshot %d is nil", i+1)
		}
		if i == 0 {
			continue
		}
		if err := mergeable(first, s); err != nil {
			return nil, fmt.Errorf("cannot merge %s with %s: %w", snapLabel(s, i), snapLabel(first, 0), err)
		}
	}
	out := &Snapshot{
		Schema:     SnapshotSchema,
		SourceKind: first.SourceKind,
		ValueType:  first.ValueType,
		Sampled:    first.Sampled,
		CPUOnly:    first.CPUOnly,
		Inclusive:  first.Inclusive,
		App: AppInfo{
			Prefixes:   slices.Clone(first.App.Prefixes),
			RulesFiles: slices.Clone(first.App.RulesFiles),
		},
	}
	var notes []string
	spans := first.SourceKind == traces.Spans.String()
	if err := distinctData(snaps); err != nil {
		return nil, err
	}
	for _, s := range snaps {
		if spans {
			out.DurationNanos = max(out.DurationNanos, s.DurationNanos)
		} else {
			out.DurationNanos += s.DurationNanos
		}
		addTotals(&out.Totals, s.Totals)
		out.Inputs = append(out.Inputs, s.Inputs...)
		out.Warnings = append(out.Warnings, s.Warnings...)
	}
	if spans && len(snaps) > 1 {
		notes = append(notes, "merged span shards: duration is the longest shard's (shards are taken to cover the same period)")
	}
	detected, same := mergeDetected(snaps)
	out.App.Detected = detected
	if !same {
		notes = append(notes, "shards auto-detected different application code; pass --app to classify all shards alike")
	}
	out.Entries = mergeEntries(snaps)
	out.Causes = mergeCauses(snaps)
	var approx bool
	out.Findings, approx = mergeFindings(snaps, out.Totals.Database+out.Totals.Network)
	if approx {
		notes = append(notes, "findings reported by several shards keep the per-request figures of the shard where they fired most")
	}
	out.Warnings = append(out.Warnings, notes...)
	return out, nil
}

// distinctData fails with ErrSameData when two snapshots share an input:
// the same digest, or the same segment of one listener's capture (its
// instance ID and sequence number), which identify the data whatever the
// file is called.
func distinctData(snaps []*Snapshot) error {
	seen := map[string]int{}
	for i, s := range snaps {
		for _, in := range s.Inputs {
			keys := []string{}
			if in.SHA256 != "" {
				keys = append(keys, "sha256 "+in.SHA256)
			}
			if in.Segment != nil {
				keys = append(keys, fmt.Sprintf("segment %d of listener run %s", in.Segment.Sequence, in.Segment.Instance))
			}
			for _, k := range keys {
				if j, ok := seen[k]; ok && j != i {
					return fmt.Errorf("%w: input %s of %s is also in %s (%s); merging would count its data twice",
						ErrSameData, in.Name, snapLabel(s, i), snapLabel(snaps[j], j), k)
				}
				seen[k] = i
			}
		}
	}
	return nil
}

// snapLabel names snapshot i (0-based) in messages: its file when read
// from one, else its position and first input.
func snapLabel(s *Snapshot, i int) string {
	switch {
	case s.name != "":
		return s.name
	case len(s.Inputs) > 0:
		return fmt.Sprintf("snapshot %d (%s)", i+1, s.Inputs[0].Name)
	}
	return fmt.Sprintf("snapshot %d", i+1)
}

// mergeable reports how b differs from a in what it measures, or nil.
func mergeable(a, b *Snapshot) error {
	switch {
	case a.SourceKind != b.SourceKind:
		return fmt.Errorf("%w: source kind %s vs %s", ErrSnapshotMismatch, b.SourceKind, a.SourceKind)
	case a.ValueType != b.ValueType:
		return fmt.Errorf("%w: value type %s vs %s", ErrSnapshotMismatch, b.ValueType, a.ValueType)
	case a.Inclusive != b.Inclusive:
		return fmt.Errorf("%w: inclusive view %t vs %t", ErrSnapshotMismatch, b.Inclusive, a.Inclusive)
	case !slices.Equal(a.App.Prefixes, b.App.Prefixes):
		return fmt.Errorf("%w: application prefixes %q vs %q", ErrSnapshotMismatch, b.App.Prefixes, a.App.Prefixes)
	case !slices.Equal(a.App.RulesFiles, b.App.RulesFiles):
		return fmt.Errorf("%w: rules files %q vs %q", ErrSnapshotMismatch, b.App.RulesFiles, a.App.RulesFiles)
	}
	return nil
}

func addTotals(t *Totals, u Totals) {
	t.Cost += u.Cost
	t.Database += u.Database
	t.Network += u.Network
	t.Other += u.Other
	t.Unattributed += u.Unattributed
	t.Requests += u.Requests
	t.Samples += u.Samples
	t.BoundarySamples += u.BoundarySamples
}

// mergeDetected unites the auto-detected roots of the shards by prefix,
// keeping the first reason and the largest function count, in the order
// Classifier uses (functions descending, then prefix). same is false when
// the shards detected different prefixes.
func mergeDetected(snaps []*Snapshot) (out []Detection, same bool) {
	same = true
	idx := map[string]int{}
	for i, s := range snaps {
		if i > 0 && len(s.App.Detected) != len(snaps[0].App.Detected) {
			same = false
		}
		for _, d := range s.App.Detected {
			j, ok := idx[d.Prefix]
			if !ok {
				if i > 0 {
					same = false
				}
				idx[d.Prefix] = len(out)
				out = append(out, d)
				continue
			}
			out[j].Functions = max(out[j].Functions, d.Functions)
		}
	}
	sort.SliceStable(out, func(i, j int) bool {
		a, b := out[i], out[j]
		if a.Functions != b.Functions {
			return a.Functions > b.Functions
		}
		return a.Prefix < b.Prefix
	})
	return out, same
}

func mergeEntries(snaps []*Snapshot) []EntryTotal {
	var out []EntryTotal
	idx := map[string]int{}
	for _, s := range snaps {
		for _, e := range s.Entries {
			j, ok := idx[e.Entry]
			if !ok {
				idx[e.Entry] = len(out)
				out = append(out, e)
				continue
			}
			o := &out[j]
			o.Cost += e.Cost
			o.Database += e.Database
			o.Network += e.Network
			o.Requests += e.Requests
		}
	}
	sortEntries(out)
	return out
}

// sortEntries orders entry totals as Attribute does: database+network cost
// descending, then cost descending, then name.
func sortEntries(es []EntryTotal) {
	sort.Slice(es, func(i, j int) bool {
		a, b := es[i], es[j]
		if a.Database+a.Network != b.Database+b.Network {
			return a.Database+a.Network > b.Database+b.Network
		}
		if a.Cost != b.Cost {
			return a.Cost > b.Cost
		}
		return a.Entry < b.Entry
	})
}

type causeKey struct {
	function string
	noApp    bool
}

func mergeCauses(snaps []*Snapshot) []SnapshotCause {
	type acc struct {
		c            SnapshotCause
		costs, calls []*CappedValues
		dist         *Distribution // of the first shard
		shards       int           // how many shards have the cause
	}
	var accs []*acc
	idx := map[causeKey]*acc{}
	for _, s := range snaps {
		for i := range s.Causes {
			sc := &s.Causes[i]
			k := causeKey{sc.Function, sc.NoAppFrame}
			a := idx[k]
			if a == nil {
				a = &acc{c: SnapshotCause{Function: sc.Function, Identity: sc.Identity, NoAppFrame: sc.NoAppFrame}}
				idx[k] = a
				accs = append(accs, a)
			}
			c := &a.c
			c.Cost += sc.Cost
			c.Database += sc.Database
			c.Network += sc.Network
			c.Samples += sc.Samples
			c.Calls += sc.Calls
			c.Requests += sc.Requests
			c.CallSites = append(c.CallSites, sc.CallSites...)
			c.Statements = append(c.Statements, sc.Statements...)
			c.EntryPoints = append(c.EntryPoints, sc.EntryPoints...)
			a.costs = append(a.costs, sc.RequestCosts)
			a.calls = append(a.calls, sc.RequestCalls)
			if a.shards == 0 {
				a.dist = sc.CallsPerRequest
			}
			a.shards++
		}
	}
	if len(accs) == 0 {
		return nil
	}
	out := make([]SnapshotCause, 0, len(accs))
	for _, a := range accs {
		c := a.c
		c.Kind = kindOf(c.Database, c.Network)
		c.CallSites = mergeCallSites(c.CallSites)
		if len(c.CallSites) > 0 {
			c.File, c.Line = c.CallSites[0].File, c.CallSites[0].Line
		}
		c.Statements = mergeStatements(c.Statements)
		c.EntryPoints = mergeEntryShares(c.EntryPoints)
		c.RequestCosts = mergeCapped(a.costs...)
		c.RequestCalls = mergeCapped(a.calls...)
		switch {
		case a.shards == 1:
			// Nothing to recombine: keep the exact figures, even when the
			// vector was thinned.
			c.CallsPerRequest = cloneDist(a.dist)
		case c.RequestCalls != nil:
			c.CallsPerRequest = distribution(slices.Clone(c.RequestCalls.Values))
		}
		out = append(out, c)
	}
	sort.SliceStable(out, func(i, j int) bool {
		a, b := &out[i], &out[j]
		if a.Cost != b.Cost {
			return a.Cost > b.Cost
		}
		if a.Function != b.Function {
			return a.Function < b.Function
		}
		if a.File != b.File {
			return a.File < b.File
		}
		return a.Line < b.Line
	})
	return out
}

// kindOf returns the kind of a cost split; "" when both parts are 0.
func kindOf(database, network int64) Kind {
	switch {
	case database > 0 && network > 0:
		return KindMixed
	case network > 0:
		return KindNetwork
	case database > 0:
		return KindDatabase
	}
	return ""
}

func mergeCallSites(cs []CallSite) []CallSite {
	if cs == nil {
		return nil
	}
	type siteKey struct {
		file string
		line int64
	}
	sums := map[siteKey]int64{}
	var keys []siteKey
	for _, s := range cs {
		k := siteKey{s.File, s.Line}
		if _, ok := sums[k]; !ok {
			keys = append(keys, k)
		}
		sums[k] += s.Cost
	}
	out := make([]CallSite, 0, len(keys))
	for _, k := range keys {
		out = append(out, CallSite{File: k.file, Line: k.line, Cost: sums[k]})
	}
	sort.Slice(out, func(i, j int) bool {
		x, y := out[i], out[j]
		if x.Cost != y.Cost {
			return x.Cost > y.Cost
		}
		if x.File != y.File {
			return x.File < y.File
		}
		return x.Line < y.Line
	})
	return out
}

func mergeStatements(ds []Detail) []Detail {
	if ds == nil {
		return nil
	}
	type key struct {
		kind                        Kind
		system, statement, id, peer string
	}
	var out []Detail
	idx := map[key]int{}
	for _, d := range ds {
		k := key{d.Kind, d.System, d.Statement, d.StatementID, d.Peer}
		j, ok := idx[k]
		if !ok {
			idx[k] = len(out)
			out = append(out, d)
			continue
		}
		out[j].Cost += d.Cost
		out[j].Calls += d.Calls
		out[j].Samples += d.Samples
	}
	sortDetails(out)
	return out
}

func mergeEntryShares(es []EntryShare) []EntryShare {
	if es == nil {
		return nil
	}
	var out []EntryShare
	idx := map[string]int{}
	for _, e := range es {
		j, ok := idx[e.Entry]
		if !ok {
			idx[e.Entry] = len(out)
			out = append(out, e)
			continue
		}
		out[j].Cost += e.Cost
		out[j].Calls += e.Calls
	}
	sort.SliceStable(out, func(i, j int) bool {
		x, y := out[i], out[j]
		if x.Cost != y.Cost {
			return x.Cost > y.Cost
		}
		return x.Entry < y.Entry
	})
	return out
}

// mergeFindings combines the shards' findings by kind, function, statement
// and peer (see MergeSnapshots). approx reports whether a finding with a
// per-request distribution came from more than one shard.
func mergeFindings(snaps []*Snapshot, denom int64) (out []Finding, approx bool) {
	type key struct{ kind, function, statement, peer string }
	idx := map[key]int{}
	best := map[key]int{} // most requests of a single shard
	for _, s := range snaps {
		for _, f := range s.Findings {
			k := key{f.Kind, f.Function, f.Statement, f.Peer}
			j, ok := idx[k]
			if !ok {
				idx[k] = len(out)
				best[k] = f.Requests
				f.PerRequest = cloneDist(f.PerRequest)
				out = append(out, f)
				continue
			}
			o := &out[j]
			if f.PerRequest != nil || o.PerRequest != nil {
				approx = true
			}
			switch {
			case f.Requests > best[k]:
				best[k] = f.Requests
				o.PerRequest = cloneDist(f.PerRequest)
				o.Evidence = f.Evidence
			case f.Kind == "recursive-access" && f.Depth > o.Depth:
				o.Evidence = f.Evidence // it states the depth
			}
			o.Cost += f.Cost
			o.Requests += f.Requests
			o.RequestsSeen += f.RequestsSeen
			o.Depth = max(o.Depth, f.Depth)
		}
	}
	for i := range out {
		out[i].Share = 0
		if denom > 0 {
			out[i].Share = float64(out[i].Cost) / float64(denom)
		}
	}
	sortFindings(out)
	return out, approx
}

// clone returns a deep copy of s.
func (s *Snapshot) clone() *Snapshot {
	c := *s
	c.App = cloneApp(s.App)
	c.Inputs = slices.Clone(s.Inputs)
	c.Entries = slices.Clone(s.Entries)
	c.Findings = cloneFindings(s.Findings)
	c.Warnings = slices.Clone(s.Warnings)
	c.Causes = slices.Clone(s.Causes)
	for i := range c.Causes {
		sc := &c.Causes[i]
		sc.CallsPerRequest = cloneDist(sc.CallsPerRequest)
		sc.CallSites = slices.Clone(sc.CallSites)
		sc.Statements = slices.Clone(sc.Statements)
		sc.EntryPoints = slices.Clone(sc.EntryPoints)
		sc.RequestCosts = cloneCapped(sc.RequestCosts)
		sc.RequestCalls = cloneCapped(sc.RequestCalls)
	}
	return &c
}

func cloneApp(a AppInfo) AppInfo {
	return AppInfo{Prefixes: slices.Clone(a.Prefixes), Detected: slices.Clone(a.Detected), RulesFiles: slices.Clone(a.RulesFiles)}
}

func cloneDist(d *Distribution) *Distribution {
	if d == nil {
		return nil
	}
	c := *d
	return &c
}

func cloneFindings(fs []Finding) []Finding {
	out := slices.Clone(fs)
	for i := range out {
		out[i].PerRequest = cloneDist(out[i].PerRequest)
	}
	return out
}

func cloneCapped(v *CappedValues) *CappedValues {
	if v == nil {
		return nil
	}
	return &CappedValues{Values: slices.Clone(v.Values), Count: v.Count, Sum: v.Sum}
}
