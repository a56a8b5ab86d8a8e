// Package report renders attribution results for people and programs.
//
// Every renderer is a pure function of a result and Options writing to an
// io.Writer: same input, byte-identical output. Formats: text (an aligned
// table for terminals), markdown (for an incident review), json (the
// versioned culprit.rank/v1 document), csv (one row per root cause and
// boundary detail, for notebooks) and html (one self-contained page with
// inline SVG charts). DiffRenderer renders a build comparison in the same
// five formats (JSON: culprit.diff/v1), and RenderExplanations the paths
// behind a root cause.
// Renderers never see raw statements unless the attribution was run with
// literals shown; they escape every input string for their format.
package report
