// Package capture defines culprit's capture segment format: the files in
// which `culprit listen` stores every export request it accepts, before
// acknowledging it, and the profiles it fetches.
//
// # Segment format (version 1)
//
// A capture is a directory of segment files, each named
// seg-NNNNNN.culprit-capture with NNNNNN its sequence number. A segment
// starts with a 40-byte header:
//
//	offset size field
//	0      12   magic "\x89culpcap\r\n\x1a\n"
//	12     2    format version, uint16 little-endian (1)
//	14     2    reserved, zero
//	16     16   listener instance ID (random, one per listener run)
//	32     8    segment sequence number, uint64 little-endian (from 1)
//
// Records follow one after another, each
//
//	0      4    payload length n, uint32 little-endian
//	4      4    CRC-32C (Castagnoli) of the type byte and the payload, little-endian
//	8      1    record type
//	9      n    payload
//
// Record types: 1 is one OTLP ExportTraceServiceRequest in the binary
// protobuf encoding, 2 the same in OTLP/JSON, 3 a pprof profile as the
// Go runtime serves it (gzipped profile.proto). Readers skip records of
// types they do not know, so that later versions can add types.
//
// The magic's first byte is not ASCII and its line endings catch a
// transfer that rewrote them, as in PNG's signature (the PNG
// specification, W3C, 2003, section 5.2).
//
// # Durability
//
// A Writer appends a record whole with one write and syncs the segment
// per its policy before Append returns; a reader of a segment that a
// crash cut short finds a torn last record (shorter than its length, or
// failing its checksum with nothing valid after it), reports it with its
// byte position, and reads everything before it. A bad record followed by
// more data is corruption, not a tear, and is an error. A new segment is
// written under a hidden temporary name until its header is written and
// synced, then renamed, so a crash during a rotation leaves no segment
// with a partial header.
package capture
