package compare

import (
	"errors"
	"fmt"
	"slices"

	"github.com/culprithq/culprit/attribute"
	"github.com/culprithq/culprit/attribute/stats"
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
	DurationNanos int64                  `json:"durationNanos"`
	Totals        attribute.Totals       `json:"totals"`
	App           attribute.AppInfo      `json:"app"`
	Inputs        []traces.Input         `json:"inputs"`
	Entries       []attribute.EntryTotal `json:"entryPoints"`
	Causes        []SnapshotCause        `json:"rootCauses"`
	Findings      []attribute.Finding    `json:"findings"`
	Warnings      []string               `json:"warnings"`

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
	Identity   string         `json:"identity"`
	File       string         `json:"file,omitempty"`
	Line       int64          `json:"line,omitempty"`
	Kind       attribute.Kind `json:"kind"`
	NoAppFrame bool           `json:"noAppFrame,omitempty"`
	// Cost = Database + Network, in the unit of the snapshot's value type.
	Cost     int64 `json:"cost"`
	Database int64 `json:"database"`
	Network  int64 `json:"network"`
	// Samples is the number of samples (profiles) or spans behind Cost.
	Samples int64 `json:"samples"`
	// Calls counts outbound calls (spans only; 0 when unknown).
	Calls int64 `json:"calls"`
	// Requests is the number of requests in which the cause appears.
	Requests        int                     `json:"requests"`
	CallsPerRequest *attribute.Distribution `json:"callsPerRequest,omitempty"`
	CallSites       []attribute.CallSite    `json:"callSites"`
	Statements      []attribute.Detail      `json:"statements"`
	EntryPoints     []attribute.EntryShare  `json:"entries"`
	// RequestCosts holds the charged cost in each request where the cause
	// appears (nil when requests are unknown); RequestCalls the calls in
	// each such request (spans only).
	RequestCosts *CappedValues `json:"requestCosts,omitempty"`
	RequestCalls *CappedValues `json:"requestCalls,omitempty"`
}

// NewSnapshot returns the snapshot of r. The snapshot shares no memory
// with r except strings.
func NewSnapshot(r *attribute.Result) *Snapshot {
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
			Identity:        attribute.Identity(c.Function),
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
			RequestCosts:    cloneCapped(newCappedValues(c.RequestCosts())),
			RequestCalls:    cloneCapped(newCappedValues(c.RequestCalls())),
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
func (s *Snapshot) Result() *attribute.Result {
	r := &attribute.Result{
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
		r.Causes = make([]*attribute.Cause, len(s.Causes))
	}
	for i := range s.Causes {
		sc := &s.Causes[i]
		c := &attribute.Cause{
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
		var costs, calls []float64
		if sc.RequestCosts != nil {
			costs = slices.Clone(sc.RequestCosts.Values)
		}
		if sc.RequestCalls != nil {
			calls = slices.Clone(sc.RequestCalls.Values)
		}
		c.SetRequestVectors(costs, calls)
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

func cloneApp(a attribute.AppInfo) attribute.AppInfo {
	return attribute.AppInfo{Prefixes: slices.Clone(a.Prefixes), Detected: slices.Clone(a.Detected), RulesFiles: slices.Clone(a.RulesFiles)}
}

func cloneDist(d *attribute.Distribution) *attribute.Distribution {
	if d == nil {
		return nil
	}
	c := *d
	return &c
}

func cloneFindings(fs []attribute.Finding) []attribute.Finding {
	out := slices.Clone(fs)
	for i := range out {
		out[i].PerRequest = cloneDist(out[i].PerRequest)
	}
	return out
}
