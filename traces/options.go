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
	// Service keeps only spans of this service.name; "" keeps all.
	Service string
	// Statement, when set, replaces every recorded database statement by
	// its result as spans are decoded (in parallel), for example with a
	// fingerprint that removes literals. It appends the result for raw to
	// dst and returns the extended slice (as strconv's Append functions
	// do), so that a decoder can reuse one buffer for every span. Calls
	// that then agree are interned once, which saves memory and time on
	// large trace files. Nil keeps the raw text.
	// Source.StatementsNormalized records which was done.
	Statement func(dst []byte, system, raw string) []byte
	// SkipDigest leaves Input.SHA256 empty, for reports that do not show
	// it: hashing is a fifth of the CPU time of reading OTLP/JSON.
	SkipDigest bool
	// Timing keeps, for span sources, each span's start time and parent
	// (Source.Timing), which the latency view needs to place spans in time.
	// Profiles have no timing; the option is ignored for them.
	Timing bool
}
