package attribute

import (
	"bytes"
	"encoding/json"
	"errors"
	"slices"
	"strings"
	"testing"

	"github.com/culprithq/culprit/traces"
)

// FuzzRulesFile checks that ParseRulesFile never panics, that its errors
// render with the file name and a position inside the input, and that
// the rules it accepts survive a JSON round trip: marshalled back to JSON
// and parsed again, they are the same rules.
func FuzzRulesFile(f *testing.F) {
	f.Add([]byte(`{
  "app": ["example.com/greenhouse/"],
  "rules": [
    {"class": "database", "function": "example.com/greenhouse/db.(*Pool).", "system": "postgresql"},
    {"class": "library", "regexp": "\\.String$"},
    {"class": "network", "span": "client:rpc", "family": "otel"},
    {"class": "entry", "file": "greenhouse/cmd/", "system": ""},
    {"class": "application", "contains": "Greenhouse"}
  ]
}`))
	f.Add([]byte("{\n  \"rules\": [\n    {\"class\": \"database\",, }\n  ]\n}"))
	f.Add([]byte(`{"rules": [{"class": "network", "regexp": "("}]}`))
	f.Add([]byte(`{"rulez": []}`))
	f.Add([]byte(`{"app": [" "]}`))
	f.Add([]byte(`{"rules": [null, {"class": "nope", "function": "x"}]}`))

	const name = "fuzz.json"
	f.Fuzz(func(t *testing.T, data []byte) {
		rules, err := ParseRulesFile(name, bytes.NewReader(data))
		if err != nil {
			if !strings.HasPrefix(err.Error(), name+":") {
				t.Fatalf("error does not start with the file name: %v", err)
			}
			var re *RulesFileError
			if errors.As(err, &re) {
				lines := bytes.Count(data, []byte{'\n'}) + 1
				if re.Line < 1 || re.Line > lines || re.Column < 1 || re.Column > len(data)+1 {
					t.Fatalf("position %d:%d outside the input (%d lines, %d bytes): %v", re.Line, re.Column, lines, len(data), err)
				}
			}
			return
		}
		frame := &traces.Frame{Function: "example.com/greenhouse/db.(*Pool).Query", File: `C:\src\greenhouse\db\pool.go`,
			Span: true, SpanKind: traces.SpanKindClient, Protocol: traces.ProtocolRPC}
		for i := range rules.Rules {
			rules.Rules[i].Matches(frame) // must not panic
		}

		js, err := json.Marshal(rules)
		if err != nil {
			t.Fatalf("accepted rules do not marshal: %v", err)
		}
		back, err := ParseRulesFile(name, bytes.NewReader(js))
		if err != nil {
			t.Fatalf("marshalled rules do not parse: %v\n%s", err, js)
		}
		if !slices.Equal(rules.App, back.App) || !slices.Equal(rules.Files, back.Files) {
			t.Fatalf("app or files changed: %q %q -> %q %q", rules.App, rules.Files, back.App, back.Files)
		}
		if !slices.EqualFunc(rules.Rules, back.Rules, sameRule) {
			t.Fatalf("rules changed in a round trip:\n%+v\n%+v", rules.Rules, back.Rules)
		}
	})
}

// sameRule compares the exported fields of two rules (the compiled
// regexp is derived from Regexp).
func sameRule(a, b Rule) bool {
	a.re, b.re = nil, nil
	return a == b
}
