package traces

// Options control how inputs are read. The zero value reads with
// DefaultLimits, stops at the first unreadable input, repairs span
// problems with warnings, and decodes on all cores.
type Options struct {
	Limits Limits
	// KeepGoing skips unreadable files and malformed lines, recording each
	// as a warning, instead of failing the run.
	KeepGoing bool
	// Strict turns every repair of span data (orphans, duplicates, cycles,
	// negative durations, clock skew) into an error.
	Strict bool
	// Workers is the number of decoding goroutines; 0 means GOMAXPROCS.
	Workers int
	// Service keeps only spans of this service.name; "" keeps the
	// services that receive requests from outside the input: a span
	// whose parent is a span of another service (a downstream service
	// called by an analysed one) is left out with everything below it,
	// since its time is inside the caller's CLIENT span.
	Service string
	// Source, when set, reads only inputs of that kind (Spans or Profile)
	// and skips the others with a note; 0 reads either kind but refuses
	// inputs of both.
	Source Kind
	// AllServices keeps every service's spans, each service's outermost
	// spans as the roots of its paths (for callers that analyse each
	// service on their own). It overrides the default of Service "".
	AllServices bool
	// Statement, when set, replaces every recorded database statement by
	// its result as spans are decoded (in parallel), for example with a
	// fingerprint that removes literals. It appends the result for raw to
	// dst and returns the extended slice (as strconv's Append functions
	// do), so that a decoder can reuse one buffer for every span. Calls
	// that then agree are interned once, which saves memory and time on
	// large trace files. Nil keeps the raw text.
	// Source.StatementsNormalized records which was done.
	Statement func(dst []byte, system, raw string) []byte
	// ShowLiterals keeps the literal values in span names, database
	// operation names and summaries, URLs and peers. By default they are
	// replaced by "?" as spans are decoded; database span names that
	// hold statements go through Statement first.
	ShowLiterals bool
	// SkipDigest leaves Input.SHA256 empty, for reports that do not show
	// it: hashing is a fifth of the CPU time of reading OTLP/JSON.
	SkipDigest bool
	// Timing keeps, for span sources, each span's start time and parent
	// (Source.Timing), which the latency view needs to place spans in time;
	// an execution trace is read as a tree of spans per request (see
	// Timing). Profiles have no timing; the option is ignored for them.
	Timing bool
}
