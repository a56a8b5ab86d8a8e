// Package stats holds the tests and intervals culprit's comparisons use,
// each with its published source in its doc comment: the exact
// conditional Poisson rate test (Przyborowski and Wilenski 1940) with the
// Clopper–Pearson interval (1934), the percentile bootstrap of a ratio of
// means whose p-value inverts its own interval (Efron and Tibshirani,
// "An Introduction to the Bootstrap", 1993), Benjamini–Hochberg q-values
// (1995), minimum detectable changes, and quantiles by linear
// interpolation (Hyndman and Fan's type 7, 1996).
//
// It is a leaf: pure functions of numbers, no I/O and nothing of culprit's
// model. Worked examples from the sources, tagged by where each reference
// value comes from, are in the tests.
package stats
