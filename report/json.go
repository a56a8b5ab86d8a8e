package report

import (
	"encoding/json"
	"io"

	"github.com/culprithq/culprit/attribute"
)

// RankSchema is the version tag of the rank JSON document.
const RankSchema = "culprit.rank/v1"

// JSON renders the versioned rank document (lowerCamelCase keys).
type JSON struct{}

type rankDoc struct {
	Schema     string     `json:"schema"`
	Provenance Provenance `json:"producedBy"`
	*attribute.Result
	Caveats []string `json:"caveats"`
	// Omitted counts the root causes an explicit limit cut (nil when none).
	Omitted *omitted `json:"omitted,omitempty"`
}

// Render implements Renderer.
func (JSON) Render(w io.Writer, r *attribute.Result, opts Options) error {
	doc := rankDoc{Schema: RankSchema, Provenance: opts.Provenance, Result: r, Caveats: Caveats(r)}
	if opts.Limit > 0 && len(r.Causes) > opts.Limit {
		cp := *r
		cp.Causes = r.Causes[:opts.Limit]
		doc.Result = &cp
		doc.Omitted = omittedCauses(r.Causes[opts.Limit:])
	}
	enc := json.NewEncoder(w)
	enc.SetIndent("", "  ")
	return enc.Encode(doc)
}

// omittedCauses sums the causes a limit cut.
func omittedCauses(cs []*attribute.Cause) *omitted {
	var share float64
	var cost int64
	for _, c := range cs {
		share += c.Share
		cost += c.Cost
	}
	return &omitted{Count: len(cs), Share: &share, Cost: &cost}
}
