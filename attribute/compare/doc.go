// Package compare keeps what a comparison of two builds needs and makes
// the comparison.
//
// A Snapshot (culprit.snapshot/v1) is an attribution (attribute.Result)
// plus each root cause's per-request costs and calls, capped at
// MaxVectorValues by a deterministic systematic subsample that keeps the
// count and the sum exact (CappedValues); snapshots of shards of one run
// merge by adding, and refuse to add the same data twice. Compare matches
// root causes across builds by attribute.Identity, normalises per
// request, per second or by share, tests each cause with the tests of
// attribute/stats (exact conditional Poisson test for sample counts, a
// seeded bootstrap of the ratio of means for per-request costs and calls),
// adjusts all tests together by Benjamini–Hochberg and gives each cause a
// verdict against the budget. LatencySnapshot and CompareLatency do the
// same for the critical-path time of the latency view, with route
// latency quantiles compared by bootstrap.
//
// The package does no I/O beyond the readers and writers it is handed.
package compare
