// Package attribute charges database and network cost to the application
// code that caused it.
//
// Classification: every frame gets one Class (database, network, entry,
// application, library) from an ordered rule table (built-in rules for Go,
// JVM, Python and Node clients and OpenTelemetry span conventions, plus
// user rules that come first) and from application ownership (--app
// prefixes, else auto-detection; see Classifier).
//
// Attribution (Attribute) follows DESIGN.md: on each path the boundary is
// the first database or network frame from the root; everything below it
// belongs to the call. The root cause is the nearest application frame
// above the boundary, reported with its call site; with none, the cost goes
// to a "no application frame" bucket named after the entry point. Costs are
// attributed per path and aggregated after, as a calling-context tree
// keeps them (Ammons, Ball and Larus, PLDI 1997); the inclusive view
// charges each distinct application function on a path once.
//
// Findings are patterns confirmed on the data: the same statement
// fingerprint repeated within one request, recursion reaching a boundary
// (candidates from Tarjan's strongly connected components of the function
// graph, confirmed on paths), and many network calls per request to one peer.
//
// Statements are fingerprinted (Fingerprint) so that literals never leave
// the tool unless asked. The statistics (stats.go, mwu.go) implement the
// published tests used to compare two builds.
//
// The package does no I/O except parsing a rules file from an io.Reader.
package attribute
