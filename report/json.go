package report

import (
	"io"

	"github.com/culprithq/culprit/attribute"
	"github.com/culprithq/culprit/traces"
)

// RankSchema is the version tag of the rank JSON document.
const RankSchema = "culprit.rank/v1"

// JSON renders the versioned rank document, RankDocument (lowerCamelCase
// keys; JSON Schema in testdata/schema/rank.schema.json). Every root cause
// is written unless Options.Limit cuts them; then "omitted" says how many
// and their total share and cost.
type JSON struct{}

// RankDocument is the culprit.rank/v1 document. It is defined here, not
// taken from attribute.Result, so that renaming a field of the model
// cannot change the public schema; field order is key order. Counts that
// the source cannot know (calls for profiles, requests without request
// labels) are null, never 0; lists are never null.
type RankDocument struct {
	Schema        string       `json:"schema"`
	ProducedBy    Provenance   `json:"producedBy"`
	Inputs        []InputDoc   `json:"inputs"`
	SourceKind    string       `json:"sourceKind"`
	ValueType     ValueTypeDoc `json:"valueType"`
	Sampled       bool         `json:"sampled"`
	CPUOnly       bool         `json:"cpuOnly"`
	Inclusive     bool         `json:"inclusive"`
	Totals        TotalsDoc    `json:"totals"`
	App           AppDoc       `json:"app"`
	EntryPoints   []EntryDoc   `json:"entryPoints"`
	RootCauses    []CauseDoc   `json:"rootCauses"`
	Findings      []FindingDoc `json:"findings"`
	SharedHelpers []HelperDoc  `json:"sharedHelpers,omitempty"`
	Domains       []DomainDoc  `json:"domains,omitempty"`
	DomainsFile   string       `json:"domainsFile,omitempty"`
	Warnings      []string     `json:"warnings"`
	Notes         []string     `json:"notes,omitempty"`
	DurationNanos int64        `json:"durationNanos"`
	Caveats       []string     `json:"caveats"`
	Omitted       *OmittedDoc  `json:"omitted,omitempty"`
}

// InputDoc is one input file.
type InputDoc struct {
	Name   string `json:"name"`
	Format string `json:"format"`
	Bytes  int64  `json:"bytes"`
	SHA256 string `json:"sha256"`
	// Segment identifies a capture segment of culprit listen by the run
	// that wrote it and its number; absent for other inputs.
	Segment *SegmentDoc `json:"segment,omitempty"`
}

// SegmentDoc is a capture segment's identity.
type SegmentDoc struct {
	Instance string `json:"instance"`
	Sequence uint64 `json:"sequence"`
}

// appDoc converts what was taken as application code.
func appDoc(a attribute.AppInfo) AppDoc {
	d := AppDoc{Prefixes: nonNil(a.Prefixes), Detected: []DetectionDoc{}, RulesFiles: nonNil(a.RulesFiles)}
	for _, x := range a.Detected {
		d.Detected = append(d.Detected, DetectionDoc{x.Prefix, x.Functions, x.Reason})
	}
	return d
}

// inputDoc converts one input.
func inputDoc(in traces.Input) InputDoc {
	d := InputDoc{Name: in.Name, Format: in.Format, Bytes: in.Bytes, SHA256: in.SHA256}
	if in.Segment != nil {
		d.Segment = &SegmentDoc{Instance: in.Segment.Instance, Sequence: in.Segment.Sequence}
	}
	return d
}

// ValueTypeDoc is what the costs measure.
type ValueTypeDoc struct {
	Type string `json:"type"`
	Unit string `json:"unit"`
}

// TotalsDoc are the denominators; Requests is null when unknown.
type TotalsDoc struct {
	Cost            int64 `json:"cost"`
	Database        int64 `json:"database"`
	Network         int64 `json:"network"`
	Other           int64 `json:"other"`
	Unattributed    int64 `json:"unattributed"`
	Requests        *int  `json:"requests"`
	Samples         int64 `json:"samples"`
	BoundarySamples int64 `json:"boundarySamples"`
}

// AppDoc says what was taken as application code.
type AppDoc struct {
	Prefixes   []string       `json:"prefixes"`
	Detected   []DetectionDoc `json:"detected"`
	RulesFiles []string       `json:"rulesFiles"`
}

// DetectionDoc is one auto-detected application prefix.
type DetectionDoc struct {
	Prefix    string `json:"prefix"`
	Functions int    `json:"functions"`
	Reason    string `json:"reason"`
}

// EntryDoc is the cost seen under one entry point.
type EntryDoc struct {
	Entry    string `json:"entry"`
	Cost     int64  `json:"cost"`
	Database int64  `json:"database"`
	Network  int64  `json:"network"`
	Requests *int   `json:"requests"`
}

// CauseDoc is one root cause.
type CauseDoc struct {
	Function        string           `json:"function"`
	File            string           `json:"file,omitempty"`
	Line            int64            `json:"line,omitempty"`
	Kind            string           `json:"kind"`
	NoAppFrame      bool             `json:"noAppFrame,omitempty"`
	Domain          string           `json:"domain,omitempty"`
	Cost            int64            `json:"cost"`
	Database        int64            `json:"database"`
	Network         int64            `json:"network"`
	Share           float64          `json:"share"`
	ShareMargin     *float64         `json:"shareMargin"`
	Samples         int64            `json:"samples"`
	Calls           *int64           `json:"calls"`
	Requests        *int             `json:"requests"`
	CallsPerRequest *DistributionDoc `json:"callsPerRequest,omitempty"`
	CallSites       []CallSiteDoc    `json:"callSites"`
	Statements      []DetailDoc      `json:"statements"`
	Entries         []EntryShareDoc  `json:"entries"`
}

// CallSiteDoc is one line of a root cause that called out.
type CallSiteDoc struct {
	File string `json:"file"`
	Line int64  `json:"line"`
	Cost int64  `json:"cost"`
}

// DistributionDoc summarises a count per request.
type DistributionDoc struct {
	Median float64 `json:"median"`
	P95    float64 `json:"p95"`
	Max    float64 `json:"max"`
}

// HelperDoc is a shared access helper seen through.
type HelperDoc struct {
	Function string `json:"function"`
	Named    bool   `json:"named,omitempty"`
	Callers  int    `json:"callers"`
	Packages int    `json:"packages"`
	Cost     int64  `json:"cost"`
}

// DetailDoc is the cost a root cause spent on one statement or call.
type DetailDoc struct {
	Kind        string `json:"kind"`
	System      string `json:"system,omitempty"`
	Statement   string `json:"statement"`
	StatementID string `json:"statementId,omitempty"`
	Peer        string `json:"peer,omitempty"`
	Via         string `json:"via,omitempty"`
	Cost        int64  `json:"cost"`
	Calls       *int64 `json:"calls"`
	Samples     int64  `json:"samples"`
}

// EntryShareDoc is the cost a root cause incurred under one entry point.
type EntryShareDoc struct {
	Entry string `json:"entry"`
	Cost  int64  `json:"cost"`
	Calls *int64 `json:"calls"`
}

// FindingDoc is a pattern worth a headline.
type FindingDoc struct {
	Kind         string           `json:"kind"`
	Function     string           `json:"function"`
	Share        float64          `json:"share"`
	Cost         int64            `json:"cost"`
	Evidence     string           `json:"evidence"`
	Statement    string           `json:"statement,omitempty"`
	Peer         string           `json:"peer,omitempty"`
	PerRequest   *DistributionDoc `json:"perRequest,omitempty"`
	Requests     int              `json:"requests,omitempty"`
	RequestsSeen int              `json:"requestsSeen,omitempty"`
	Depth        int              `json:"depth,omitempty"`
}

// DomainDoc rolls root causes up into a business domain.
type DomainDoc struct {
	Domain   string  `json:"domain"`
	Cost     int64   `json:"cost"`
	Database int64   `json:"database"`
	Network  int64   `json:"network"`
	Share    float64 `json:"share"`
	Causes   int     `json:"causes"`
}

// OmittedDoc describes the rows an explicit limit cut from a machine
// format: how many, and their total share and cost (rank) or normalised
// cost on each side (diff).
type OmittedDoc struct {
	Count     int      `json:"count"`
	Share     *float64 `json:"share,omitempty"`
	Cost      *int64   `json:"cost,omitempty"`
	Base      *float64 `json:"base,omitempty"`
	Candidate *float64 `json:"candidate,omitempty"`
}

// Render implements Renderer.
func (JSON) Render(w io.Writer, r *attribute.Result, opts Options) error {
	doc := NewRankDocument(r, opts)
	return writeJSON(w, doc)
}

// NewRankDocument converts r into the rank document, cut to opts.Limit.
func NewRankDocument(r *attribute.Result, opts Options) *RankDocument {
	requestsKnown := r.Totals.Requests > 0
	// Calls are counted for spans only; for profiles a zero means unknown.
	callsKnown := !r.Sampled
	reqs := func(n int) *int {
		if !requestsKnown {
			return nil
		}
		return &n
	}
	calls := func(n int64) *int64 {
		if !callsKnown && n == 0 {
			return nil
		}
		return &n
	}
	t := r.Totals
	doc := &RankDocument{
		Schema: RankSchema, ProducedBy: opts.Provenance,
		Inputs: []InputDoc{}, SourceKind: r.Source, ValueType: ValueTypeDoc{r.ValueType.Type, r.ValueType.Unit},
		Sampled: r.Sampled, CPUOnly: r.CPUOnly, Inclusive: r.Inclusive,
		Totals: TotalsDoc{Cost: t.Cost, Database: t.Database, Network: t.Network, Other: t.Other, Unattributed: t.Unattributed,
			Requests: reqs(t.Requests), Samples: t.Samples, BoundarySamples: t.BoundarySamples},
		App:         appDoc(r.App),
		EntryPoints: []EntryDoc{}, RootCauses: []CauseDoc{}, Findings: []FindingDoc{},
		DomainsFile: r.DomainsFile, Warnings: nonNil(r.Warnings), Notes: r.Notes, DurationNanos: r.DurationNanos, Caveats: nonNil(Caveats(r)),
	}
	for _, in := range r.Inputs {
		doc.Inputs = append(doc.Inputs, inputDoc(in))
	}
	for _, e := range r.Entries {
		doc.EntryPoints = append(doc.EntryPoints, EntryDoc{e.Entry, e.Cost, e.Database, e.Network, reqs(e.Requests)})
	}
	causes := shown(r, opts)
	for _, c := range causes {
		cd := CauseDoc{Function: c.Function, File: c.File, Line: c.Line, Kind: string(c.Kind), NoAppFrame: c.NoAppFrame,
			Domain: c.Domain, Cost: c.Cost, Database: c.Database, Network: c.Network, Share: c.Share,
			Samples: c.Samples, Calls: calls(c.Calls), Requests: reqs(c.Requests), CallsPerRequest: distDoc(c.CallsPerRequest),
			CallSites: []CallSiteDoc{}, Statements: []DetailDoc{}, Entries: []EntryShareDoc{}}
		if r.Sampled {
			m := c.ShareMargin
			cd.ShareMargin = &m
		}
		for _, s := range c.CallSites {
			cd.CallSites = append(cd.CallSites, CallSiteDoc{s.File, s.Line, s.Cost})
		}
		for _, d := range c.Statements {
			cd.Statements = append(cd.Statements, DetailDoc{Kind: string(d.Kind), System: d.System, Statement: d.Statement,
				StatementID: d.StatementID, Peer: d.Peer, Via: d.Via, Cost: d.Cost, Calls: calls(d.Calls), Samples: d.Samples})
		}
		for _, e := range c.EntryPoints {
			cd.Entries = append(cd.Entries, EntryShareDoc{e.Entry, e.Cost, calls(e.Calls)})
		}
		doc.RootCauses = append(doc.RootCauses, cd)
	}
	for _, f := range r.Findings {
		doc.Findings = append(doc.Findings, FindingDoc{Kind: f.Kind, Function: f.Function, Share: f.Share, Cost: f.Cost,
			Evidence: f.Evidence, Statement: f.Statement, Peer: f.Peer, PerRequest: distDoc(f.PerRequest),
			Requests: f.Requests, RequestsSeen: f.RequestsSeen, Depth: f.Depth})
	}
	for _, h := range r.Helpers {
		doc.SharedHelpers = append(doc.SharedHelpers, HelperDoc{h.Function, h.Named, h.Callers, h.Packages, h.Cost})
	}
	for _, d := range r.Domains {
		doc.Domains = append(doc.Domains, DomainDoc{d.Domain, d.Cost, d.Database, d.Network, d.Share, d.Causes})
	}
	if len(causes) < len(r.Causes) {
		doc.Omitted = omittedCauses(r.Causes[len(causes):])
	}
	return doc
}

func distDoc(d *attribute.Distribution) *DistributionDoc {
	if d == nil {
		return nil
	}
	return &DistributionDoc{d.Median, d.P95, d.Max}
}

// nonNil returns s, or an empty slice for nil, so that JSON lists are
// never null.
func nonNil[T any](s []T) []T {
	if s == nil {
		return []T{}
	}
	return s
}

// omittedCauses sums the causes a limit cut.
func omittedCauses(cs []*attribute.Cause) *OmittedDoc {
	var share float64
	var cost int64
	for _, c := range cs {
		share += c.Share
		cost += c.Cost
	}
	return &OmittedDoc{Count: len(cs), Share: &share, Cost: &cost}
}
