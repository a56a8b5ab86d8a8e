// Package report renders attribution results for people and programs.
//
// Every renderer is a pure function of a result and Options writing to an
// io.Writer: same input, byte-identical output. Formats: text (an aligned
// table for terminals), markdown (for an incident review), json (the
// versioned culprit.rank/v1 document), csv (one row per root cause and
// boundary detail, for notebooks) and html (one self-contained page with
// inline SVG charts). DiffRenderer renders a build comparison in the same
// five formats (JSON: culprit.diff/v1), and ExplainRenderer the paths
// behind a root cause (text and JSON). One table (registry.go) maps each
// format name to its renderers. The JSON documents are types of this
// package (RankDocument, DiffDocument, ExplainDocument), with JSON Schemas
// in testdata/schema/.
// Renderers never see raw statements unless the attribution was run with
// literals shown; they escape every input string for their format.
package report
