package traces

import (
	"cmp"
	"slices"
	"strconv"
	"strings"
)

// ValueType names one kind of value carried by every path, for example
// cpu/nanoseconds or samples/count.
type ValueType struct {
	Type string `json:"type"`
	Unit string `json:"unit"`
}

func (v ValueType) String() string { return v.Type + "/" + v.Unit }

// Kind tells how a source's path values relate to each other.
type Kind uint8

const (
	// Profile sources hold sampled stacks: a path's values belong to its
	// leaf alone, so the values of all paths add up to the source's total.
	Profile Kind = iota + 1
	// Spans sources hold one path per span: a path's values include the
	// time of every path below it (a span's duration contains its children).
	Spans
	// ExecTrace sources hold the waits of requests read from a Go
	// execution trace: like a profile's, a path's values belong to its
	// leaf and add up, but they are measured, not sampled, and count calls.
	// Read with Options.Timing, each request is a tree of spans instead,
	// whose values nest as spans' do (see Timing).
	ExecTrace
)

func (k Kind) String() string {
	switch k {
	case Profile:
		return "profile"
	case Spans:
		return "spans"
	case ExecTrace:
		return "exectrace"
	}
	return "unknown"
}

// SpanKind is the OpenTelemetry span kind (OTLP enum values).
type SpanKind uint8

// Span kinds, numbered as in OTLP's trace.proto.
const (
	SpanKindUnspecified SpanKind = 0
	SpanKindInternal    SpanKind = 1
	SpanKindServer      SpanKind = 2
	SpanKindClient      SpanKind = 3
	SpanKindProducer    SpanKind = 4
	SpanKindConsumer    SpanKind = 5
)

func (k SpanKind) String() string {
	switch k {
	case SpanKindInternal:
		return "internal"
	case SpanKindServer:
		return "server"
	case SpanKindClient:
		return "client"
	case SpanKindProducer:
		return "producer"
	case SpanKindConsumer:
		return "consumer"
	}
	return "unspecified"
}

// Protocol is what a span's semantic-convention attributes say about the
// outbound call it records.
type Protocol uint8

// Protocols recognised on client and producer spans.
const (
	ProtocolNone      Protocol = iota
	ProtocolDatabase           // db.system.name / db.system
	ProtocolRPC                // rpc.system.name / rpc.system
	ProtocolHTTP               // http.request.method / http.method / url.full
	ProtocolMessaging          // messaging.system
)

func (p Protocol) String() string {
	switch p {
	case ProtocolDatabase:
		return "database"
	case ProtocolRPC:
		return "rpc"
	case ProtocolHTTP:
		return "http"
	case ProtocolMessaging:
		return "messaging"
	}
	return ""
}

// FrameID indexes Source.Frames. Frames are interned: equal frames share an ID.
type FrameID int32

// Frame is one element of a call path: a function at a line, or a span.
// Frame is comparable and is interned by value.
type Frame struct {
	// Function is the fully qualified function name (Go: import path,
	// receiver and name), or for a span the most code-like name available.
	Function string
	// File is the source file as the producer wrote it; may be empty.
	File string
	// Line is the line being executed in this frame: for every frame but
	// the leaf, the line that called the next frame (the call site). 0 if unknown.
	Line int64

	// The fields below are set only for span frames.

	// SpanKind is the span's kind; SpanKindUnspecified for profile frames.
	SpanKind SpanKind
	// Protocol classifies a client/producer span by its attributes.
	Protocol Protocol
	// System is db.system.name, rpc.system.name, messaging.system or "http".
	System string
	// Service is the resource's service.name.
	Service string
	// Scope is the name of the instrumentation scope that made the span
	// (for instance "@opentelemetry/instrumentation-express"); "" if unknown.
	Scope string
	// Code marks a span frame named by code.* attributes (a code location
	// recorded by whoever made the span) rather than by the span's name.
	Code bool
	// Span marks a frame made from a span (as opposed to a stack frame).
	Span bool
}

// CallID indexes Source.Calls; 0 means the path carries no call details.
type CallID int32

// Call holds the details of an outbound call recorded by a client span.
// Calls are interned by value. Statement is the raw text as recorded: it
// may contain literals and must be fingerprinted before it is shown.
type Call struct {
	System    string // database, RPC or messaging system, or "http"
	Statement string // db.query.text / db.statement, raw
	Summary   string // db.query.summary, or the operation and target
	Operation string // db.operation.name, rpc.method, HTTP method, ...
	Peer      string // server.address[:port], service.peer.name, URL host
	Batch     bool   // db.operation.batch.size > 1
	// Connection marks a connection wait: a database span with no
	// statement, operation or summary that acquires or opens a
	// connection (a pool checkout, a connect). It is database time but
	// not a call: its path's calls value is 0.
	Connection bool
}

// RequestID indexes Source.Requests; 0 means the path's request is unknown.
type RequestID int32

// Label is one pprof label (string or numeric) or span-derived label.
type Label struct {
	Key   string
	Value string // string label value; empty for numeric labels
	Num   int64  // numeric label value
	Unit  string // unit of a numeric label; may be empty
	IsNum bool
}

// LabelSet is an interned, sorted set of labels. The nil *LabelSet is the
// empty set. LabelSets are shared between paths and must not be modified.
type LabelSet struct {
	Labels []Label // sorted by Key, then Value, then Num
}

// Get returns the first string value of key, or "" when it is absent.
func (s *LabelSet) Get(key string) (string, bool) {
	if s == nil {
		return "", false
	}
	for _, l := range s.Labels {
		if l.Key == key && !l.IsNum {
			return l.Value, true
		}
	}
	return "", false
}

func (s *LabelSet) String() string {
	if s == nil {
		return ""
	}
	var b strings.Builder
	for i, l := range s.Labels {
		if i > 0 {
			b.WriteByte(',')
		}
		b.WriteString(l.Key)
		b.WriteByte('=')
		if l.IsNum {
			b.WriteString(strconv.FormatInt(l.Num, 10))
			b.WriteString(l.Unit)
		} else {
			b.WriteString(l.Value)
		}
	}
	return b.String()
}

// Path is one weighted call path, root first. Sources keep their paths in
// a Paths store; a Path read from one is a view of the store's memory.
type Path struct {
	// Frames lists the path's frames from the root (outermost caller) to
	// the leaf. The slice may share backing storage with other paths.
	Frames []FrameID
	// Values holds one value per Source.ValueTypes entry.
	Values []int64
	// Labels are the sample's labels; nil when it has none.
	Labels *LabelSet
	// Request is the request (trace) this path belongs to, if known.
	Request RequestID
	// Call carries the outbound call details of a client span leaf.
	Call CallID
}

// Timing places the span paths of a Spans source in time: Start[i] and
// Parent[i] belong to path i. A span ends at Start[i] plus its duration
// (value 0 of the path). Times are after the repairs recorded in the
// source's warnings, in nanoseconds since the Unix epoch.
//
// An ExecTrace source read with Options.Timing holds each request as a
// tree of such spans instead of paths grouped by stack (see emitTimed):
// the request, its child goroutines and its waits, each path's value 0
// (wait) its duration; times are the trace's clock, in nanoseconds.
type Timing struct {
	// Start is when each span started.
	Start []int64
	// Parent is the index of the path of each span's parent span, in the
	// same request, or -1 for a span whose parent is missing or was not
	// kept (Options.Service). A parent may come after its child: paths are
	// in start order and a child may start with or before its parent.
	Parent []int32
	// Goroutine marks, in an ExecTrace source, the paths that stand for a
	// goroutine of a request (the request's own, or a child) rather than
	// for a wait: a goroutine's time outside its waits is its own, spent
	// running or runnable. Nil for span sources.
	Goroutine []bool
}

// Input describes one file a source was read from.
type Input struct {
	Name   string `json:"name"`
	Format string `json:"format"`
	Bytes  int64  `json:"bytes"`
	SHA256 string `json:"sha256"`
	// Segment identifies a capture segment by what wrote it, whatever
	// its file is called; nil for other inputs.
	Segment *SegmentID `json:"segment,omitempty"`
}

// SegmentID is a capture segment's identity: the listener run that wrote
// it (hex) and its sequence number in that run.
type SegmentID struct {
	Instance string `json:"instance"`
	Sequence uint64 `json:"sequence"`
}

// ServiceInfo is what a span source holds of one service (resource
// service.name).
type ServiceInfo struct {
	Name string `json:"name"`
	// Spans is the number of the service's spans read.
	Spans int64 `json:"spans"`
	// Entries counts its spans with no parent in the input: requests it
	// received from outside.
	Entries int64 `json:"entries"`
	// Called counts its spans whose parent is a span of another service
	// in the input: calls it received from an analysed service.
	Called int64 `json:"called"`
	// Analysed says whether the source's paths cover the service: the
	// service named by Options.Service, else every service with entries.
	// A service that is only called is left out: its time is inside its
	// callers' CLIENT spans.
	Analysed bool `json:"analysed"`
}

// Source is the common in-memory model every reader produces: a set of
// weighted call paths over interned frames.
//
// Invariants (checked by Validate): every path has len(ValueTypes) values
// and at least one frame; every FrameID, CallID and RequestID is in range;
// Frames[0], Calls[0] and Requests[0] are the zero entries standing for
// "none".
type Source struct {
	Kind       Kind
	ValueTypes []ValueType
	// DefaultValue indexes ValueTypes: the value reported unless the user
	// chooses another.
	DefaultValue int
	// PeriodType and Period describe the sampling period of a profile
	// (for Go CPU profiles cpu/nanoseconds and 10,000,000).
	PeriodType ValueType
	Period     int64
	// DurationNanos is the wall-clock time the data covers (the sum over
	// merged profiles, or the span of timestamps of a trace set).
	DurationNanos int64

	Frames   []Frame
	Calls    []Call
	Requests []string // request keys (trace IDs as hex); [0] is ""
	Paths    Paths

	// Timing, when the source was read with Options.Timing, places every
	// span path in time and in its trace's tree; nil otherwise.
	Timing *Timing

	Inputs   []Input
	Warnings Warnings
	// StatementsNormalized is true when Call.Statement holds the output of
	// Options.Statement rather than the raw recorded text.
	StatementsNormalized bool
	// Services lists the services of a span source, by name, and which
	// of them the paths cover (see ServiceInfo).
	Services []ServiceInfo
	// Notes say which inputs were skipped and why (not OTLP, another kind
	// of input than --source): information, not repairs.
	Notes []string
	// LateChildren counts the spans that end after their parent (async
	// work outliving the span that started it): normal, accepted as
	// recorded, and counted for the input summary.
	LateChildren int64

	frameIndex   map[Frame]FrameID
	callIndex    map[Call]CallID
	requestIndex map[string]RequestID
	labelIndex   map[string]*LabelSet
	labelKey     []byte // InternLabels' scratch space
	// framesUnindexed says that frames were added with addNewFrame since
	// frameIndex was last complete: InternFrame rebuilds it first.
	framesUnindexed bool
}

// NewSource returns an empty source of the given kind, ready for Intern calls.
func NewSource(kind Kind, types []ValueType) *Source {
	src := &Source{
		Kind:         kind,
		ValueTypes:   types,
		Frames:       []Frame{{}},
		Calls:        []Call{{}},
		Requests:     []string{""},
		frameIndex:   map[Frame]FrameID{},
		callIndex:    map[Call]CallID{},
		requestIndex: map[string]RequestID{},
		labelIndex:   map[string]*LabelSet{},
	}
	src.Paths.nv = len(types)
	return src
}

func (s *Source) ensureIndexes() {
	if s.frameIndex != nil {
		return
	}
	s.frameIndex = make(map[Frame]FrameID, len(s.Frames))
	for i, f := range s.Frames {
		if i > 0 {
			s.frameIndex[f] = FrameID(i)
		}
	}
	s.callIndex = make(map[Call]CallID, len(s.Calls))
	for i, c := range s.Calls {
		if i > 0 {
			s.callIndex[c] = CallID(i)
		}
	}
	s.requestIndex = make(map[string]RequestID, len(s.Requests))
	for i, r := range s.Requests {
		if i > 0 {
			s.requestIndex[r] = RequestID(i)
		}
	}
	s.labelIndex = map[string]*LabelSet{}
	if len(s.Frames) == 0 {
		s.Frames = []Frame{{}}
	}
	if len(s.Calls) == 0 {
		s.Calls = []Call{{}}
	}
	if len(s.Requests) == 0 {
		s.Requests = []string{""}
	}
}

// InternFrame returns the ID of f, adding it if it is new.
func (s *Source) InternFrame(f Frame) FrameID {
	s.ensureIndexes()
	if s.framesUnindexed {
		s.frameIndex = make(map[Frame]FrameID, len(s.Frames))
		for i, f := range s.Frames[1:] {
			s.frameIndex[f] = FrameID(i + 1)
		}
		s.framesUnindexed = false
	}
	if id, ok := s.frameIndex[f]; ok {
		return id
	}
	id := FrameID(len(s.Frames))
	s.Frames = append(s.Frames, f)
	s.frameIndex[f] = id
	return id
}

// addNewFrame appends f, which the caller knows is not among the
// source's frames, without indexing it: the index is rebuilt when
// InternFrame is next called. Readers that can tell frames apart more
// cheaply than by hashing them use it.
func (s *Source) addNewFrame(f Frame) FrameID {
	s.ensureIndexes()
	id := FrameID(len(s.Frames))
	s.Frames = append(s.Frames, f)
	s.framesUnindexed = true
	return id
}

// reserveFrames makes room for n more frames in the frame index while it
// is still empty: growing a map of a large key costs more than sizing it once.
func (s *Source) reserveFrames(n int) {
	s.ensureIndexes()
	if len(s.frameIndex) == 0 && n > 1024 {
		s.frameIndex = make(map[Frame]FrameID, n)
		s.Frames = slices.Grow(s.Frames, n)
	}
}

// InternCall returns the ID of c, adding it if it is new. The zero Call is ID 0.
func (s *Source) InternCall(c Call) CallID {
	if c == (Call{}) {
		return 0
	}
	s.ensureIndexes()
	if id, ok := s.callIndex[c]; ok {
		return id
	}
	id := CallID(len(s.Calls))
	s.Calls = append(s.Calls, c)
	s.callIndex[c] = id
	return id
}

// InternRequest returns the ID of the request key, adding it if it is new.
// The empty key is ID 0 (unknown request).
func (s *Source) InternRequest(key string) RequestID {
	if key == "" {
		return 0
	}
	s.ensureIndexes()
	if id, ok := s.requestIndex[key]; ok {
		return id
	}
	id := RequestID(len(s.Requests))
	s.Requests = append(s.Requests, key)
	s.requestIndex[key] = id
	return id
}

// InternLabels sorts labels and returns the shared set equal to them.
// An empty list gives nil.
func (s *Source) InternLabels(labels []Label) *LabelSet {
	if len(labels) == 0 {
		return nil
	}
	s.ensureIndexes()
	if !slices.IsSortedFunc(labels, compareLabels) {
		slices.SortFunc(labels, compareLabels)
	}
	key := s.labelKey[:0]
	for _, l := range labels {
		key = append(key, l.Key...)
		key = append(key, 0)
		key = append(key, l.Value...)
		key = append(key, 0)
		key = strconv.AppendInt(key, l.Num, 10)
		key = append(key, 0)
		key = append(key, l.Unit...)
		if l.IsNum {
			key = append(key, 1)
		}
		key = append(key, 0)
	}
	s.labelKey = key
	if set, ok := s.labelIndex[string(key)]; ok {
		return set
	}
	k := string(key)
	set := &LabelSet{Labels: append([]Label(nil), labels...)}
	s.labelIndex[k] = set
	return set
}

// compareLabels orders labels by key, value, number, unit and kind: a
// total order, so that equal sets always intern alike.
func compareLabels(a, b Label) int {
	c := cmp.Or(cmp.Compare(a.Key, b.Key), cmp.Compare(a.Value, b.Value), cmp.Compare(a.Num, b.Num),
		cmp.Compare(a.Unit, b.Unit))
	if c != 0 || a.IsNum == b.IsNum {
		return c
	}
	if a.IsNum {
		return 1
	}
	return -1
}

// RequestCount returns the number of distinct known requests.
func (s *Source) RequestCount() int { return len(s.Requests) - 1 }

// Total returns the sum of value index v over all paths. For a Spans
// source this double-counts nested spans; see Kind.
func (s *Source) Total(v int) int64 {
	var t int64
	for i := range s.Paths.Len() {
		t += s.Paths.Value(i, v)
	}
	return t
}

// ValueIndex returns the index of the value type named name (its Type, or
// "type/unit"); "" selects DefaultValue. The error lists the valid names.
func (s *Source) ValueIndex(name string) (int, error) {
	if name == "" {
		return s.DefaultValue, nil
	}
	for i, vt := range s.ValueTypes {
		if vt.Type == name || vt.String() == name {
			return i, nil
		}
	}
	names := make([]string, len(s.ValueTypes))
	for i, vt := range s.ValueTypes {
		names[i] = vt.Type
	}
	return 0, &ValueError{Name: name, Valid: names}
}
