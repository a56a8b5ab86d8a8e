// Package traces reads profiles and span traces into one model.
//
// Inputs are sniffed: gzip by its magic bytes, then OTLP/JSON (text that
// starts with '{') or a pprof profile (profile.proto, read with
// github.com/google/pprof/profile). A Loader merges any number of inputs
// of one kind into a Source: all profiles into one (their sample types
// must agree by type and unit), all span files into one (spans of a trace
// may arrive across lines and files).
//
// A Source is a set of weighted call paths, root first, over interned
// frames. For a profile each sample is a path (the leaf-first location
// list reversed, inlined functions expanded, innermost last) with one value
// per sample type. For spans each span is a path: the chain of span frames
// from the outermost span of its service down to it, valued by its
// duration and a call count of 1. See Source for the invariants.
//
// Readers never panic on bad input: they return a *ParseError naming the
// file and position, or, for repairable span problems, record Warnings.
// Limits bound decompressed size, gzip expansion, line length, nesting
// depth and distinct frames.
//
// The package does no attribution: it does not decide which frames are
// the application's or where cost is charged. It does read what
// OpenTelemetry's semantic conventions say about client spans (database,
// HTTP, RPC and messaging calls: system, statement, operation, peer) into
// the model, and hands statements to Options.Statement while reading, so
// that a fingerprint, not the literal text, is what stays in memory.
package traces
