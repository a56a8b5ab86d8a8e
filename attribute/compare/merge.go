package compare

import (
	"errors"
	"fmt"
	"slices"
	"sort"

	"github.com/culprithq/culprit/attribute"
	"github.com/culprithq/culprit/traces"
)

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
		App: attribute.AppInfo{
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

func addTotals(t *attribute.Totals, u attribute.Totals) {
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
func mergeDetected(snaps []*Snapshot) (out []attribute.Detection, same bool) {
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

func mergeEntries(snaps []*Snapshot) []attribute.EntryTotal {
	var out []attribute.EntryTotal
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
func sortEntries(es []attribute.EntryTotal) {
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
		dist         *attribute.Distribution // of the first shard
		shards       int                     // how many shards have the cause
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
			c.CallsPerRequest = attribute.NewDistribution(slices.Clone(c.RequestCalls.Values))
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
func kindOf(database, network int64) attribute.Kind {
	switch {
	case database > 0 && network > 0:
		return attribute.KindMixed
	case network > 0:
		return attribute.KindNetwork
	case database > 0:
		return attribute.KindDatabase
	}
	return ""
}

func mergeCallSites(cs []attribute.CallSite) []attribute.CallSite {
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
	out := make([]attribute.CallSite, 0, len(keys))
	for _, k := range keys {
		out = append(out, attribute.CallSite{File: k.file, Line: k.line, Cost: sums[k]})
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

func mergeStatements(ds []attribute.Detail) []attribute.Detail {
	if ds == nil {
		return nil
	}
	type key struct {
		kind                        attribute.Kind
		system, statement, id, peer string
	}
	var out []attribute.Detail
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
	attribute.SortDetails(out)
	return out
}

func mergeEntryShares(es []attribute.EntryShare) []attribute.EntryShare {
	if es == nil {
		return nil
	}
	var out []attribute.EntryShare
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
func mergeFindings(snaps []*Snapshot, denom int64) (out []attribute.Finding, approx bool) {
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
	attribute.SortFindings(out)
	return out, approx
}
