package attribute

import (
	"sort"
	"sync"

	"github.com/culprithq/culprit/attribute/stats"
	"github.com/culprithq/culprit/callgraph"
	"github.com/culprithq/culprit/traces"
)

// Options control an attribution. The zero value charges exclusively,
// uses the source's default value and the default label names and
// finding thresholds.
type Options struct {
	// Value names the value type to charge (its type, or type/unit);
	// "" means the source's default. An unknown name also takes the default:
	// callers validate names with traces.Source.ValueIndex first.
	Value string
	// Inclusive charges every distinct application function above the
	// boundary instead of only the nearest one.
	Inclusive bool
	// EntryLabels are the label keys naming a path's entry point, first
	// present wins. Nil means DefaultEntryLabels.
	EntryLabels []string
	// RequestLabels are the label keys naming a profile sample's request.
	// Nil means DefaultRequestLabels.
	RequestLabels []string
	// ShowLiterals reports raw statements instead of fingerprints.
	ShowLiterals bool
	// DropRequestVectors leaves out of each Cause the per-request costs and
	// calls that NewSnapshot keeps for comparisons (16 bytes a root cause
	// and request), for callers that only report. Distributions are still
	// computed.
	DropRequestVectors bool
	// Helpers says whether shared access helpers are detected and seen
	// through (named ones, Rules.Helpers, always are). Zero: HelpersAuto.
	Helpers HelperMode
	// Thresholds for findings; zero fields take their defaults.
	Findings FindingOptions

	// shards, when positive, is how many goroutines charge a span source
	// (tests); 0 picks one per core for large sources.
	shards int
}

// Default label keys.
var (
	DefaultEntryLabels   = []string{"route", "http.route", "endpoint"}
	DefaultRequestLabels = []string{"request_id", "request", "trace_id"}
)

// NoAppFramePrefix starts the name of a bucket for boundary cost with no
// application frame above the boundary.
const NoAppFramePrefix = "(no application frame) "

// Attribute charges the database and network cost of t's source to root
// causes, as DESIGN.md ("What attribution means") specifies.
func Attribute(t *callgraph.Tree, c *Classifier, opts Options) *Result {
	fo := opts.Findings.withDefaults()
	wk := newWalk(t, c, &opts, true)
	src, vi, spans := wk.src, wk.vi, wk.spans
	rec := newRecursionFinder(t, c, wk.w)

	res := &Result{
		Inputs:        src.Inputs,
		Source:        src.Kind.String(),
		ValueType:     src.ValueTypes[vi],
		Sampled:       src.Kind == traces.Profile,
		CPUOnly:       isCPUOnly(src, vi),
		Inclusive:     opts.Inclusive,
		DurationNanos: src.DurationNanos,
		App:           AppInfo{Prefixes: c.rules.App, Detected: c.Detected, RulesFiles: c.rules.Files},
		Warnings:      src.Warnings.Strings(),
		Notes:         inputNotes(src),
	}
	shards := chargeShards(src, spans, opts.shards)
	chs := make([]*charger, len(shards)-1)
	var wg sync.WaitGroup
	for i := range chs {
		chs[i] = newCharger(wk, rec)
		wg.Add(1)
		go func() {
			defer wg.Done()
			chs[i].run(shards[i], shards[i+1])
		}()
	}
	wg.Wait()
	ch := chs[0]
	for i, o := range chs[1:] {
		ch.merge(o)
		chs[i+1] = nil // its tallies are merged: free them
	}
	// The walk's per-node state is done with: let it go before the
	// causes are finished (on large sources it is tens of megabytes).
	helpers, knowsCalls := wk.w.helpers, spans || wk.callsIx >= 0
	ch.wr, ch.rec, wk, rec = nil, nil, nil, nil
	res.Totals = ch.totals
	accs, entries, requests := ch.accs, ch.entryList, ch.requests

	res.Totals.Requests = requests.n
	if spans {
		res.Totals.Other = max(0, res.Totals.Cost-res.Totals.Database-res.Totals.Network)
	} else {
		res.Totals.Other = res.Totals.Cost - res.Totals.Database - res.Totals.Network
	}
	denom := res.Totals.Database + res.Totals.Network
	for _, acc := range accs {
		acc.flush()
	}
	var scratch []float64 // per-request calls, when not kept
	for _, acc := range accs {
		if acc.cause.Cost == 0 && acc.recCost == 0 {
			continue
		}
		cs := acc.finish(src, denom, res.Totals.BoundarySamples, res.Sampled, knowsCalls, !opts.DropRequestVectors, &scratch)
		if cs.Cost > 0 {
			res.Causes = append(res.Causes, cs)
		}
	}
	sortCauses(res.Causes)
	for _, es := range entries {
		es.total.Requests = es.reqs.n
		res.Entries = append(res.Entries, *es.total)
	}
	sort.Slice(res.Entries, func(i, j int) bool {
		a, b := res.Entries[i], res.Entries[j]
		if a.Database+a.Network != b.Database+b.Network {
			return a.Database+a.Network > b.Database+b.Network
		}
		if a.Cost != b.Cost {
			return a.Cost > b.Cost
		}
		return a.Entry < b.Entry
	})
	res.Findings = findings(res, accs, fo, denom)
	res.Helpers = sharedHelpers(c, helpers, ch.viaCost)
	return res
}

func sortCauses(cs []*Cause) {
	sort.Slice(cs, func(i, j int) bool {
		a, b := cs[i], cs[j]
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
}

// sampleIndex returns the value index holding sample counts, -1 for spans
// (one span = one sample) or when the source has no count value.
func sampleIndex(src *traces.Source, vi int) int {
	if src.Kind == traces.Spans {
		return -1
	}
	if src.ValueTypes[vi].Unit == "count" {
		return vi
	}
	for i, vt := range src.ValueTypes {
		if vt.Unit == "count" && (vt.Type == "samples" || vt.Type == "goroutine" || vt.Type == "contentions") {
			return i
		}
	}
	return -1
}

// callsIndex returns the value index counting calls of a source that is
// not made of spans (an execution trace's calls/count), -1 when none.
func callsIndex(src *traces.Source) int {
	if src.Kind != traces.ExecTrace {
		return -1
	}
	for i, vt := range src.ValueTypes {
		if vt.Type == "calls" && vt.Unit == "count" {
			return i
		}
	}
	return -1
}

func isCPUOnly(src *traces.Source, vi int) bool {
	if src.Kind != traces.Profile {
		return false
	}
	return src.ValueTypes[vi].Type == "cpu" || (src.PeriodType.Type == "cpu" && src.ValueTypes[vi].Type == "samples")
}

// requestIDs numbers the requests that profile labels (keys, first
// present wins) name, in order of first use, and returns each path's;
// paths that carry a request keep it.
func requestIDs(src *traces.Source, keys []string) []traces.RequestID {
	out := make([]traces.RequestID, src.Paths.Len())
	ids := map[string]traces.RequestID{}
	var lastSet *traces.LabelSet
	var lastID traces.RequestID
	for pi := range out {
		p := src.Paths.At(pi)
		switch {
		case p.Request != 0:
			out[pi] = p.Request
			continue
		case p.Labels == nil:
			continue
		case p.Labels == lastSet:
			out[pi] = lastID
			continue
		}
		var id traces.RequestID
		for _, k := range keys {
			if v, ok := p.Labels.Get(k); ok && v != "" {
				var seen bool
				if id, seen = ids[v]; !seen {
					id = traces.RequestID(len(ids) + 1)
					ids[v] = id
				}
				break
			}
		}
		out[pi], lastSet, lastID = id, p.Labels, id
	}
	return out
}

// NewDistribution returns the median, p95 and max of xs (linear
// interpolation between order statistics); it sorts xs.
func NewDistribution(xs []float64) *Distribution { return distribution(xs) }

// distribution is NewDistribution.
func distribution(xs []float64) *Distribution {
	sort.Float64s(xs)
	return &Distribution{Median: stats.Quantile(xs, 0.5), P95: stats.Quantile(xs, 0.95), Max: xs[len(xs)-1]}
}
