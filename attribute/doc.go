// Package attribute charges database and network cost to the application
// code that caused it.
//
// Classification: every frame gets one Class (database, network, entry,
// application, library) from an ordered rule table (built-in rules for Go,
// JVM, Python and Node clients and OpenTelemetry span conventions, plus
// user rules that come first) and from application ownership (--app
// prefixes, else auto-detection; see Classifier).
//
// Attribution follows the product design ("What attribution means"), and
// is applied in one place: the walk (walk.go) emits one charge record per
// path — entry point, boundary (the first database or network frame from
// the root; everything below it belongs to the call), kind, detail,
// root cause (the nearest application frame above the boundary; with
// none, a "no application frame" bucket named after the entry point),
// call site, cost, calls and request. The ranking (Attribute), Explain and
// ChargeGraph only add records up. Costs are attributed per path and
// aggregated after, as a calling-context tree keeps them (Ammons, Ball and
// Larus, PLDI 1997); the inclusive view charges each distinct application
// function on a path once. Shared access helpers (the service's own SQL
// wrapper, called from several packages) are seen through: their callers
// are charged, and the detail names the helper (see SharedHelper).
//
// Findings are patterns confirmed on the data: the same statement
// fingerprint repeated within one request, recursion reaching a boundary
// (candidates from the strongly connected components of the function
// graph, callgraph.FuncGraph, confirmed on paths), and many network calls
// per request to one peer.
//
// Statements are fingerprinted (traces/statement) so that literals never
// leave the tool unless asked. The latency view (Latency) walks each
// request's critical path and charges its pieces with the same records.
// Snapshots and the comparison of two builds are in attribute/compare,
// the statistical tests in attribute/stats.
//
// The package opens no files: rules and domains files are read from an
// io.Reader that cmd provides.
package attribute
