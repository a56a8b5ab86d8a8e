package report

import (
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
}

// Render implements Renderer.
func (JSON) Render(w io.Writer, r *attribute.Result, opts Options) error {
	doc := rankDoc{Schema: RankSchema, Provenance: opts.Provenance, Result: r, Caveats: Caveats(r)}
	if opts.Limit > 0 && len(r.Causes) > opts.Limit {
		cp := *r
		cp.Causes = r.Causes[:opts.Limit]
		doc.Result = &cp
	}
	return writeJSON(w, doc)
}
