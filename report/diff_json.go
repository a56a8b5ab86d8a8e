package report

import (
	"io"

	"github.com/culprithq/culprit/attribute"
)

// DiffJSON renders the versioned comparison document: "schema"
// (DiffSchema), "producedBy" (Options.Provenance), every field of
// attribute.Comparison at the top level (lowerCamelCase; quantities that do
// not exist are null), and "gate": the changes that fail the regression
// budget (Comparison.Gate; [] when the gate passes). Options.Limit cuts
// "changes" to its first Limit entries; "gate" always lists every failing
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
}

// RenderDiff implements DiffRenderer.
func (DiffJSON) RenderDiff(w io.Writer, c *attribute.Comparison, opts Options) error {
	gate := c.Gate()
	if gate == nil {
		gate = []attribute.Change{}
	}
	doc := diffDoc{Schema: DiffSchema, Provenance: opts.Provenance, Comparison: c, Gate: gate}
	if shown := shownChanges(c, opts); len(shown) < len(c.Changes) {
		cp := *c
		cp.Changes = shown
		doc.Comparison = &cp
	}
	return writeJSON(w, doc)
}
