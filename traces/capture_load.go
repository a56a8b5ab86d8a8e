package traces

import (
	"bufio"
	"bytes"
	"compress/gzip"
	"encoding/hex"
	"errors"
	"fmt"
	"io"

	"github.com/culprithq/culprit/traces/capture"
	"google.golang.org/protobuf/encoding/protowire"
)

// Input formats of binary trace inputs.
const (
	// FormatOTLPProto is a file holding one binary ExportTraceServiceRequest.
	FormatOTLPProto = "otlp-protobuf"
	// FormatCapture is a capture segment written by `culprit listen`.
	FormatCapture = "culprit-capture"
)

// WarnTornRecord is a capture segment's last record cut short by a crash
// (or failing its checksum with nothing after it): skipped, with
// everything before it read.
const WarnTornRecord = "torn-record"

// WarnCaptureProfiles is a capture's profiles left unread because the
// run reads its spans (a run reads either spans or profiles).
const WarnCaptureProfiles = "capture-profiles"

// LooksLikeOTLPProto reports whether the first bytes of an input look
// like a binary OTLP trace export request (or TracesData): field 1,
// length-delimited (resource_spans), whose contents start with a
// length-delimited field 1 to 3 (resource, scope_spans, schema_url). A
// pprof profile starts with its sample types (field 1 too), whose fields
// are varints.
func LooksLikeOTLPProto(prefix []byte) bool {
	num, typ, n := protowire.ConsumeTag(prefix)
	if n < 0 || num != 1 || typ != protowire.BytesType {
		return false
	}
	l, m := protowire.ConsumeVarint(prefix[n:])
	if m < 0 || l == 0 || len(prefix) == n+m {
		return false
	}
	num, typ, k := protowire.ConsumeTag(prefix[n+m:])
	return k > 0 && typ == protowire.BytesType && num >= 1 && num <= 3
}

// addOTLPProto reads one binary export request.
func (l *Loader) addOTLPProto(name string, data []byte) error {
	if l.spans == nil {
		l.spans = NewSpanCollector(l.opts)
	}
	done := false
	return l.spans.AddRecords(name, FormatOTLPProto, func() (Record, error) {
		if done {
			return Record{}, io.EOF
		}
		done = true
		return Record{Data: data}, nil
	})
}

// captureProfile is a profile record of a capture, read only when the
// run has no spans.
type captureProfile struct {
	name   string
	offset int64
	data   []byte
}

// addSegment reads one capture segment: its trace records as spans, its
// profiles kept for Source. It returns the segment's identity.
func (l *Loader) addSegment(name string, r *bufio.Reader) (*SegmentID, error) {
	seg, err := capture.NewReader(r, l.opts.Limits.MaxBytes)
	if err != nil {
		return nil, segmentError(name, err)
	}
	id := &SegmentID{Instance: hex.EncodeToString(seg.Header.Instance[:]), Sequence: seg.Header.Sequence}
	if l.spans == nil {
		l.spans = NewSpanCollector(l.opts)
	}
	var profiles []captureProfile
	var torn *capture.TornError
	err = l.spans.AddRecords(name, FormatCapture, func() (Record, error) {
		for {
			rec, err := seg.Next()
			if errors.As(err, &torn) {
				return Record{}, io.EOF
			}
			if err != nil {
				if errors.Is(err, io.EOF) {
					return Record{}, err
				}
				return Record{}, segmentError(name, err)
			}
			switch rec.Type {
			case capture.TraceProto, capture.TraceJSON:
				return Record{Data: rec.Payload, JSON: rec.Type == capture.TraceJSON, Offset: rec.Offset + 9}, nil
			case capture.Profile:
				profiles = append(profiles, captureProfile{name: name, offset: rec.Offset, data: rec.Payload})
			}
		}
	})
	if err != nil {
		return nil, err
	}
	if torn != nil {
		l.warnings.Add(Warning{Kind: WarnTornRecord, File: name, Message: torn.Error()})
	}
	l.capProfiles = append(l.capProfiles, profiles...)
	return id, nil
}

// segmentError names the segment in a capture reading error.
func segmentError(name string, err error) error {
	var fe *capture.FormatError
	if errors.As(err, &fe) {
		return &ParseError{File: name, Offset: fe.Offset, Err: fmt.Errorf("%w: %s", ErrFormat, fe.Why)}
	}
	return &ParseError{File: name, Err: err}
}

// captureSource makes the source of a capture's profiles, for a run that
// read captures holding no spans.
func (l *Loader) captureSource() (*Source, bool, error) {
	if len(l.capProfiles) == 0 || l.spans == nil || l.spans.spans.len() > 0 {
		if len(l.capProfiles) > 0 {
			l.warnings.Add(Warning{Kind: WarnCaptureProfiles, File: l.capProfiles[0].name,
				Message: fmt.Sprintf("%d profiles of the capture not read: this run reads its spans", len(l.capProfiles))})
		}
		return nil, false, nil
	}
	// Goroutine profiles see the time requests wait on the database and
	// network; CPU profiles do not, and the two cannot share a
	// denominator: the goroutine profiles are read when there are any.
	var decoded []*rawProfile
	goroutines := 0
	for _, cp := range l.capProfiles {
		data := cp.data
		if bytes.HasPrefix(data, gzipMagic) {
			zr, err := gzip.NewReader(bytes.NewReader(data))
			if err != nil {
				return nil, true, &ParseError{File: cp.name, Offset: cp.offset, Err: fmt.Errorf("profile record: %w", err)}
			}
			if data, err = readAll(&sizeLimitReader{r: zr, max: l.opts.Limits.MaxBytes, name: cp.name}, firstChunk); err != nil {
				return nil, true, &ParseError{File: cp.name, Offset: cp.offset, Err: fmt.Errorf("profile record: %w", err)}
			}
		}
		p, ok := decodeProfile(data)
		if !ok || len(p.sampleTypes) == 0 {
			return nil, true, &ParseError{File: cp.name, Offset: cp.offset, Err: fmt.Errorf("%w: profile record is not a pprof profile", ErrFormat)}
		}
		if isGoroutineProfile(p) {
			goroutines++
		}
		decoded = append(decoded, p)
	}
	app := newProfileAppender(l.opts.Limits)
	skipped := 0
	for i, p := range decoded {
		if goroutines > 0 && !isGoroutineProfile(p) {
			skipped++
			continue
		}
		if err := app.add(l.capProfiles[i].name, p); err != nil {
			return nil, true, err
		}
	}
	if skipped > 0 {
		l.warnings.Add(Warning{Kind: WarnCaptureProfiles, File: l.capProfiles[0].name,
			Message: fmt.Sprintf("%d CPU profiles of the capture not read: the run reads its %d goroutine profiles", skipped, goroutines)})
	}
	return app.src, true, nil
}

// isGoroutineProfile reports whether p counts goroutines.
func isGoroutineProfile(p *rawProfile) bool {
	return len(p.sampleTypes) == 1 && p.sampleTypes[0].Type == "goroutine"
}
