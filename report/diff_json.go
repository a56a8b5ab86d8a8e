package report

import (
	"io"

	"github.com/culprithq/culprit/attribute/compare"
)

// DiffJSON renders the versioned comparison document, DiffDocument
// (lowerCamelCase; quantities that do not exist are null; JSON Schema in
// testdata/schema/diff.schema.json), with "gate": the changes that fail
// the regression budget (Comparison.Gate; [] when the gate passes).
// Options.Limit cuts "changes" to its first Limit entries and adds
// "omitted" (how many were cut, and their summed base and candidate
// values); "gate" always lists every failing change. Options.Color and
// Options.Width are ignored. Invalid UTF-8 in input strings is written as
// U+FFFD (JSON strings are UTF-8).
type DiffJSON struct{}

// DiffDocument is the culprit.diff/v1 document, defined here so that the
// comparison model can change without changing the public schema; field
// order is key order.
type DiffDocument struct {
	Schema     string       `json:"schema"`
	ProducedBy Provenance   `json:"producedBy"`
	Basis      string       `json:"basis"`
	Unit       string       `json:"unit"`
	ValueType  ValueTypeDoc `json:"valueType"`
	Base       SideDoc      `json:"base"`
	Candidate  SideDoc      `json:"candidate"`
	Alpha      float64      `json:"alpha"`
	Power      float64      `json:"power"`
	Confidence float64      `json:"confidence"`
	Budget     BudgetDoc    `json:"budget"`
	Seed       uint64       `json:"seed"`
	Resamples  int          `json:"resamples"`
	Changes    []ChangeDoc  `json:"changes"`
	Warnings   []string     `json:"warnings"`
	Gate       []ChangeDoc  `json:"gate"`
	Omitted    *OmittedDoc  `json:"omitted,omitempty"`
}

// SideDoc describes one side of a comparison.
type SideDoc struct {
	Inputs        []InputDoc   `json:"inputs"`
	SourceKind    string       `json:"sourceKind"`
	ValueType     ValueTypeDoc `json:"valueType"`
	Totals        TotalsDoc    `json:"totals"`
	Requests      int          `json:"requests"`
	DurationNanos int64        `json:"durationNanos"`
	Exposure      float64      `json:"exposure"`
}

// BudgetDoc is the regression budget in force.
type BudgetDoc struct {
	Relative float64 `json:"relative"`
	Absolute float64 `json:"absolute"`
	Set      bool    `json:"set"`
}

// ChangeDoc is the comparison of one root cause (see compare.Change).
type ChangeDoc struct {
	Function       string               `json:"function"`
	Functions      []string             `json:"functions,omitempty"`
	Identity       string               `json:"identity"`
	Kind           string               `json:"kind"`
	Base           float64              `json:"base"`
	Candidate      float64              `json:"candidate"`
	Change         float64              `json:"change"`
	RelativeChange *float64             `json:"relativeChange"`
	RelLo          *float64             `json:"relLo"`
	RelHi          *float64             `json:"relHi"`
	PValue         *float64             `json:"pValue"`
	QValue         *float64             `json:"qValue"`
	MDE            *float64             `json:"mde"`
	Verdict        string               `json:"verdict"`
	BaseSamples    int64                `json:"baseSamples"`
	CandSamples    int64                `json:"candSamples"`
	BaseRequests   int                  `json:"baseRequests"`
	CandRequests   int                  `json:"candRequests"`
	Method         string               `json:"method"`
	Reasons        []string             `json:"reasons"`
	BelowDetection bool                 `json:"belowDetection"`
	Calls          *CallsChangeDoc      `json:"calls"`
	Statements     []StatementChangeDoc `json:"statements"`
}

// CallsChangeDoc compares a root cause's calls per request.
type CallsChangeDoc struct {
	Base           float64  `json:"base"`
	Candidate      float64  `json:"candidate"`
	RelativeChange *float64 `json:"relativeChange"`
	RelLo          *float64 `json:"relLo"`
	RelHi          *float64 `json:"relHi"`
	PValue         *float64 `json:"pValue"`
	QValue         *float64 `json:"qValue"`
	MDE            *float64 `json:"mde"`
	Verdict        string   `json:"verdict"`
}

// StatementChangeDoc is one statement's calls per request on each side.
type StatementChangeDoc struct {
	Statement string   `json:"statement"`
	System    string   `json:"system,omitempty"`
	Peer      string   `json:"peer,omitempty"`
	Kind      string   `json:"kind"`
	Base      float64  `json:"base"`
	Candidate float64  `json:"candidate"`
	New       bool     `json:"new"`
	Gone      bool     `json:"gone"`
	PValue    *float64 `json:"pValue"`
	QValue    *float64 `json:"qValue"`
}

// RenderDiff implements DiffRenderer.
func (DiffJSON) RenderDiff(w io.Writer, c *compare.Comparison, opts Options) error {
	return writeJSON(w, NewDiffDocument(c, opts))
}

// NewDiffDocument converts c into the diff document, cut to opts.Limit.
func NewDiffDocument(c *compare.Comparison, opts Options) *DiffDocument {
	doc := &DiffDocument{Schema: DiffSchema, ProducedBy: opts.Provenance, Basis: string(c.Basis), Unit: c.Unit,
		ValueType: ValueTypeDoc{c.ValueType.Type, c.ValueType.Unit}, Base: sideDoc(c.Base), Candidate: sideDoc(c.Candidate),
		Alpha: c.Alpha, Power: c.Power, Confidence: c.Confidence,
		Budget: BudgetDoc{c.Budget.Relative, c.Budget.Absolute, c.Budget.Set}, Seed: c.Seed, Resamples: c.Resamples,
		Changes: []ChangeDoc{}, Warnings: nonNil(c.Warnings), Gate: []ChangeDoc{}}
	shown := limitedChanges(c, opts)
	for _, ch := range shown {
		doc.Changes = append(doc.Changes, changeDoc(ch))
	}
	for _, ch := range c.Gate() {
		doc.Gate = append(doc.Gate, changeDoc(ch))
	}
	if len(shown) < len(c.Changes) {
		var b, cand float64
		for _, ch := range c.Changes[len(shown):] {
			b += ch.Base
			cand += ch.Candidate
		}
		doc.Omitted = &OmittedDoc{Count: len(c.Changes) - len(shown), Base: &b, Candidate: &cand}
	}
	return doc
}

func sideDoc(s compare.SideSummary) SideDoc {
	t := s.Totals
	var reqs *int
	if t.Requests > 0 {
		n := t.Requests
		reqs = &n
	}
	out := SideDoc{Inputs: []InputDoc{}, SourceKind: s.SourceKind, ValueType: ValueTypeDoc{s.ValueType.Type, s.ValueType.Unit},
		Totals: TotalsDoc{Cost: t.Cost, Database: t.Database, Network: t.Network, Other: t.Other, Unattributed: t.Unattributed,
			Requests: reqs, Samples: t.Samples, BoundarySamples: t.BoundarySamples},
		Requests: s.Requests, DurationNanos: s.DurationNanos, Exposure: s.Exposure}
	for _, in := range s.Inputs {
		out.Inputs = append(out.Inputs, inputDoc(in))
	}
	return out
}

func changeDoc(ch compare.Change) ChangeDoc {
	out := ChangeDoc{Function: ch.Function, Functions: ch.Functions, Identity: ch.Identity, Kind: string(ch.Kind),
		Base: ch.Base, Candidate: ch.Candidate, Change: ch.Change, RelativeChange: ch.RelativeChange, RelLo: ch.RelLo,
		RelHi: ch.RelHi, PValue: ch.PValue, QValue: ch.QValue, MDE: ch.MDE, Verdict: string(ch.Verdict),
		BaseSamples: ch.BaseSamples, CandSamples: ch.CandSamples, BaseRequests: ch.BaseRequests, CandRequests: ch.CandRequests,
		Method: ch.Method, Reasons: nonNil(ch.Reasons), BelowDetection: ch.BelowDetection, Statements: []StatementChangeDoc{}}
	if cc := ch.Calls; cc != nil {
		out.Calls = &CallsChangeDoc{cc.Base, cc.Candidate, cc.RelativeChange, cc.RelLo, cc.RelHi, cc.PValue, cc.QValue, cc.MDE, string(cc.Verdict)}
	}
	for _, s := range ch.Statements {
		out.Statements = append(out.Statements, StatementChangeDoc{s.Statement, s.System, s.Peer, string(s.Kind), s.Base, s.Candidate, s.New, s.Gone, s.PValue, s.QValue})
	}
	return out
}
