package report

import (
	"reflect"
	"slices"
	"strings"
	"testing"

	"github.com/culprithq/culprit/attribute"
	"github.com/culprithq/culprit/attribute/compare"
	"github.com/culprithq/culprit/traces"
)

// jsonKeys returns the JSON keys of a struct type's exported fields.
func jsonKeys(t reflect.Type) []string {
	var out []string
	for i := range t.NumField() {
		f := t.Field(i)
		if !f.IsExported() {
			continue
		}
		name, _, _ := strings.Cut(f.Tag.Get("json"), ",")
		if name == "-" {
			continue
		}
		if name == "" {
			name = f.Name
		}
		out = append(out, name)
	}
	return out
}

// TestDocumentsCoverTheModel: every JSON key of the model types is a key
// of the report's document type that stands for it (or is listed here as
// deliberately left out), so that a field added to the model reaches the
// public JSON only by a deliberate change of the document, its schema in
// testdata/schema/ and the goldens.
func TestDocumentsCoverTheModel(t *testing.T) {
	for _, tt := range []struct {
		model, doc any
		omitted    []string
	}{
		{attribute.Result{}, RankDocument{}, nil},
		{attribute.Totals{}, TotalsDoc{}, nil},
		{attribute.AppInfo{}, AppDoc{}, nil},
		{attribute.Detection{}, DetectionDoc{}, nil},
		{attribute.EntryTotal{}, EntryDoc{}, nil},
		{attribute.Cause{}, CauseDoc{}, nil},
		{attribute.CallSite{}, CallSiteDoc{}, nil},
		{attribute.Distribution{}, DistributionDoc{}, nil},
		{attribute.Detail{}, DetailDoc{}, nil},
		{attribute.EntryShare{}, EntryShareDoc{}, nil},
		{attribute.Finding{}, FindingDoc{}, nil},
		{attribute.DomainTotal{}, DomainDoc{}, nil},
		{traces.Input{}, InputDoc{}, nil},
		{traces.ValueType{}, ValueTypeDoc{}, nil},
		{compare.Comparison{}, DiffDocument{}, nil},
		{compare.SideSummary{}, SideDoc{}, nil},
		{compare.Budget{}, BudgetDoc{}, nil},
		{compare.Change{}, ChangeDoc{}, nil},
		{compare.CallsChange{}, CallsChangeDoc{}, nil},
		{compare.StatementChange{}, StatementChangeDoc{}, nil},
		{attribute.Explanation{}, ExplanationDoc{}, nil},
		// The node's class string is written as a list, "classes".
		{attribute.ExplainNode{}, ExplainNodeDoc{}, []string{"class"}},
	} {
		mt, dt := reflect.TypeOf(tt.model), reflect.TypeOf(tt.doc)
		keys := jsonKeys(dt)
		for _, k := range jsonKeys(mt) {
			if !slices.Contains(keys, k) && !slices.Contains(tt.omitted, k) {
				t.Errorf("%s has JSON key %q that %s lacks: add it to the document, its schema and the goldens (or list it as left out)",
					mt, k, dt)
			}
		}
	}
}
