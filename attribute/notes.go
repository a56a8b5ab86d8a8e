package attribute

import (
	"fmt"
	"strings"

	"github.com/culprithq/culprit/traces"
)

// inputNotes says what a reader of the report should know about the
// input beside its warnings: inputs skipped, the services found in a
// span source and which were analysed, and spans that end after their
// parent (accepted as recorded).
func inputNotes(src *traces.Source) []string {
	notes := append([]string(nil), src.Notes...)
	if len(src.Services) > 1 || len(src.Services) == 1 && src.Services[0].Called > 0 {
		var parts, others []string
		for _, si := range src.Services {
			switch {
			case si.Analysed && si.Called > 0 && si.Entries > 0:
				parts = append(parts, fmt.Sprintf("%s (its %d requests from outside analysed; the %d calls it received from other services left out, their time is inside the callers' spans)",
					si.Name, si.Entries, si.Called))
				others = append(others, si.Name)
			case si.Analysed:
				parts = append(parts, fmt.Sprintf("%s (analysed)", si.Name))
			default:
				parts = append(parts, fmt.Sprintf("%s (only called by other services: left out, its time is inside their calls)", si.Name))
				others = append(others, si.Name)
			}
		}
		n := fmt.Sprintf("services in the input: %s", strings.Join(parts, "; "))
		if len(others) > 0 {
			n += fmt.Sprintf("; analyse one on its own with --service %s", others[0])
		}
		notes = append(notes, n)
	}
	if src.LateChildren > 0 {
		notes = append(notes, fmt.Sprintf("%d spans end after their parent (async work such as a promise not awaited or a streamed response): accepted as recorded", src.LateChildren))
	}
	return notes
}
