// Package callgraph holds culprit's two graphs of calls.
//
// The Tree is a calling-context tree (Ammons, Ball and Larus, "Exploiting
// hardware performance counters with flow and context sensitive
// profiling", PLDI 1997) built from a traces.Source: one node per
// distinct call path prefix, so cost stays with the path that incurred
// it. Paths that share a prefix share nodes; recursion makes the tree
// deeper, never cyclic. Every path of the source maps to the node of its
// leaf (Tree.Leaf), and every node's ID is greater than its parent's, so
// one pass in ID order sees parents first.
//
// The FuncGraph is a function-level call graph: one node per function,
// one edge per caller → callee pair, with the functions and edges chosen
// by its builder (attribution builds the graph of application functions
// above database and network calls). Merging paths makes recursion a
// cycle, and can make cycles no path has: FuncGraph.Recursive finds the
// functions on cycles (strongly connected components, with gonum's
// topo.TarjanSCC) as candidates to confirm on the paths.
//
// The Digraph is a small named graph with DOT attributes for export.
//
// gonum's graph interfaces are implemented by unexported types: no gonum
// type is part of FuncGraph's or Tree's API. The types do no I/O and are
// immutable after construction and safe for concurrent reads (Digraph
// while it is being built excepted).
package callgraph
