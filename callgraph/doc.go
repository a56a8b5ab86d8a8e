// Package callgraph turns a traces.Source into two graphs.
//
// The Tree is a calling-context tree (Ammons, Ball and Larus, "Exploiting
// hardware performance counters with flow and context sensitive
// profiling", PLDI 1997): one node per distinct call path prefix, so cost
// stays with the path that incurred it. Paths that share a prefix share
// nodes; recursion makes the tree deeper, never cyclic. Every path of the
// source maps to the node of its leaf (Tree.Leaf).
//
// The Graph is the function-level call graph derived from the tree: one
// node per distinct function name, one edge per caller→callee pair seen on
// any path. Recursion shows up as self-edges and cycles. Edge and node
// weights count each path at most once even when recursion repeats a
// function or an edge on it, so inclusive values never exceed the total.
//
// Both types implement gonum's graph interfaces (graph.WeightedDirected)
// with their own storage: gonum's simple graphs panic on self-edges and
// replace weights on re-set, neither of which suits profiles.
//
// Neither type does I/O; both are immutable after construction and safe
// for concurrent reads.
package callgraph
