package attribute

import (
	"cmp"
	"fmt"
	"hash/fnv"
	"math"
	"runtime"
	"slices"
	"sync"

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
	// CompareConfidence is the level of every interval of a Comparison.
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
	// MethodMWUBootstrap compares per-request costs: Mann–Whitney for the
	// p-value, percentile bootstrap of the ratio of means for the interval.
	MethodMWUBootstrap = "mann-whitney+bootstrap"
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
	// Alpha is the significance threshold on q-values; Power and
	// Confidence are those of MDE and of the intervals.
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
	Totals        Totals           `json:"totals"`
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
	Function  string   `json:"function"`
	Functions []string `json:"functions,omitempty"`
	Identity  string   `json:"identity"`
	Kind      Kind     `json:"kind"`
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
	// Method is MethodPoisson or MethodMWUBootstrap.
	Method string `json:"method"`
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
// zeros (each side has as many values as such requests):
// per-request costs are skewed and often mostly zero, so the p-value
// comes from the Mann–Whitney rank test (exact for small tie-free samples,
// else the tie-corrected normal approximation with continuity correction),
// which needs no distributional assumption and detects a shift of the
// distribution, and the interval of
// the relative change from the percentile bootstrap of the ratio of mean
// per-request cost (CompareOptions.Seed, DefaultBootstrapResamples
// rounds), since the mean is what capacity and total time follow
// (methods reference §4). A rank test does not see a change confined to a
// few expensive requests; such a change shows in the interval but is not
// significant. Both methods take requests (or samples) as independent;
// warm-up and queueing make them autocorrelated, which makes p-values too
// small, so compare steady-state runs. Span sources without per-request costs fall back to the
// Poisson comparison of span counts (calls). MDE: for counts
// MinDetectableRatio − 1, for per-request costs MinDetectableDiff divided
// by the base mean. Per-request vectors beyond MaxVectorValues requests
// are thinned systematically (see CappedValues), which makes the tests
// conservative. Functions that share an identity within one side are
// added request by request under the assumption that their costs rise
// and fall together (their sorted per-request vectors are added
// element-wise): the mean is exact, the spread an approximation.
//
// p-values of all changes (new and gone causes included) are adjusted
// together by Benjamini–Hochberg (§5). Verdicts (§6): a cause absent on
// one side is new or gone; otherwise q > Alpha is unchanged; a lower
// interval bound above the relative budget (and, with an absolute budget,
// a lower bound of the absolute change above it) is regressed; the mirror
// image is improved; an interval wholly within ± the budget is unchanged;
// anything else significant is inconclusive. Intervals are 95 %; the
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
		Resamples:  DefaultBootstrapResamples,
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
	stats := make([]changeStat, len(ids))
	var wg sync.WaitGroup
	sem := make(chan struct{}, runtime.GOMAXPROCS(0))
	for i, id := range ids {
		wg.Add(1)
		sem <- struct{}{}
		go func() {
			defer func() { <-sem; wg.Done() }()
			stats[i] = compareCause(id, bg[id], cg[id], bs, cs, perRequest, alpha, opts.Seed)
		}()
	}
	wg.Wait()

	ps := make([]float64, len(stats))
	for i := range stats {
		ps[i] = stats[i].p
	}
	qs := BenjaminiHochberg(ps)
	for i := range stats {
		st := &stats[i]
		st.q = qs[i]
		st.verdict = verdictOf(st, alpha, budget)
		if st.note != "" {
			cmpn.Warnings = append(cmpn.Warnings, st.note)
		}
		cmpn.Changes = append(cmpn.Changes, st.change())
	}
	slices.SortStableFunc(cmpn.Changes, func(a, b Change) int {
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
			id = Identity(c.Function)
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

// vector returns the group's per-request costs over n requests as an
// ascending vector of min(n, MaxVectorValues) values (see requestVector),
// members added element-wise.
func (g *group) vector(n int) []float64 {
	var out []float64
	if g == nil {
		return requestVector(nil, n)
	}
	for _, m := range g.members {
		v := requestVector(m.RequestCosts, n)
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

// changeStat is a Change being computed, with non-finite values allowed.
type changeStat struct {
	id               string
	functions        []string
	kind             Kind
	base, cand       float64
	rel, lo, hi      float64
	p, q, mde        float64
	inBase, inCand   bool
	baseN, candN     int64
	baseReq, candReq int
	method           string
	verdict          Outcome
	note             string
}

func compareCause(id string, bg, cg *group, bs, cs *side, perRequest bool, alpha float64, seed uint64) changeStat {
	nan := math.NaN()
	st := changeStat{id: id, rel: nan, lo: nan, hi: nan, p: nan, q: nan, mde: nan, inBase: bg != nil, inCand: cg != nil}
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
	st.base, st.cand = normalise(bCost, bs.norm), normalise(cCost, cs.norm)

	if perRequest && (bg == nil || bg.hasVectors()) && (cg == nil || cg.hasVectors()) {
		st.method = MethodMWUBootstrap
		// Per request of the entry points that reach the cause (on either
		// side), so that a shift in the traffic mix between endpoints does
		// not read as a change of the cause, and requests that cannot reach
		// it do not dilute the test with zeros.
		entries := entryNames(bg, cg)
		nb, nc := entryRequests(bs.snap, entries), entryRequests(cs.snap, entries)
		st.base, st.cand = normalise(bCost, float64(nb)), normalise(cCost, float64(nc))
		vb, vc := bg.vector(nb), cg.vector(nc)
		mw := MannWhitney(vc, vb)
		st.p = mw.PCorrected
		if mw.Exact {
			st.p = mw.PExact
		}
		if st.base > 0 {
			st.rel = st.cand/st.base - 1
			lo, hi := BootstrapRatioCI(vb, vc, DefaultBootstrapResamples, CompareConfidence, mixSeed(seed, id))
			st.lo, st.hi = lo-1, hi-1
			if len(vb) >= 2 && len(vc) >= 2 {
				_, varB := meanVar(vb)
				_, varC := meanVar(vc)
				d := MinDetectableDiff(math.Sqrt(varB), float64(len(vb)), math.Sqrt(varC), float64(len(vc)), alpha, ComparePower)
				st.mde = d / st.base
			}
		}
		return st
	}
	st.method = MethodPoisson
	if perRequest {
		st.note = fmt.Sprintf("%s: no per-request costs on one side; compared span counts as Poisson rates", st.functions[0])
	}
	rt := PoissonRateTest(float64(st.baseN), float64(st.candN), bs.exposure, cs.exposure)
	if math.IsNaN(rt.P) {
		st.note = fmt.Sprintf("%s: no valid exposure (requests, seconds or boundary samples) on one side; not tested", st.functions[0])
		return st
	}
	st.p = rt.P
	if st.baseN > 0 {
		st.rel, st.lo, st.hi = rt.RR-1, rt.Lo-1, rt.Hi-1
	}
	st.mde = MinDetectableRatio(float64(st.baseN), float64(st.candN), alpha, ComparePower) - 1
	return st
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

// verdictOf applies the verdict rules of Compare.
func verdictOf(st *changeStat, alpha float64, b Budget) Outcome {
	switch {
	case !st.inBase:
		return OutcomeNew
	case !st.inCand:
		return OutcomeGone
	case math.IsNaN(st.q):
		return OutcomeInconclusive
	case st.q > alpha:
		return OutcomeUnchanged
	case math.IsNaN(st.lo) || math.IsNaN(st.hi):
		return OutcomeInconclusive
	}
	return budgetVerdict(st.lo, st.hi, st.base, b)
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

// change converts st to a Change, replacing non-finite values by nil.
func (st *changeStat) change() Change {
	c := Change{
		Function:     st.functions[0],
		Identity:     st.id,
		Kind:         st.kind,
		Base:         st.base,
		Candidate:    st.cand,
		Change:       st.cand - st.base,
		Verdict:      st.verdict,
		BaseSamples:  st.baseN,
		CandSamples:  st.candN,
		BaseRequests: st.baseReq,
		CandRequests: st.candReq,
		Method:       st.method,
	}
	if len(st.functions) > 1 {
		c.Functions = slices.Sorted(slices.Values(st.functions))
	}
	if st.inBase && st.inCand {
		c.RelativeChange, c.RelLo, c.RelHi = finite(st.rel), finite(st.lo), finite(st.hi)
	}
	c.PValue, c.QValue, c.MDE = finite(st.p), finite(st.q), finite(st.mde)
	return c
}

// finite returns a pointer to x, or nil when x is NaN or infinite.
func finite(x float64) *float64 {
	if math.IsNaN(x) || math.IsInf(x, 0) {
		return nil
	}
	return &x
}
