package compare

import (
	"fmt"
	"strconv"

	"github.com/culprithq/culprit/traces"
)

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
