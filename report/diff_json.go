package report

import (
	"encoding/json"
	"io"

	"github.com/culprithq/culprit/attribute"
)

// DiffJSON renders the versioned comparison document: "schema"
// (DiffSchema), "producedBy" (Options.Provenance), every field of
// attribute.Comparison at the top level (lowerCamelCase; quantities that do
// not exist are null), and "gate": the changes that fail the regression
// budget (Comparison.Gate; [] when the gate passes). Options.Limit cuts
// "changes" to its first Limit entries and adds "omitted" (how many were
// cut, and their summed base and candidate values); "gate" always lists every failing
// change. Options.Color and Options.Width are ignored. The document decodes
// back into the same values with encoding/json, except that invalid UTF-8
// in input strings is written as U+FFFD (JSON strings are UTF-8).
type DiffJSON struct{}

// diffDoc is the culprit.diff/v1 document; field order is the key order.
type diffDoc struct {
	Schema     string     `json:"schema"`
	Provenance Provenance `json:"producedBy"`
	*attribute.Comparison
	Gate []attribute.Change `json:"gate"`
	// Omitted counts the changes that Options.Limit cut (nil when none).
	Omitted *OmittedDoc `json:"omitted,omitempty"`
}

// RenderDiff implements DiffRenderer.
func (DiffJSON) RenderDiff(w io.Writer, c *attribute.Comparison, opts Options) error {
	gate := c.Gate()
	if gate == nil {
		gate = []attribute.Change{}
	}
	doc := diffDoc{Schema: DiffSchema, Provenance: opts.Provenance, Comparison: c, Gate: gate}
	if shown := limitedChanges(c, opts); len(shown) < len(c.Changes) {
		cp := *c
		cp.Changes = shown
		doc.Comparison = &cp
		var b, cand float64
		for _, ch := range c.Changes[len(shown):] {
			b += ch.Base
			cand += ch.Candidate
		}
		doc.Omitted = &OmittedDoc{Count: len(c.Changes) - len(shown), Base: &b, Candidate: &cand}
	}
	enc := json.NewEncoder(w)
	enc.SetIndent("", "  ")
	return enc.Encode(doc)
}
