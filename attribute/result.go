package attribute

import (
	"sort"

	"github.com/culprithq/culprit/traces"
)

// Kind is the kind of cost charged to a root cause.
type Kind string

// Kinds of charged cost.
const (
	KindDatabase Kind = "database"
	KindNetwork  Kind = "network"
	KindMixed    Kind = "mixed"
	// KindConnection is the kind of a root cause's detail (never of a
	// root cause) for connection waits: database time spent acquiring or
	// opening a connection (a pool checkout, a connect), charged as
	// database cost to the same root cause but not a call or a statement.
	KindConnection Kind = "connection"
)

// Result is the attribution of one source: the ranked root causes with
// their charged cost, the totals they are shares of, and findings.
// All slices are sorted deterministically (see each field).
type Result struct {
	Inputs    []traces.Input   `json:"inputs"`
	Source    string           `json:"sourceKind"`
	ValueType traces.ValueType `json:"valueType"`
	// Sampled is true for profiles: costs are estimates from samples.
	Sampled bool `json:"sampled"`
	// CPUOnly is true when the value type measures on-CPU time only.
	CPUOnly bool `json:"cpuOnly"`
	// Inclusive is true when every application frame above a boundary was
	// charged (shares may then add up to more than 100%).
	Inclusive bool         `json:"inclusive"`
	Totals    Totals       `json:"totals"`
	App       AppInfo      `json:"app"`
	Entries   []EntryTotal `json:"entryPoints"`
	Causes    []*Cause     `json:"rootCauses"`
	Findings  []Finding    `json:"findings"`
	// Helpers lists the shared helpers seen through, by cost charged
	// through them (descending), then name; empty when none was.
	Helpers []SharedHelper `json:"sharedHelpers,omitempty"`
	// Domains rolls root causes up into business domains (--domains);
	// nil when no domains file was given.
	Domains     []DomainTotal `json:"domains,omitempty"`
	DomainsFile string        `json:"domainsFile,omitempty"`
	Warnings    []string      `json:"warnings"`
	// Notes say what the input held beside warnings: inputs skipped,
	// services found and analysed, spans ending after their parent.
	Notes []string `json:"notes,omitempty"`
	// DurationNanos is the wall-clock time the input covers, if known.
	DurationNanos int64 `json:"durationNanos"`
}

// Totals are the denominators of a Result. Cost = Database + Network + Other.
type Totals struct {
	// Cost is all cost in the source (for spans: the duration of the
	// outermost span of each request in each service).
	Cost int64 `json:"cost"`
	// Database and Network are the cost below database and network
	// boundaries; their sum is the denominator of every share.
	Database int64 `json:"database"`
	Network  int64 `json:"network"`
	// Other is cost on paths that reach no boundary (CPU work, idle).
	Other int64 `json:"other"`
	// Unattributed is the part of Database+Network with no application
	// frame above the boundary (charged to "no application frame" buckets).
	Unattributed int64 `json:"unattributed"`
	// Requests is the number of distinct requests seen (0 if unknown).
	Requests int `json:"requests"`
	// Samples is the number of samples (profiles) or spans behind Cost,
	// and BoundarySamples those behind Database+Network.
	Samples         int64 `json:"samples"`
	BoundarySamples int64 `json:"boundarySamples"`
}

// AppInfo says what was taken as application code.
type AppInfo struct {
	Prefixes []string    `json:"prefixes,omitempty"`
	Detected []Detection `json:"detected,omitempty"`
	// RulesFiles are the user rules files in force.
	RulesFiles []string `json:"rulesFiles,omitempty"`
}

// Cause is one root cause: an application function (or a "no application
// frame" bucket) and the database/network cost charged to it.
type Cause struct {
	Function string `json:"function"`
	// File and Line are the call site that called out most (by cost).
	File string `json:"file,omitempty"`
	Line int64  `json:"line,omitempty"`
	Kind Kind   `json:"kind"`
	// NoAppFrame marks a bucket for boundary cost with no application
	// frame above it; Function is then "(no application frame) ENTRY".
	NoAppFrame bool `json:"noAppFrame,omitempty"`
	// Domain is the business domain (--domains), "" without a domains file.
	Domain   string  `json:"domain,omitempty"`
	Cost     int64   `json:"cost"`
	Database int64   `json:"database"`
	Network  int64   `json:"network"`
	Share    float64 `json:"share"`
	// ShareMargin is the 95% margin of Share (±1.96 binomial standard
	// errors) for sampled sources; 0 for spans.
	ShareMargin float64 `json:"shareMargin"`
	Samples     int64   `json:"samples"`
	// Calls counts outbound calls (spans only; 0 when unknown).
	Calls int64 `json:"calls"`
	// Requests is the number of requests in which the cause appears.
	Requests        int           `json:"requests"`
	CallsPerRequest *Distribution `json:"callsPerRequest,omitempty"`
	CallSites       []CallSite    `json:"callSites"`
	Statements      []Detail      `json:"statements"`
	EntryPoints     []EntryShare  `json:"entries"`
	// requestCosts holds the charged cost in each request where the cause
	// appears, ascending; requests without it are implicit zeros.
	requestCosts []float64
	// requestCalls holds the calls (spans) or samples in each request where
	// the cause appears, ascending, so that merged snapshots recompute
	// calls per request exactly.
	requestCalls []float64
}

// RequestCosts returns the cause's charged cost in each request where it
// appears, in ascending order; nil when requests are unknown. Requests of
// the source in which the cause does not appear count as zero cost and
// are not listed. The slice must not be modified.
func (c *Cause) RequestCosts() []float64 { return c.requestCosts }

// RequestCalls returns the cause's calls (spans) or samples in each
// request where it appears, in ascending order; nil when requests are
// unknown. The slice must not be modified.
func (c *Cause) RequestCalls() []float64 { return c.requestCalls }

// SetRequestVectors sets the per-request costs and calls that
// RequestCosts and RequestCalls return (ascending; a snapshot read back
// restores them). The cause keeps the slices.
func (c *Cause) SetRequestVectors(costs, calls []float64) {
	c.requestCosts, c.requestCalls = costs, calls
}

// CallSite is one line in a root-cause function that called out.
type CallSite struct {
	File string `json:"file"`
	Line int64  `json:"line"`
	Cost int64  `json:"cost"`
}

// Distribution summarises a per-request count.
type Distribution struct {
	Median float64 `json:"median"`
	P95    float64 `json:"p95"`
	Max    float64 `json:"max"`
}

// Detail is the cost a root cause spent on one boundary: a statement
// fingerprint, an operation, or the library function called; or, of
// Kind KindConnection, its connection waits (Calls is then 0).
type Detail struct {
	Kind   Kind   `json:"kind"`
	System string `json:"system,omitempty"`
	// Statement is a fingerprint (literals removed) unless the report was
	// asked to show literals; for profiles it is the boundary function.
	Statement   string `json:"statement"`
	StatementID string `json:"statementId,omitempty"`
	Peer        string `json:"peer,omitempty"`
	// Via names the shared helper seen through on the way to the call
	// (see SharedHelper); "" when the root cause called out itself.
	Via     string `json:"via,omitempty"`
	Cost    int64  `json:"cost"`
	Calls   int64  `json:"calls"`
	Samples int64  `json:"samples"`
}

// EntryShare is the cost a root cause incurred under one entry point.
type EntryShare struct {
	Entry string `json:"entry"`
	Cost  int64  `json:"cost"`
	Calls int64  `json:"calls"`
}

// EntryTotal is the total cost seen under one entry point.
type EntryTotal struct {
	Entry    string `json:"entry"`
	Cost     int64  `json:"cost"`
	Database int64  `json:"database"`
	Network  int64  `json:"network"`
	Requests int    `json:"requests"`
}

// Finding is a pattern worth a headline.
type Finding struct {
	// Kind is repeated-statement, recursive-access or per-item-calls.
	Kind     string  `json:"kind"`
	Function string  `json:"function"`
	Share    float64 `json:"share"`
	Cost     int64   `json:"cost"`
	// Evidence in words, e.g. "issued 24 times per request (median)".
	Evidence string `json:"evidence"`
	// Statement or peer the pattern concerns, literals removed.
	Statement string `json:"statement,omitempty"`
	Peer      string `json:"peer,omitempty"`
	// PerRequest is the count per request where the pattern fires.
	PerRequest *Distribution `json:"perRequest,omitempty"`
	// Requests is the number of requests where it fires, of RequestsSeen.
	Requests     int `json:"requests,omitempty"`
	RequestsSeen int `json:"requestsSeen,omitempty"`
	// Depth is the deepest recursion seen (recursive-access).
	Depth int `json:"depth,omitempty"`
}

// SortDetails orders details by cost (descending), then statement, peer,
// kind and system: the one order every report and snapshot uses.
func SortDetails(ds []Detail) {
	sort.SliceStable(ds, func(i, j int) bool {
		x, y := ds[i], ds[j]
		if x.Cost != y.Cost {
			return x.Cost > y.Cost
		}
		if x.Statement != y.Statement {
			return x.Statement < y.Statement
		}
		if x.Peer != y.Peer {
			return x.Peer < y.Peer
		}
		if x.Kind != y.Kind {
			return x.Kind < y.Kind
		}
		if x.System != y.System {
			return x.System < y.System
		}
		return x.Via < y.Via
	})
}

// SortFindings orders findings by cost (descending), then kind, function,
// statement and peer.
func SortFindings(fs []Finding) {
	sort.SliceStable(fs, func(i, j int) bool {
		a, b := fs[i], fs[j]
		if a.Cost != b.Cost {
			return a.Cost > b.Cost
		}
		if a.Kind != b.Kind {
			return a.Kind < b.Kind
		}
		if a.Function != b.Function {
			return a.Function < b.Function
		}
		if a.Statement != b.Statement {
			return a.Statement < b.Statement
		}
		return a.Peer < b.Peer
	})
}
