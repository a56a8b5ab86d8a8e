package compare

import (
	"cmp"
	"errors"
	"fmt"
	"io"
	"math"
	"math/rand/v2"
	"slices"
	"strings"

	"github.com/culprithq/culprit/attribute"
	"github.com/culprithq/culprit/attribute/stats"
	"github.com/culprithq/culprit/traces"
	json "github.com/goccy/go-json"
)

// LatencySnapshotSchema names the format of a saved latency analysis.
const LatencySnapshotSchema = "culprit.latency-snapshot/v1"

// LatencySnapshot keeps what a latency comparison needs: every entry
// point's request latencies, and the critical-path time of each root
// cause per request, as a Snapshot whose root causes are one per entry
// point, cause and kind (their Identity says which) and whose value is
// time on the critical path. Shards do not merge: a snapshot is one run.
type LatencySnapshot struct {
	Schema string  `json:"schema"`
	Tail   float64 `json:"tail"`
	// Routes are the entry points with their requests' latencies.
	Routes []RouteLatencies `json:"routes"`
	// Path holds the critical-path time per root cause, per request.
	Path *Snapshot `json:"criticalPath"`
}

// RouteLatencies is one entry point's request latencies (nanoseconds).
type RouteLatencies struct {
	Entry     string        `json:"entry"`
	Latencies *CappedValues `json:"latencies"`
}

// latencyIdentity names a cause of one entry point across builds.
func latencyIdentity(entry string, kind attribute.Kind, function string) string {
	return entry + " | " + string(kind) + " | " + attribute.Identity(function)
}

// LatencyLabel is how a latency comparison names a cause: its function,
// kind and entry point.
func LatencyLabel(entry string, kind attribute.Kind, function string) string {
	return function + " (" + string(kind) + ") in " + entry
}

// NewLatencySnapshot returns the snapshot of r, which must have been
// computed with LatencyOptions.Vectors.
func NewLatencySnapshot(r *attribute.LatencyResult) (*LatencySnapshot, error) {
	if !r.HasVectors() {
		return nil, errors.New("latency snapshot: the analysis kept no per-request values (LatencyOptions.Vectors)")
	}
	p := &Snapshot{
		Schema:     SnapshotSchema,
		SourceKind: r.Source.String(),
		ValueType:  traces.ValueType{Type: "critical-path", Unit: "nanoseconds"},
		App:        cloneApp(r.App),
		Inputs:     slices.Clone(r.Inputs),
		Warnings:   slices.Clone(r.Warnings),
		Findings:   []attribute.Finding{},
	}
	s := &LatencySnapshot{Schema: LatencySnapshotSchema, Tail: r.Tail, Path: p}
	for _, e := range r.Entries {
		s.Routes = append(s.Routes, RouteLatencies{Entry: e.Entry, Latencies: newCappedValues(e.Latencies())})
		p.Entries = append(p.Entries, attribute.EntryTotal{Entry: e.Entry, Cost: e.Latency, Requests: e.Requests})
		p.Totals.Cost += e.Latency
		p.Totals.Requests += e.Requests
		for _, c := range e.Causes {
			sc := SnapshotCause{
				Function:     LatencyLabel(e.Entry, c.Kind, c.Function),
				Identity:     latencyIdentity(e.Entry, c.Kind, c.Function),
				Kind:         c.Kind,
				NoAppFrame:   c.NoAppFrame,
				Cost:         c.Path,
				Samples:      int64(c.Requests),
				Requests:     c.Requests,
				CallSites:    []attribute.CallSite{},
				Statements:   []attribute.Detail{},
				EntryPoints:  []attribute.EntryShare{{Entry: e.Entry, Cost: c.Path}},
				RequestCosts: newCappedValues(c.RequestPath()),
			}
			switch c.Kind {
			case attribute.KindDatabase:
				sc.Database = c.Path
			case attribute.KindNetwork:
				sc.Network = c.Path
			}
			p.Totals.Database += sc.Database
			p.Totals.Network += sc.Network
			p.Causes = append(p.Causes, sc)
		}
	}
	return s, nil
}

// Write writes s as indented JSON.
func (s *LatencySnapshot) Write(w io.Writer) error {
	enc := json.NewEncoder(w)
	enc.SetIndent("", " ")
	return enc.Encode(s)
}

// ReadLatencySnapshot reads a snapshot written by Write; name is used in
// messages.
func ReadLatencySnapshot(name string, r io.Reader) (*LatencySnapshot, error) {
	data, err := io.ReadAll(r)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", name, err)
	}
	var s LatencySnapshot
	if err := json.Unmarshal(data, &s); err != nil {
		return nil, fmt.Errorf("%s: not a latency snapshot: %v", name, err)
	}
	if s.Schema != LatencySnapshotSchema || s.Path == nil {
		return nil, fmt.Errorf("%s: schema %q, want %s (write one with culprit latency --save)", name, s.Schema, LatencySnapshotSchema)
	}
	for _, rt := range s.Routes {
		if rt.Latencies == nil {
			return nil, fmt.Errorf("%s: route %q has no latencies", name, rt.Entry)
		}
		if err := rt.Latencies.validate(rt.Latencies.Count); err != nil {
			return nil, fmt.Errorf("%s: route %q: %v", name, rt.Entry, err)
		}
	}
	return &s, nil
}

// LatencyComparison compares two builds' latency: per entry point the
// change of p50 and p95 with bootstrap intervals, and per root cause of
// each entry point the change of critical-path time per request (the
// verdict machinery of Compare).
type LatencyComparison struct {
	Routes []RouteChange `json:"routes"`
	Causes *Comparison   `json:"causes"`
	// Of maps a change's Identity to its entry point, kind and function.
	Of map[string]LatencyKey `json:"-"`
}

// LatencyKey names a cause of a latency comparison.
type LatencyKey struct {
	Entry    string
	Kind     attribute.Kind
	Function string
}

// RouteChange is one entry point's latency change. Relative changes and
// their 95% intervals are nil where a side has no requests.
type RouteChange struct {
	Entry               string         `json:"entry"`
	BaseRequests        int            `json:"baseRequests"`
	CandRequests        int            `json:"candRequests"`
	P50                 QuantileChange `json:"p50"`
	P95                 QuantileChange `json:"p95"`
	Verdict             Outcome        `json:"verdict"`
	VerdictQuantile     string         `json:"verdictQuantile"`
	BootstrapResamples  int            `json:"bootstrapResamples"`
	BootstrapConfidence float64        `json:"bootstrapConfidence"`
	BootstrapSeed       uint64         `json:"bootstrapSeed"`
}

// QuantileChange is the change of one latency quantile of an entry point.
type QuantileChange struct {
	Base           float64  `json:"base"`
	Candidate      float64  `json:"candidate"`
	RelativeChange *float64 `json:"relativeChange"`
	RelLo          *float64 `json:"relLo"`
	RelHi          *float64 `json:"relHi"`
}

// routeResamples is how many bootstrap resamples a route's quantiles get.
const routeResamples = 1000

// CompareLatency compares base with cand. Causes are compared as Compare
// compares root causes, each per request of its entry point. An entry
// point's p50 and p95 are compared by the ratio of the candidate's to the
// base's quantile with a percentile bootstrap interval (Efron and
// Tibshirani, "An Introduction to the Bootstrap", 1993, ch. 13; each side
// resampled on its own); its verdict follows the p95 interval and the
// budget as Compare's do (regressed: the interval's lower bound clears
// the relative budget, and the absolute one if set), without a p-value.
func CompareLatency(base, cand *LatencySnapshot, opts CompareOptions) *LatencyComparison {
	out := &LatencyComparison{Causes: Compare(base.Path, cand.Path, opts), Of: map[string]LatencyKey{}}
	for _, s := range []*LatencySnapshot{base, cand} {
		for _, c := range s.Path.Causes {
			entry := ""
			if len(c.EntryPoints) > 0 {
				entry = c.EntryPoints[0].Entry
			}
			fn := strings.TrimSuffix(c.Function, " ("+string(c.Kind)+") in "+entry)
			out.Of[c.Identity] = LatencyKey{Entry: entry, Kind: c.Kind, Function: fn}
		}
	}
	for i := range out.Causes.Changes {
		if k, ok := out.Of[out.Causes.Changes[i].Identity]; ok {
			out.Causes.Changes[i].Kind = k.Kind
		}
	}
	budget := out.Causes.Budget
	bl, cl := map[string]*CappedValues{}, map[string]*CappedValues{}
	var names []string
	for _, rt := range base.Routes {
		bl[rt.Entry] = rt.Latencies
		names = append(names, rt.Entry)
	}
	for _, rt := range cand.Routes {
		cl[rt.Entry] = rt.Latencies
		if bl[rt.Entry] == nil {
			names = append(names, rt.Entry)
		}
	}
	slices.Sort(names)
	for _, name := range names {
		rc := RouteChange{Entry: name, VerdictQuantile: "p95", BootstrapResamples: routeResamples,
			BootstrapConfidence: CompareConfidence, BootstrapSeed: opts.Seed}
		b, c := bl[name], cl[name]
		switch {
		case b == nil:
			rc.Verdict = OutcomeNew
		case c == nil:
			rc.Verdict = OutcomeGone
		}
		var vb, vc []float64
		if b != nil {
			vb = requestVector(b, int(b.Count))
			rc.BaseRequests = int(b.Count)
		}
		if c != nil {
			vc = requestVector(c, int(c.Count))
			rc.CandRequests = int(c.Count)
		}
		rc.P50, rc.P95 = quantileChange(vb, vc, 0.5), quantileChange(vb, vc, 0.95)
		if b != nil && c != nil {
			rng := rand.New(rand.NewPCG(mixSeed(opts.Seed, name), 0x1a7e))
			lo50, hi50, lo95, hi95 := bootstrapQuantileRatios(vb, vc, routeResamples, CompareConfidence, rng)
			setInterval(&rc.P50, lo50, hi50)
			setInterval(&rc.P95, lo95, hi95)
			rc.Verdict = routeVerdict(&rc.P95, budget)
		}
		out.Routes = append(out.Routes, rc)
	}
	slices.SortStableFunc(out.Routes, func(a, b RouteChange) int {
		return cmp.Or(cmp.Compare(a.Verdict.severity(), b.Verdict.severity()), cmp.Compare(a.Entry, b.Entry))
	})
	return out
}

// Gate returns what fails the budget: the causes Comparison.Gate returns,
// and the entry points whose p95 regressed (as changes named after them).
func (c *LatencyComparison) Gate() []Change {
	out := c.Causes.Gate()
	for _, r := range c.Routes {
		if r.Verdict == OutcomeRegressed {
			out = append(out, Change{Function: r.Entry + " p95", Identity: r.Entry, Verdict: r.Verdict,
				Base: r.P95.Base, Candidate: r.P95.Candidate, Change: r.P95.Candidate - r.P95.Base,
				RelativeChange: r.P95.RelativeChange, RelLo: r.P95.RelLo, RelHi: r.P95.RelHi})
		}
	}
	return out
}

func quantileChange(vb, vc []float64, q float64) QuantileChange {
	var qc QuantileChange
	if len(vb) > 0 {
		qc.Base = stats.Quantile(vb, q)
	}
	if len(vc) > 0 {
		qc.Candidate = stats.Quantile(vc, q)
	}
	if len(vb) > 0 && len(vc) > 0 && qc.Base > 0 {
		rel := qc.Candidate/qc.Base - 1
		qc.RelativeChange = &rel
	}
	return qc
}

func setInterval(qc *QuantileChange, lo, hi float64) {
	if math.IsNaN(lo) || math.IsNaN(hi) {
		return
	}
	lo, hi = lo-1, hi-1
	qc.RelLo, qc.RelHi = &lo, &hi
}

// routeVerdict judges a p95 change by its interval and the budget.
func routeVerdict(qc *QuantileChange, b Budget) Outcome {
	if qc.RelLo == nil || qc.RelHi == nil {
		return OutcomeInconclusive
	}
	return budgetVerdict(*qc.RelLo, *qc.RelHi, qc.Base, b)
}

// bootstrapQuantileRatios returns percentile bootstrap intervals of the
// ratios cand/base of the medians and of the 0.95 quantiles of two
// ascending samples. A resample's quantiles come from the counts of the
// drawn indices (the values are sorted, so the k-th smallest drawn index
// is the k-th order statistic): O(n) per resample, no sorting.
func bootstrapQuantileRatios(b, c []float64, reps int, conf float64, rng *rand.Rand) (lo50, hi50, lo95, hi95 float64) {
	r50 := make([]float64, 0, reps)
	r95 := make([]float64, 0, reps)
	var cb, cc []int32
	for range reps {
		b50, b95 := resampleQuantiles(b, &cb, rng)
		c50, c95 := resampleQuantiles(c, &cc, rng)
		if b50 > 0 {
			r50 = append(r50, c50/b50)
		}
		if b95 > 0 {
			r95 = append(r95, c95/b95)
		}
	}
	a := (1 - conf) / 2
	slices.Sort(r50)
	slices.Sort(r95)
	nan := math.NaN()
	lo50, hi50, lo95, hi95 = nan, nan, nan, nan
	if len(r50) > 0 {
		lo50, hi50 = stats.Quantile(r50, a), stats.Quantile(r50, 1-a)
	}
	if len(r95) > 0 {
		lo95, hi95 = stats.Quantile(r95, a), stats.Quantile(r95, 1-a)
	}
	return
}

// resampleQuantiles draws len(x) values of the ascending x with
// replacement and returns the resample's 0.5 and 0.95 quantiles
// (interpolated as Quantile does).
func resampleQuantiles(x []float64, counts *[]int32, rng *rand.Rand) (q50, q95 float64) {
	n := len(x)
	cs := *counts
	if cap(cs) < n {
		cs = make([]int32, n)
	}
	cs = cs[:n]
	clear(cs)
	*counts = cs
	for range n {
		cs[rng.IntN(n)]++
	}
	// The resample's order statistic of rank k (0-based) is x[i] for the
	// first i whose cumulative count exceeds k.
	at := func(k int) float64 {
		return x[rankIndex(cs, k)]
	}
	q := func(p float64) float64 {
		h := float64(n-1) * p
		i := int(h)
		f := h - float64(i)
		v := at(i)
		if f == 0 || i+1 >= n {
			return v
		}
		return v + f*(at(i+1)-v)
	}
	return q(0.5), q(0.95)
}

func rankIndex(counts []int32, k int) int {
	cum := 0
	for i, c := range counts {
		cum += int(c)
		if cum > k {
			return i
		}
	}
	return len(counts) - 1
}
