package compare

import (
	"cmp"
	"fmt"
	"hash/fnv"
	"math"
	"runtime"
	"slices"
	"sync"

	"github.com/culprithq/culprit/attribute"
	"github.com/culprithq/culprit/attribute/stats"
	"github.com/culprithq/culprit/traces"
)

// Defaults of CompareOptions.
const (
	// DefaultAlpha is the false discovery rate a change must pass (q ≤ α).
	DefaultAlpha = 0.05
	// DefaultRelativeBudget is the relative change a regression must
	// clear when no budget is set: 5 %.
	DefaultRelativeBudget = 0.05
	// ComparePower is the power at which Change.MDE is computed.
	ComparePower = 0.8
	// CompareConfidence is the nominal level of the intervals; Compare
	// widens it for the number of tests (see Comparison.Confidence).
	CompareConfidence = 0.95
)

// Basis says how a Comparison normalises costs so that runs of different
// length compare.
type Basis string

// Bases, in order of preference: Compare takes the first both sides allow.
const (
	// BasisPerRequest divides by the requests each side served.
	BasisPerRequest Basis = "per-request"
	// BasisPerSecond divides by each side's duration in seconds.
	BasisPerSecond Basis = "per-second"
	// BasisShare divides by each side's database+network cost.
	BasisShare Basis = "share"
)

// Outcome is the verdict on one root cause of a Comparison.
type Outcome string

// Outcomes, in the order of Comparison.Changes (most severe first).
const (
	// OutcomeRegressed: significant (q ≤ Alpha) and the interval's lower
	// bound clears the budget.
	OutcomeRegressed Outcome = "regressed"
	// OutcomeNew: the cause is absent from the base.
	OutcomeNew Outcome = "new"
	// OutcomeInconclusive: significant, but the interval straddles the
	// budget (or the test could not be run).
	OutcomeInconclusive Outcome = "inconclusive"
	// OutcomeImproved: significant and the interval's upper bound lies
	// below minus the budget.
	OutcomeImproved Outcome = "improved"
	// OutcomeGone: the cause is absent from the candidate.
	OutcomeGone Outcome = "gone"
	// OutcomeUnchanged: no change beyond the budget was shown: not
	// significant (then no change above Change.MDE was detectable), or
	// significant with the whole interval within ± the budget.
	OutcomeUnchanged Outcome = "unchanged"
)

// severity orders outcomes for Comparison.Changes.
func (o Outcome) severity() int {
	switch o {
	case OutcomeRegressed:
		return 0
	case OutcomeNew:
		return 1
	case OutcomeInconclusive:
		return 2
	case OutcomeImproved:
		return 3
	case OutcomeGone:
		return 4
	}
	return 5
}

// Methods of Change.Method.
const (
	// MethodPoisson compares sample (or span) counts as Poisson rates with
	// the exact conditional test and the Clopper–Pearson interval mapped
	// to the rate ratio (PoissonRateTest).
	MethodPoisson = "poisson-exact"
	// MethodBootstrap compares per-request costs (and calls) by the
	// percentile bootstrap of the ratio of means: one set of resamples
	// gives the p-value, the interval and the MDE.
	MethodBootstrap = "bootstrap"
)

// Budget is how large a change must be to count as a regression (or an
// improvement). The zero value means the default: 5 % relative.
type Budget struct {
	// Relative is the relative change, e.g. 0.10 for 10 %.
	Relative float64 `json:"relative"`
	// Absolute is the change in the comparison's unit (the value type's
	// unit per request or per second, or a fraction of database+network
	// cost for the share basis); 0 means none.
	Absolute float64 `json:"absolute"`
	// Set marks a budget the user gave; when false, Relative is
	// DefaultRelativeBudget and Absolute is ignored.
	Set bool `json:"set"`
}

// CompareOptions control Compare. The zero value uses the defaults.
type CompareOptions struct {
	// Alpha is the q-value (Benjamini–Hochberg adjusted p-value) at or
	// below which a change is significant; outside (0, 1) means
	// DefaultAlpha.
	Alpha float64
	// Budget is the regression budget (see Budget).
	Budget Budget
	// Seed seeds the bootstrap; the same inputs and seed give the same
	// Comparison.
	Seed uint64
}

// Comparison is the comparison of two snapshots, base (the earlier build)
// and candidate, one Change per root-cause identity found in either. It is
// ready for encoding/json (a renderer adds the schema name): every float
// is finite, and quantities that do not exist (a relative change from
// nothing, an unbounded interval end, an infinite detectable change) are
// nil pointers, encoded as null.
type Comparison struct {
	// Basis is how costs were normalised; Unit names the unit of
	// Change.Base, Candidate and Change (e.g. "nanoseconds per request").
	Basis     Basis            `json:"basis"`
	Unit      string           `json:"unit"`
	ValueType traces.ValueType `json:"valueType"`
	Base      SideSummary      `json:"base"`
	Candidate SideSummary      `json:"candidate"`
	// Alpha is the significance threshold on q-values; Power is that of
	// MDE; Confidence is the level of every interval and MDE: 1 −
	// max(R, 1)·Alpha/m for R significant tests of m (Benjamini &
	// Yekutieli, JASA 100, 2005), so that an interval excludes zero exactly
	// when its q-value is at most Alpha.
	Alpha      float64 `json:"alpha"`
	Power      float64 `json:"power"`
	Confidence float64 `json:"confidence"`
	// Budget is the budget in force (the default when none was set).
	Budget Budget `json:"budget"`
	// Seed and Resamples are the bootstrap's, for reproduction.
	Seed      uint64 `json:"seed"`
	Resamples int    `json:"resamples"`
	// Changes are ordered by severity (regressed, new, inconclusive,
	// improved, gone, unchanged), then |Change| descending, then Identity.
	Changes []Change `json:"changes"`
	// Warnings say what makes the comparison doubtful (different value
	// types, classification, a test that could not run). Never nil.
	Warnings []string `json:"warnings"`
}

// SideSummary describes one side of a Comparison.
type SideSummary struct {
	Inputs        []traces.Input   `json:"inputs"`
	SourceKind    string           `json:"sourceKind"`
	ValueType     traces.ValueType `json:"valueType"`
	Totals        attribute.Totals `json:"totals"`
	Requests      int              `json:"requests"`
	DurationNanos int64            `json:"durationNanos"`
	// Exposure is the divisor of the side's normalised values: requests,
	// seconds, or database+network cost, as Basis says.
	Exposure float64 `json:"exposure"`
}

// Change is the comparison of one root cause between base and candidate.
type Change struct {
	// Function is the costliest function with this identity (candidate
	// side first); Functions lists every function with it when there is
	// more than one (their costs were added up).
	Function  string         `json:"function"`
	Functions []string       `json:"functions,omitempty"`
	Identity  string         `json:"identity"`
	Kind      attribute.Kind `json:"kind"`
	// Base and Candidate are the normalised costs (see Comparison.Unit);
	// Change is Candidate − Base.
	Base      float64 `json:"base"`
	Candidate float64 `json:"candidate"`
	Change    float64 `json:"change"`
	// RelativeChange is Candidate/Base − 1 (for sampled sources, the
	// sample-rate ratio − 1); RelLo and RelHi bound its 95 % interval. Nil
	// when undefined (a new cause) or unbounded.
	RelativeChange *float64 `json:"relativeChange"`
	RelLo          *float64 `json:"relLo"`
	RelHi          *float64 `json:"relHi"`
	// PValue is the two-sided p-value of the method; QValue its
	// Benjamini–Hochberg adjustment over all Changes. Nil if the test
	// could not run.
	PValue *float64 `json:"pValue"`
	QValue *float64 `json:"qValue"`
	// MDE is the smallest relative change the test would detect with
	// power ComparePower at level Alpha; nil when unbounded.
	MDE     *float64 `json:"mde"`
	Verdict Outcome  `json:"verdict"`
	// BaseSamples and CandSamples are the samples (profiles) or spans
	// behind each side's cost; BaseRequests and CandRequests the requests
	// in which the cause appears (0 when unknown).
	BaseSamples  int64 `json:"baseSamples"`
	CandSamples  int64 `json:"candSamples"`
	BaseRequests int   `json:"baseRequests"`
	CandRequests int   `json:"candRequests"`
	// Method is MethodPoisson or MethodBootstrap.
	Method string `json:"method"`
	// Reasons name the tests that give a verdict other than unchanged:
	// ReasonTime (the cost), ReasonCalls (calls per request), or both.
	// Empty for unchanged, new and gone causes.
	Reasons []string `json:"reasons"`
	// BelowDetection marks a cause with too little evidence (samples, or
	// requests in which it appears) for any outcome to be significant.
	BelowDetection bool `json:"belowDetection"`
	// Calls compares the calls per request (span sources with per-request
	// calls on both sides); nil otherwise.
	Calls *CallsChange `json:"calls"`
	// Statements compares each statement's calls per request (span
	// sources); New marks statements found only in the candidate.
	Statements []StatementChange `json:"statements"`
}

// Reasons of Change.Reasons.
const (
	ReasonTime  = "time"
	ReasonCalls = "calls"
)

// CallsChange is the comparison of a cause's calls per request: mean calls
// per request of the entry points that reach it, tested like the cost
// (MethodBootstrap) in the same Benjamini–Hochberg family.
type CallsChange struct {
	Base           float64  `json:"base"`
	Candidate      float64  `json:"candidate"`
	RelativeChange *float64 `json:"relativeChange"`
	RelLo          *float64 `json:"relLo"`
	RelHi          *float64 `json:"relHi"`
	PValue         *float64 `json:"pValue"`
	QValue         *float64 `json:"qValue"`
	MDE            *float64 `json:"mde"`
	// Verdict is the verdict on calls alone.
	Verdict Outcome `json:"verdict"`
}

// StatementChange is one statement of a cause with its calls per request
// on each side (descriptive; the cause's tests decide the verdict).
type StatementChange struct {
	Statement string         `json:"statement"`
	System    string         `json:"system,omitempty"`
	Peer      string         `json:"peer,omitempty"`
	Kind      attribute.Kind `json:"kind"`
	Base      float64        `json:"base"`
	Candidate float64        `json:"candidate"`
	// New: only in the candidate; Gone: only in the base.
	New  bool `json:"new"`
	Gone bool `json:"gone"`
	// PValue tests the statement's calls per request with the exact
	// conditional Poisson test (requests as exposure); QValue is its
	// Benjamini–Hochberg adjustment over every statement of the
	// comparison (a family of its own: statements detail a cause's change
	// and do not decide its verdict). Nil when not tested.
	PValue *float64 `json:"pValue"`
	QValue *float64 `json:"qValue"`

	baseCalls, candCalls int64
}

// CheckComparable reports why the costs of cand cannot be compared with
// those of base (different source kind, value type or view), wrapping
// ErrSnapshotMismatch; nil when they can. Compare runs regardless and
// lists the problem in its warnings.
func CheckComparable(base, cand *Snapshot) error {
	switch {
	case base.SourceKind != cand.SourceKind:
		return fmt.Errorf("%w: the base is a %s source, the candidate a %s source", ErrSnapshotMismatch, base.SourceKind, cand.SourceKind)
	case base.ValueType != cand.ValueType:
		return fmt.Errorf("%w: the base measures %s, the candidate %s", ErrSnapshotMismatch, base.ValueType, cand.ValueType)
	case base.Inclusive != cand.Inclusive:
		return fmt.Errorf("%w: one side was attributed with the inclusive view, the other not", ErrSnapshotMismatch)
	}
	return nil
}

// Compare compares the root causes of cand with those of base (see
// DESIGN.md, "Compare"). Causes match by Identity, so line moves and
// closure renumbering do not break the match; functions sharing an
// identity within one side are added up.
//
// Normalisation: per request when both sides know their requests, else
// per second when both know their duration, else as shares of
// database+network cost (Comparison.Basis).
//
// Methods. Sampled sources (profiles) are compared on sample counts as
// Poisson rates, by the exact conditional test with the Clopper–Pearson
// interval of the rate ratio (PoissonRateTest; methods reference §3); the
// exposure is requests, seconds, or boundary samples for shares.
// Span sources with per-request costs on the per-request basis are
// compared on the cost of each request that went through an entry point
// reaching the cause (on either side; all requests when entry counts are
// unknown), so that a shift in the traffic mix between endpoints does not
// read as a change of the cause. Base and Candidate are then per request
// of those entry points, and requests where the cause is absent count as
// zeros (each side has as many values as such requests). The p-value, the
// interval of the relative change and the MDE all come from one
// percentile bootstrap of the ratio of mean per-request cost
// (CompareOptions.Seed, DefaultBootstrapResamples rounds; Efron &
// Tibshirani, An Introduction to the Bootstrap, 1993), since the mean is
// what capacity and total time follow (methods reference §4): the p-value
// inverts the percentile interval (BootstrapRatioP), so the two cannot
// disagree. Where both sides counted calls per request (spans), the same
// procedure compares the mean calls per request, in the same
// Benjamini–Hochberg family; a significant change in calls is a verdict in
// its own right (Change.Reasons), since an N+1 regression changes calls
// first and time follows noisily. Requests are taken as independent;
// warm-up and queueing make them autocorrelated, which makes p-values too
// small, so compare steady-state runs. Span sources without per-request
// costs fall back to the
// Poisson comparison of span counts (calls). MDE: for counts
// MinDetectableRatio − 1, for per-request costs MinDetectableDiff divided
// by the base mean. Per-request vectors beyond MaxVectorValues requests
// are thinned systematically (see CappedValues), which makes the tests
// conservative. Functions that share an identity within one side are
// added request by request under the assumption that their costs rise
// and fall together (their sorted per-request vectors are added
// element-wise): the mean is exact, the spread an approximation.
//
// Causes with too little evidence for any outcome to be significant (see
// detectable) are marked BelowDetection and not tested. The p-values of
// all other tests (new and gone causes included) are adjusted together by
// Benjamini–Hochberg (§5), and every interval is taken at the level that
// agrees with that step (Comparison.Confidence, see the body). Verdicts
// (§6): a cause absent on one side is new or gone; otherwise q > Alpha is
// unchanged; a lower
// interval bound above the relative budget (and, with an absolute budget,
// a lower bound of the absolute change above it) is regressed; the mirror
// image is improved; an interval wholly within ± the budget is unchanged;
// anything else significant is inconclusive; with calls tested too, the
// more severe of the two verdicts. The
// relative change of a sampled source is that of the sample rate, equal to
// that of the cost when every sample carries the same value.
func Compare(base, cand *Snapshot, opts CompareOptions) *Comparison {
	alpha := opts.Alpha
	if !(alpha > 0 && alpha < 1) {
		alpha = DefaultAlpha
	}
	budget := opts.Budget
	if !budget.Set {
		budget = Budget{Relative: DefaultRelativeBudget}
	}
	budget.Relative = math.Max(0, budget.Relative)
	budget.Absolute = math.Max(0, budget.Absolute)
	cmpn := &Comparison{
		ValueType:  cand.ValueType,
		Alpha:      alpha,
		Power:      ComparePower,
		Confidence: CompareConfidence,
		Budget:     budget,
		Seed:       opts.Seed,
		Resamples:  stats.DefaultBootstrapResamples,
		Changes:    []Change{},
		Warnings:   []string{},
	}
	if err := CheckComparable(base, cand); err != nil {
		cmpn.Warnings = append(cmpn.Warnings, err.Error()+"; the comparison is not meaningful")
	}
	if !slices.Equal(base.App.Prefixes, cand.App.Prefixes) {
		cmpn.Warnings = append(cmpn.Warnings, fmt.Sprintf("application prefixes differ (base %q, candidate %q): root causes may differ for that reason alone",
			base.App.Prefixes, cand.App.Prefixes))
	}
	bs, cs := sideOf(base), sideOf(cand)
	switch {
	case base.Totals.Requests > 0 && cand.Totals.Requests > 0:
		cmpn.Basis, cmpn.Unit = BasisPerRequest, cand.ValueType.Unit+" per request"
		bs.norm, cs.norm = float64(base.Totals.Requests), float64(cand.Totals.Requests)
		bs.exposure, cs.exposure = bs.norm, cs.norm
	case base.DurationNanos > 0 && cand.DurationNanos > 0:
		cmpn.Basis, cmpn.Unit = BasisPerSecond, cand.ValueType.Unit+" per second"
		bs.norm, cs.norm = float64(base.DurationNanos)/1e9, float64(cand.DurationNanos)/1e9
		bs.exposure, cs.exposure = bs.norm, cs.norm
	default:
		cmpn.Basis, cmpn.Unit = BasisShare, "share of database+network cost"
		bs.norm = float64(base.Totals.Database + base.Totals.Network)
		cs.norm = float64(cand.Totals.Database + cand.Totals.Network)
		bs.exposure, cs.exposure = float64(base.Totals.BoundarySamples), float64(cand.Totals.BoundarySamples)
	}
	cmpn.Base, cmpn.Candidate = bs.summary(), cs.summary()
	perRequest := cmpn.Basis == BasisPerRequest && !base.Sampled && !cand.Sampled

	bg, cg := groupCauses(base), groupCauses(cand)
	ids := make([]string, 0, len(bg)+len(cg))
	for id := range bg {
		ids = append(ids, id)
	}
	for id := range cg {
		if _, ok := bg[id]; !ok {
			ids = append(ids, id)
		}
	}
	slices.Sort(ids)
	cstats := make([]changeStat, len(ids))
	var wg sync.WaitGroup
	sem := make(chan struct{}, runtime.GOMAXPROCS(0))
	for i, id := range ids {
		wg.Add(1)
		sem <- struct{}{}
		go func() {
			defer func() { <-sem; wg.Done() }()
			cstats[i] = compareCause(id, bg[id], cg[id], bs, cs, perRequest, opts.Seed)
		}()
	}
	wg.Wait()

	// One Benjamini–Hochberg step over every test (costs and calls). The
	// intervals are then taken at the level that makes them agree with it:
	// with R of m tests significant, 1 − max(R, 1)·α/m, the false coverage
	// rate adjusted intervals of Benjamini & Yekutieli ("False discovery
	// rate–adjusted multiple confidence intervals for selected parameters",
	// JASA 100, 2005). Each test's p-value and interval come from one
	// procedure (the exact conditional test and its Clopper–Pearson
	// interval; the bootstrap's p-value and percentile interval), so an
	// interval excludes "no change" exactly when q ≤ α.
	var ps []float64
	var tests []*test
	for i := range cstats {
		if cstats[i].below {
			// Filtered out before testing (independent of the outcome, so
			// the procedure stays valid: Bourgon, Gentleman & Huber,
			// PNAS 107, 2010).
			cstats[i].time.ok, cstats[i].time.p = false, math.NaN()
			cstats[i].calls.ok, cstats[i].calls.p = false, math.NaN()
			continue
		}
		tests = append(tests, &cstats[i].time)
		if cstats[i].hasCalls {
			tests = append(tests, &cstats[i].calls)
		}
	}
	for _, t := range tests {
		ps = append(ps, t.p)
	}
	qs := stats.BenjaminiHochberg(ps)
	m, rejected := 0, 0
	for i, t := range tests {
		t.q = qs[i]
		if !math.IsNaN(t.p) {
			m++
		}
		if t.q <= alpha {
			rejected++
		}
	}
	gamma := alpha
	if m > 0 {
		gamma = float64(max(rejected, 1)) * alpha / float64(m)
	}
	cmpn.Confidence = 1 - gamma
	for _, t := range tests {
		t.level(gamma)
	}
	statementQValues(cstats)
	for i := range cstats {
		st := &cstats[i]
		st.decide(alpha, budget)
		if st.note != "" {
			cmpn.Warnings = append(cmpn.Warnings, st.note)
		}
		cmpn.Changes = append(cmpn.Changes, st.change())
	}
	slices.SortStableFunc(cmpn.Changes, func(a, b Change) int {
		if a.BelowDetection != b.BelowDetection {
			if a.BelowDetection {
				return 1
			}
			return -1
		}
		if c := cmp.Compare(a.Verdict.severity(), b.Verdict.severity()); c != 0 {
			return c
		}
		if c := cmp.Compare(math.Abs(b.Change), math.Abs(a.Change)); c != 0 {
			return c
		}
		return cmp.Compare(a.Identity, b.Identity)
	})
	return cmpn
}

// Gate returns the changes that fail the regression budget, in the order
// of Changes: every regressed cause, and every new cause that is
// significant (q ≤ Alpha) when an absolute budget is set and the new
// cause's normalised cost exceeds it. A new cause does not fail a purely
// relative budget: a relative change from nothing is undefined, and
// renaming a function makes a new and a gone cause. An empty result means
// the gate passes (exit status 0; otherwise 3).
func (c *Comparison) Gate() []Change {
	var out []Change
	for _, ch := range c.Changes {
		switch {
		case ch.Verdict == OutcomeRegressed:
			out = append(out, ch)
		case ch.Verdict == OutcomeNew && c.Budget.Set && c.Budget.Absolute > 0 &&
			ch.QValue != nil && *ch.QValue <= c.Alpha && ch.Candidate > c.Budget.Absolute:
			out = append(out, ch)
		}
	}
	return out
}

// side holds what Compare needs of one snapshot.
type side struct {
	snap     *Snapshot
	norm     float64 // divisor of costs
	exposure float64 // exposure of the Poisson test
}

func sideOf(s *Snapshot) *side { return &side{snap: s} }

func (s *side) summary() SideSummary {
	snap := s.snap
	return SideSummary{
		Inputs:        slices.Clone(snap.Inputs),
		SourceKind:    snap.SourceKind,
		ValueType:     snap.ValueType,
		Totals:        snap.Totals,
		Requests:      snap.Totals.Requests,
		DurationNanos: snap.DurationNanos,
		Exposure:      s.norm,
	}
}

// group is the causes of one side sharing an identity.
type group struct {
	members []*SnapshotCause // by cost descending, then function
	cost    int64
	db, net int64
	samples int64
}

func groupCauses(s *Snapshot) map[string]*group {
	out := map[string]*group{}
	for i := range s.Causes {
		c := &s.Causes[i]
		id := c.Identity
		if id == "" {
			id = attribute.Identity(c.Function)
		}
		g := out[id]
		if g == nil {
			g = &group{}
			out[id] = g
		}
		g.members = append(g.members, c)
		g.cost += c.Cost
		g.db += c.Database
		g.net += c.Network
		g.samples += c.Samples
	}
	for _, g := range out {
		slices.SortStableFunc(g.members, func(a, b *SnapshotCause) int {
			if c := cmp.Compare(b.Cost, a.Cost); c != 0 {
				return c
			}
			return cmp.Compare(a.Function, b.Function)
		})
	}
	return out
}

// requests returns the requests in which the group appears: the largest
// member's count (members are assumed to co-occur, see Compare).
func (g *group) requests() int {
	if g == nil {
		return 0
	}
	n := 0
	for _, m := range g.members {
		n = max(n, m.Requests)
	}
	return n
}

// hasVectors reports whether every member carries per-request costs.
func (g *group) hasVectors() bool {
	for _, m := range g.members {
		if m.RequestCosts == nil {
			return false
		}
	}
	return true
}

// costsOf and callsOf select a member's per-request costs or calls.
func costsOf(m *SnapshotCause) *CappedValues { return m.RequestCosts }
func callsOf(m *SnapshotCause) *CappedValues { return m.RequestCalls }

// hasCalls reports whether every member carries per-request calls.
func (g *group) hasCalls() bool {
	for _, m := range g.members {
		if m.RequestCalls == nil {
			return false
		}
	}
	return true
}

// calls returns the group's outbound calls (0 for a nil group).
func (g *group) calls() int64 {
	if g == nil {
		return 0
	}
	var n int64
	for _, m := range g.members {
		n += m.Calls
	}
	return n
}

// vector returns the group's per-request values (costs or calls, as of
// selects) over n requests as an ascending vector of min(n,
// MaxVectorValues) values (see requestVector), members added element-wise.
func (g *group) vector(n int, of func(*SnapshotCause) *CappedValues) []float64 {
	var out []float64
	if g == nil {
		return requestVector(nil, n)
	}
	for _, m := range g.members {
		v := requestVector(of(m), n)
		if out == nil {
			out = v
			continue
		}
		for i := range out {
			out[i] += v[i]
		}
	}
	return out
}

// requestVector returns the ascending per-request costs of a cause over n
// requests: n − v.Count zeros (requests without the cause), then the
// values v stands for. With more than MaxVectorValues requests it returns
// the systematic subsample of MaxVectorValues of them (ranks
// ⌊(i+½)·n/k⌋), reading thinned values at their proportional rank.
func requestVector(v *CappedValues, n int) []float64 {
	var count int64
	if v != nil {
		count = v.Count
	}
	n = max(n, int(count))
	m := min(n, MaxVectorValues)
	out := make([]float64, m)
	zeros := int64(n) - count
	for i := range out {
		r := int64(i)
		if m < n {
			r = int64((float64(i) + 0.5) * float64(n) / float64(m))
		}
		if r < zeros {
			continue
		}
		j := r - zeros
		k := int64(len(v.Values))
		if k != count {
			j = min(j*k/count, k-1)
		}
		out[i] = v.Values[j]
	}
	return out
}

// test is one comparison of a Change (its cost, or its calls per
// request) being computed, with non-finite values allowed. Its p-value and
// its interval come from one procedure, so that after the
// Benjamini–Hochberg step the interval at the adjusted level excludes "no
// change" exactly when the test is significant (see Compare).
type test struct {
	ok          bool    // the test ran
	base, cand  float64 // normalised values
	rel, lo, hi float64
	p, q, mde   float64
	// Poisson: k of n events on the candidate side, odds = tb/tc.
	k, n int
	odds float64
	// Bootstrap: the sorted resampled ratios of means.
	ratios  []float64
	verdict Outcome
}

func newTest() test {
	nan := math.NaN()
	return test{rel: nan, lo: nan, hi: nan, p: nan, q: nan, mde: nan}
}

// changeStat is a Change being computed, with non-finite values allowed.
type changeStat struct {
	id               string
	functions        []string
	kind             attribute.Kind
	time, calls      test
	hasCalls         bool
	inBase, inCand   bool
	baseN, candN     int64
	baseReq, candReq int
	nb, nc           int // requests of the entry points reaching the cause
	below            bool
	statements       []StatementChange
	method           string
	verdict          Outcome
	reasons          []string
	note             string
}

func compareCause(id string, bg, cg *group, bs, cs *side, perRequest bool, seed uint64) changeStat {
	st := changeStat{id: id, time: newTest(), calls: newTest(), inBase: bg != nil, inCand: cg != nil}
	seen := map[string]bool{}
	for _, g := range []*group{cg, bg} {
		if g == nil {
			continue
		}
		for _, m := range g.members {
			if !seen[m.Function] {
				seen[m.Function] = true
				st.functions = append(st.functions, m.Function)
			}
		}
	}
	var bCost, cCost int64
	if bg != nil {
		bCost, st.baseN = bg.cost, bg.samples
		st.kind = kindOf(bg.db, bg.net)
	}
	if cg != nil {
		cCost, st.candN = cg.cost, cg.samples
		st.kind = kindOf(cg.db, cg.net)
	}
	st.baseReq, st.candReq = bg.requests(), cg.requests()
	st.time.base, st.time.cand = normalise(bCost, bs.norm), normalise(cCost, cs.norm)

	if perRequest && (bg == nil || bg.hasVectors()) && (cg == nil || cg.hasVectors()) {
		st.method = MethodBootstrap
		// Per request of the entry points that reach the cause (on either
		// side), so that a shift in the traffic mix between endpoints does
		// not read as a change of the cause, and requests that cannot reach
		// it do not dilute the test with zeros.
		entries := entryNames(bg, cg)
		st.nb, st.nc = entryRequests(bs.snap, entries), entryRequests(cs.snap, entries)
		st.time.base, st.time.cand = normalise(bCost, float64(st.nb)), normalise(cCost, float64(st.nc))
		st.time.bootstrap(bg.vector(st.nb, costsOf), cg.vector(st.nc, costsOf), mixSeed(seed, id))
		// Calls per request, where both sides counted them: an N+1
		// regression changes them first, and they are far less noisy than
		// time.
		if (bg == nil || bg.hasCalls()) && (cg == nil || cg.hasCalls()) {
			st.hasCalls = true
			st.calls.base, st.calls.cand = normalise(bg.calls(), float64(st.nb)), normalise(cg.calls(), float64(st.nc))
			st.calls.bootstrap(bg.vector(st.nb, callsOf), cg.vector(st.nc, callsOf), mixSeed(seed^0xca11, id))
		}
		// The evidence is the requests in which the cause appears.
		st.below = !detectable(st.baseReq+st.candReq, float64(st.nb), float64(st.nc))
		st.statements = statementChanges(bg, cg, float64(st.nb), float64(st.nc))
		return st
	}
	st.method = MethodPoisson
	if perRequest {
		st.note = fmt.Sprintf("%s: no per-request costs on one side; compared span counts as Poisson rates", st.functions[0])
	}
	rt := stats.PoissonRateTest(float64(st.baseN), float64(st.candN), bs.exposure, cs.exposure)
	if math.IsNaN(rt.P) {
		st.note = fmt.Sprintf("%s: no valid exposure (requests, seconds or boundary samples) on one side; not tested", st.functions[0])
		return st
	}
	st.time.ok = true
	st.time.p = rt.P
	st.time.k, st.time.n, st.time.odds = int(rt.Candidate), int(rt.Base+rt.Candidate), bs.exposure/cs.exposure
	if st.baseN > 0 {
		st.time.rel = rt.RR - 1
	}
	st.below = !detectable(int(st.baseN+st.candN), bs.exposure, cs.exposure)
	if bs.snap.SourceKind == cs.snap.SourceKind && !bs.snap.Sampled {
		st.statements = statementChanges(bg, cg, bs.norm, cs.norm)
	}
	return st
}

// bootstrap runs the percentile bootstrap of the ratio of mean per-request
// values (Efron & Tibshirani, An Introduction to the Bootstrap, 1993,
// ch. 13 and §16.4): the same resampled ratios give the p-value, the
// interval and the detectable change, so that the three agree.
func (t *test) bootstrap(vb, vc []float64, seed uint64) {
	if t.base > 0 {
		t.rel = t.cand/t.base - 1
	}
	t.ratios = stats.BootstrapRatios(vb, vc, stats.DefaultBootstrapResamples, seed)
	if len(t.ratios) == 0 {
		return
	}
	t.ok = true
	t.p = stats.BootstrapRatioP(t.ratios)
}

// level sets the interval and the MDE of t at confidence 1 − gamma.
func (t *test) level(gamma float64) {
	if !t.ok {
		return
	}
	switch {
	case t.ratios != nil:
		if t.base > 0 {
			lo, hi := stats.BootstrapRatioBounds(t.ratios, gamma)
			t.lo, t.hi = lo-1, hi-1
			t.mde = stats.BootstrapMDE(t.ratios, gamma, ComparePower)
		}
	default:
		if t.n-t.k > 0 {
			lo, hi := stats.ClopperPearson(t.k, t.n, 1-gamma)
			t.lo, t.hi = lo/(1-lo)*t.odds-1, hi/(1-hi)*t.odds-1
			if hi == 1 {
				t.hi = math.Inf(1)
			}
			t.mde = stats.MinDetectableRatio(float64(t.n-t.k), float64(t.k), gamma, ComparePower) - 1
		}
	}
}

// detectable reports whether n events split between two sides with
// exposures tb and tc could give a significant exact conditional test at
// all: the smallest p-value, all n on the side less expected, must be at
// most DefaultAlpha. With less evidence no outcome could be told from
// chance (e.g. 5 events over equal exposures: p ≥ 0.0625).
func detectable(n int, tb, tc float64) bool {
	if n <= 0 || !(tb > 0) || !(tc > 0) {
		return false
	}
	pi0 := tc / (tb + tc)
	pmin := 2 * math.Min(math.Pow(pi0, float64(n)), math.Pow(1-pi0, float64(n)))
	return pmin <= DefaultAlpha
}

// entryNames lists the entry points under which the groups' members were
// charged, on either side.
func entryNames(gs ...*group) map[string]bool {
	out := map[string]bool{}
	for _, g := range gs {
		if g == nil {
			continue
		}
		for _, m := range g.members {
			for _, e := range m.EntryPoints {
				out[e.Entry] = true
			}
		}
	}
	return out
}

// entryRequests counts the requests of snap that went through the named
// entry points; with no entry request counts it falls back to all requests.
func entryRequests(snap *Snapshot, entries map[string]bool) int {
	n := 0
	for _, e := range snap.Entries {
		if entries[e.Entry] {
			n += e.Requests
		}
	}
	if n == 0 || n > snap.Totals.Requests {
		return snap.Totals.Requests
	}
	return n
}

func normalise(cost int64, norm float64) float64 {
	if !(norm > 0) {
		return 0
	}
	return float64(cost) / norm
}

// mixSeed derives a bootstrap seed for one identity, independent of the
// order in which causes are compared (FNV-1a of the identity, mixed with
// the seed by the SplitMix64 finaliser).
func mixSeed(seed uint64, id string) uint64 {
	h := fnv.New64a()
	h.Write([]byte(id))
	z := seed ^ h.Sum64()
	z = (z ^ z>>30) * 0xbf58476d1ce4e5b9
	z = (z ^ z>>27) * 0x94d049bb133111eb
	return z ^ z>>31
}

// verdictOf applies the verdict rules of Compare to one test of a cause
// present on both sides; abs says whether the absolute budget applies (it
// is in the unit of costs, not of calls).
func verdictOf(t *test, alpha float64, b Budget, abs bool) Outcome {
	switch {
	case math.IsNaN(t.q):
		return OutcomeInconclusive
	case t.q > alpha:
		return OutcomeUnchanged
	case math.IsNaN(t.lo) || math.IsNaN(t.hi):
		return OutcomeInconclusive
	}
	if !abs {
		b.Absolute = 0
	}
	return budgetVerdict(t.lo, t.hi, t.base, b)
}

// budgetVerdict judges a significant change by its relative interval
// [lo, hi] (base × interval in absolute terms) against budget b:
// regressed or improved when the interval clears the budget, unchanged
// when it lies within it, else inconclusive.
func budgetVerdict(lo, hi, base float64, b Budget) Outcome {
	r, a := b.Relative, b.Absolute
	absLo, absHi := lo*base, hi*base
	switch {
	case lo > r && (a == 0 || absLo > a):
		return OutcomeRegressed
	case hi < -r && (a == 0 || absHi < -a):
		return OutcomeImproved
	case (lo >= -r && hi <= r) || (a > 0 && absLo >= -a && absHi <= a):
		return OutcomeUnchanged
	}
	return OutcomeInconclusive
}

// decide sets the verdict of a cause and its reasons: new or gone when
// absent from one side; otherwise the more severe of the verdicts on its
// cost ("time") and on its calls per request ("calls"), so that a
// significant change in calls per request is a regression in its own
// right. Reasons name the tests that give the verdict.
func (st *changeStat) decide(alpha float64, b Budget) {
	switch {
	case !st.inBase:
		st.verdict = OutcomeNew
		return
	case !st.inCand:
		st.verdict = OutcomeGone
		return
	case st.below:
		st.verdict, st.time.verdict, st.calls.verdict = OutcomeUnchanged, OutcomeUnchanged, OutcomeUnchanged
		return
	}
	st.time.verdict = verdictOf(&st.time, alpha, b, true)
	st.verdict = st.time.verdict
	if st.hasCalls {
		st.calls.verdict = verdictOf(&st.calls, alpha, b, false)
		if st.calls.verdict.rank() < st.verdict.rank() {
			st.verdict = st.calls.verdict
		}
	}
	if st.verdict == OutcomeUnchanged {
		return
	}
	if st.time.verdict == st.verdict {
		st.reasons = append(st.reasons, ReasonTime)
	}
	if st.hasCalls && st.calls.verdict == st.verdict {
		st.reasons = append(st.reasons, ReasonCalls)
	}
}

// rank orders the verdicts of a cause present on both sides when its two
// tests disagree: regressed, inconclusive, improved, unchanged.
func (o Outcome) rank() int {
	switch o {
	case OutcomeRegressed:
		return 0
	case OutcomeInconclusive:
		return 1
	case OutcomeImproved:
		return 2
	}
	return 3
}

// change converts st to a Change, replacing non-finite values by nil.
func (st *changeStat) change() Change {
	c := Change{
		Function:       st.functions[0],
		Identity:       st.id,
		Kind:           st.kind,
		Base:           st.time.base,
		Candidate:      st.time.cand,
		Change:         st.time.cand - st.time.base,
		Verdict:        st.verdict,
		Reasons:        st.reasons,
		BelowDetection: st.below,
		BaseSamples:    st.baseN,
		CandSamples:    st.candN,
		BaseRequests:   st.baseReq,
		CandRequests:   st.candReq,
		Method:         st.method,
		Statements:     st.statements,
	}
	if c.Reasons == nil {
		c.Reasons = []string{}
	}
	if c.Statements == nil {
		c.Statements = []StatementChange{}
	}
	if len(st.functions) > 1 {
		c.Functions = slices.Sorted(slices.Values(st.functions))
	}
	both := st.inBase && st.inCand
	c.RelativeChange, c.RelLo, c.RelHi, c.PValue, c.QValue, c.MDE = st.time.pointers(both)
	if st.hasCalls {
		cc := &CallsChange{Base: st.calls.base, Candidate: st.calls.cand, Verdict: st.calls.verdict}
		cc.RelativeChange, cc.RelLo, cc.RelHi, cc.PValue, cc.QValue, cc.MDE = st.calls.pointers(both)
		if !both {
			cc.Verdict = st.verdict
		}
		c.Calls = cc
	}
	return c
}

// pointers returns t's relative change, interval, p, q and MDE as nil
// for non-finite values; the relative change, interval and MDE are nil
// unless the cause is on both sides.
func (t *test) pointers(both bool) (rel, lo, hi, p, q, mde *float64) {
	if both {
		rel, lo, hi, mde = finite(t.rel), finite(t.lo), finite(t.hi), finite(t.mde)
	}
	return rel, lo, hi, finite(t.p), finite(t.q), mde
}

// statementQValues adjusts the p-values of every statement of the
// comparison together by Benjamini–Hochberg.
func statementQValues(cstats []changeStat) {
	var ps []float64
	var at []*StatementChange
	for i := range cstats {
		for j := range cstats[i].statements {
			if sc := &cstats[i].statements[j]; sc.PValue != nil {
				ps = append(ps, *sc.PValue)
				at = append(at, sc)
			}
		}
	}
	for i, q := range stats.BenjaminiHochberg(ps) {
		at[i].QValue = finite(q)
	}
}

// statementChanges compares the calls per request of each statement of a
// cause (statements are matched by system, statement and peer); nb and nc
// are the sides' divisors. Statements are in the candidate's order, then
// those found only in the base.
func statementChanges(bg, cg *group, nb, nc float64) []StatementChange {
	type key struct{ system, statement, peer string }
	var out []StatementChange
	idx := map[key]int{}
	add := func(g *group, cand bool) {
		if g == nil {
			return
		}
		for _, m := range g.members {
			for _, d := range m.Statements {
				k := key{d.System, d.Statement, d.Peer}
				i, ok := idx[k]
				if !ok {
					i = len(out)
					idx[k] = i
					out = append(out, StatementChange{Statement: d.Statement, System: d.System, Peer: d.Peer, Kind: d.Kind})
				}
				sc := &out[i]
				if cand {
					sc.candCalls += d.Calls
				} else {
					sc.baseCalls += d.Calls
				}
			}
		}
	}
	add(cg, true)
	add(bg, false)
	for i := range out {
		sc := &out[i]
		sc.Base, sc.Candidate = normalise(sc.baseCalls, nb), normalise(sc.candCalls, nc)
		sc.New = bg != nil && sc.baseCalls == 0 && sc.candCalls > 0
		sc.Gone = cg != nil && sc.candCalls == 0 && sc.baseCalls > 0
		if bg != nil && cg != nil && sc.baseCalls+sc.candCalls > 0 {
			sc.PValue = finite(stats.PoissonRateTest(float64(sc.baseCalls), float64(sc.candCalls), nb, nc).P)
		}
	}
	return out
}

// finite returns a pointer to x, or nil when x is NaN or infinite.
func finite(x float64) *float64 {
	if math.IsNaN(x) || math.IsInf(x, 0) {
		return nil
	}
	return &x
}
