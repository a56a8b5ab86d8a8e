package compare

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"io"

	"github.com/culprithq/culprit/attribute"
)

// Write writes s as indented JSON followed by a newline.
func (s *Snapshot) Write(w io.Writer) error {
	enc := json.NewEncoder(w)
	enc.SetIndent("", "  ")
	enc.SetEscapeHTML(false)
	if err := enc.Encode(s); err != nil {
		return fmt.Errorf("writing snapshot: %w", err)
	}
	return nil
}

// ReadSnapshot reads a snapshot document written by Snapshot.Write. name
// labels the input in errors. A document of another schema version fails
// with ErrSnapshotSchema naming the version found; malformed JSON fails
// with the line and column of the problem; a snapshot that breaks its
// invariants (see Snapshot.Validate) fails with ErrSnapshotInvalid. Every
// error is a *SnapshotError.
func ReadSnapshot(name string, r io.Reader) (*Snapshot, error) {
	data, err := io.ReadAll(io.LimitReader(r, maxSnapshotBytes+1))
	if err != nil {
		return nil, &SnapshotError{File: name, Err: fmt.Errorf("reading: %w", err)}
	}
	if len(data) > maxSnapshotBytes {
		return nil, &SnapshotError{File: name, Err: fmt.Errorf("%w: larger than %d bytes", ErrSnapshotInvalid, maxSnapshotBytes)}
	}
	posErr := func(off int64, err error) error {
		line, col := lineCol(data, off)
		return &SnapshotError{File: name, Line: line, Column: col, Err: err}
	}
	decode := func(v any) error {
		dec := json.NewDecoder(bytes.NewReader(data))
		if err := dec.Decode(v); err != nil {
			var se *json.SyntaxError
			var te *json.UnmarshalTypeError
			switch {
			case errors.As(err, &se):
				return posErr(max(0, se.Offset-1), err) // Offset is just past the bad byte
			case errors.As(err, &te):
				return posErr(valueStart(data, te.Offset), err)
			case errors.Is(err, io.EOF):
				return &SnapshotError{File: name, Err: fmt.Errorf("%w: the file is empty", ErrSnapshotInvalid)}
			case errors.Is(err, io.ErrUnexpectedEOF):
				return posErr(int64(len(data)), fmt.Errorf("truncated JSON: %w", err))
			}
			return posErr(dec.InputOffset(), err)
		}
		if _, err := dec.Token(); !errors.Is(err, io.EOF) {
			return posErr(dec.InputOffset(), errors.New("unexpected data after the snapshot document"))
		}
		return nil
	}
	// The schema is checked before the body is decoded, so that another
	// version's layout is reported as such and not as a type error.
	var head struct {
		Schema *string `json:"schema"`
	}
	if err := decode(&head); err != nil {
		return nil, err
	}
	switch {
	case head.Schema == nil:
		return nil, &SnapshotError{File: name, Err: fmt.Errorf("%w: no \"schema\" field; not a culprit snapshot (want %q)", ErrSnapshotSchema, SnapshotSchema)}
	case *head.Schema != SnapshotSchema:
		return nil, &SnapshotError{File: name, Err: fmt.Errorf("%w %q; this culprit reads %q (re-save the snapshot with a matching culprit)", ErrSnapshotSchema, *head.Schema, SnapshotSchema)}
	}
	s := &Snapshot{}
	if err := decode(s); err != nil {
		return nil, err
	}
	// Identities are recomputed: a snapshot saved by an older culprit
	// matches causes by the rules of this one.
	for i := range s.Causes {
		s.Causes[i].Identity = attribute.Identity(s.Causes[i].Function)
	}
	if err := s.Validate(); err != nil {
		return nil, &SnapshotError{File: name, Err: err}
	}
	s.name = name
	return s, nil
}

// valueStart returns the offset where the JSON value that ends at off
// starts, for a string, a literal or an opening bracket; otherwise off.
// encoding/json reports type errors just past the offending value.
func valueStart(data []byte, off int64) int64 {
	if off <= 0 || off > int64(len(data)) {
		return off
	}
	i := off - 1
	switch c := data[i]; {
	case c == '[' || c == '{':
		return i
	case c == '"':
		for j := i - 1; j >= 0; j-- {
			if data[j] == '"' && (j == 0 || data[j-1] != '\\') {
				return j
			}
		}
	case literalByte(c):
		for i > 0 && literalByte(data[i-1]) {
			i--
		}
		return i
	}
	return off
}

func literalByte(c byte) bool {
	return c >= '0' && c <= '9' || c >= 'a' && c <= 'z' || c >= 'A' && c <= 'Z' || c == '.' || c == '-' || c == '+'
}

// lineCol returns the 1-based line and column of byte off of data.
func lineCol(data []byte, off int64) (line, col int) {
	line, col = 1, 1
	for _, b := range data[:min(off, int64(len(data)))] {
		if b == '\n' {
			line, col = line+1, 1
		} else {
			col++
		}
	}
	return line, col
}
