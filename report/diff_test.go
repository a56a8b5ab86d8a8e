package report

import (
	"bytes"
	"crypto/sha256"
	"encoding/base64"
	"encoding/csv"
	"encoding/json"
	"fmt"
	"math"
	"reflect"
	"regexp"
	"slices"
	"strconv"
	"strings"
	"testing"
	"unicode/utf8"

	"github.com/culprithq/culprit/attribute"
	"github.com/culprithq/culprit/attribute/compare"
	"github.com/culprithq/culprit/traces"
	"golang.org/x/net/html"
)

func fp(f float64) *float64 { return &f }

// nurseryDiff is a realistic per-request comparison of two load tests of
// an invented plant nursery: one change of every verdict, and an unchanged
// cause whose interval and MDE are unbounded (nil).
func nurseryDiff() *compare.Comparison {
	in := func(name string) traces.Input {
		return traces.Input{Name: name, Format: "otlp-json", Bytes: 51234, SHA256: fmt.Sprintf("%x", sha256.Sum256([]byte(name)))}
	}
	dur := traces.ValueType{Type: "duration", Unit: "nanoseconds"}
	side := func(name string, reqs int) compare.SideSummary {
		return compare.SideSummary{Inputs: []traces.Input{in(name)}, SourceKind: "spans", ValueType: dur,
			Totals:   attribute.Totals{Cost: 90e9, Database: 40e9, Network: 9e9, Other: 41e9, Requests: reqs, Samples: 30000, BoundarySamples: 21000},
			Requests: reqs, DurationNanos: 60e9, Exposure: float64(reqs)}
	}
	const app = "example.com/nursery/"
	boot, poisson := compare.MethodBootstrap, compare.MethodPoisson
	return &compare.Comparison{
		Basis: compare.BasisPerRequest, Unit: "nanoseconds per request", ValueType: dur,
		Base: side("load-v41.jsonl", 1200), Candidate: side("load-v42.jsonl", 1180),
		Alpha: 0.05, Power: 0.8, Confidence: 0.95, Budget: compare.Budget{Relative: 0.05}, Seed: 7, Resamples: 2000,
		Changes: []compare.Change{
			{Function: app + "catalog.(*Repo).VarietyByID", Identity: app + "catalog.(*Repo).VarietyByID", Kind: attribute.KindDatabase,
				Base: 12.4e6, Candidate: 17.1e6, Change: 4.7e6, RelativeChange: fp(0.379), RelLo: fp(0.30), RelHi: fp(0.47),
				PValue: fp(1e-9), QValue: fp(7e-9), MDE: fp(0.06), Verdict: compare.OutcomeRegressed, Reasons: []string{"time", "calls"},
				BaseSamples: 3100, CandSamples: 4200, BaseRequests: 1100, CandRequests: 1090, Method: boot,
				Calls: &compare.CallsChange{Base: 2.6, Candidate: 3.5, RelativeChange: fp(0.346), RelLo: fp(0.31), RelHi: fp(0.38),
					PValue: fp(1e-12), QValue: fp(1e-11), MDE: fp(0.02), Verdict: compare.OutcomeRegressed},
				Statements: []compare.StatementChange{
					{Statement: "SELECT id, name FROM varieties WHERE id = ?", System: "postgresql", Kind: attribute.KindDatabase, Base: 2.6, Candidate: 2.6},
					{Statement: "SELECT url FROM variety_photos WHERE variety_id = ?", System: "postgresql", Kind: attribute.KindDatabase, Candidate: 0.9, New: true},
				}},
			{Function: app + "catalog.(*Repo).VarietyPhotos", Identity: app + "catalog.(*Repo).VarietyPhotos", Kind: attribute.KindNetwork,
				Candidate: 2.3e6, Change: 2.3e6, PValue: fp(2e-6), QValue: fp(7e-6), Verdict: compare.OutcomeNew,
				CandSamples: 1180, CandRequests: 1180, Method: boot},
			{Function: app + "orders.(*Service).Place.func2", Identity: app + "orders.(*Service).Place.func*",
				Functions: []string{app + "orders.(*Service).Place.func1", app + "orders.(*Service).Place.func2"}, Kind: attribute.KindMixed,
				Base: 8.2e6, Candidate: 8.9e6, Change: 0.7e6, RelativeChange: fp(0.085), RelLo: fp(0.012), RelHi: fp(0.16),
				PValue: fp(0.011), QValue: fp(0.019), MDE: fp(0.07), Verdict: compare.OutcomeInconclusive,
				BaseSamples: 600, CandSamples: 610, BaseRequests: 300, CandRequests: 305, Method: boot},
			{Function: app + "pricing.(*Client).Quote", Identity: app + "pricing.(*Client).Quote", Kind: attribute.KindNetwork,
				Base: 6.0e6, Candidate: 4.1e6, Change: -1.9e6, RelativeChange: fp(-0.317), RelLo: fp(-0.38), RelHi: fp(-0.25),
				PValue: fp(4e-6), QValue: fp(9e-6), MDE: fp(0.05), Verdict: compare.OutcomeImproved,
				BaseSamples: 2400, CandSamples: 2360, BaseRequests: 1200, CandRequests: 1180, Method: boot},
			{Function: app + "catalog.(*Cache).Warm", Identity: app + "catalog.(*Cache).Warm", Kind: attribute.KindDatabase,
				Base: 1.2e6, Change: -1.2e6, PValue: fp(0.003), QValue: fp(0.0045), Verdict: compare.OutcomeGone,
				BaseSamples: 40, BaseRequests: 40, Method: boot},
			{Function: app + "inventory.(*Repo).Stock", Identity: app + "inventory.(*Repo).Stock", Kind: attribute.KindDatabase,
				Base: 3.1e6, Candidate: 3.15e6, Change: 0.05e6, RelativeChange: fp(0.016), RelLo: fp(-0.04), RelHi: fp(0.07),
				PValue: fp(0.58), QValue: fp(0.68), MDE: fp(0.09), Verdict: compare.OutcomeUnchanged,
				BaseSamples: 1200, CandSamples: 1180, BaseRequests: 1200, CandRequests: 1180, Method: boot},
			{Function: app + "orders.(*Repo).Lines", Identity: app + "orders.(*Repo).Lines", Kind: attribute.KindDatabase,
				Base: 5.0e6, Candidate: 5.9e6, Change: 0.9e6, RelativeChange: fp(0.18), RelLo: fp(-0.14), RelHi: fp(1.25),
				PValue: fp(0.3), QValue: fp(0.4), MDE: fp(1.2), Verdict: compare.OutcomeRegressed, Reasons: []string{"calls"},
				BaseSamples: 8900, CandSamples: 17900, BaseRequests: 1000, CandRequests: 1000, Method: boot,
				Calls: &compare.CallsChange{Base: 8.9, Candidate: 17.9, RelativeChange: fp(1.01), RelLo: fp(0.95), RelHi: fp(1.07),
					PValue: fp(1e-12), QValue: fp(1e-11), MDE: fp(0.03), Verdict: compare.OutcomeRegressed},
				Statements: []compare.StatementChange{{Statement: "SELECT * FROM order_lines WHERE order_id = ?", System: "postgresql",
					Kind: attribute.KindDatabase, Base: 8.9, Candidate: 17.9, PValue: fp(1e-12), QValue: fp(2e-12)}}},
			{Function: app + "auth.(*Tokens).Verify", Identity: app + "auth.(*Tokens).Verify", Kind: attribute.KindNetwork,
				Base: 0.02e6, Candidate: 0.03e6, Change: 0.01e6, RelativeChange: fp(0.5), RelLo: fp(-0.4),
				Verdict: compare.OutcomeUnchanged, BelowDetection: true,
				BaseSamples: 2, CandSamples: 3, BaseRequests: 2, CandRequests: 3, Method: poisson},
		},
		Warnings: []string{"load-v42.jsonl: 2 orphan spans attached to their trace root"},
	}
}

// hostileDiff puts the hostile strings of render_test.go into every
// string a comparison carries.
func hostileDiff() *compare.Comparison {
	c := nurseryDiff()
	h := strings.Join(hostile, " ")
	c.Unit = "ms<i>\n per request|`"
	c.ValueType = traces.ValueType{Type: "cpu<b>", Unit: "ms<i>"}
	c.Budget = compare.Budget{Relative: 0.1, Absolute: 2, Set: true}
	c.Base.Inputs = []traces.Input{{Name: "<script>alert(1)</script>\r\n|`x`.pprof", Format: "pprof\x1b", Bytes: 10, SHA256: "a|b"}}
	c.Candidate.SourceKind = h
	c.Warnings = []string{h, "```\r\n<img src=https://attacker.invalid/x>"}
	changes := make([]compare.Change, 0, len(hostile))
	for i, s := range hostile {
		ch := c.Changes[i%len(c.Changes)]
		ch.Function, ch.Identity, ch.Functions = s, s+" "+h, nil
		changes = append(changes, ch)
	}
	c.Changes = changes
	return c
}

type diffCase struct {
	name string
	c    *compare.Comparison
	opts Options
}

func diffCases() []diffCase {
	prov := Provenance{Command: "culprit diff --format html load-v41.jsonl load-v42.jsonl", Version: "v0.1.0", Options: []string{"--seed 7"}}
	evil := Provenance{Command: "culprit diff ```\n<script>alert(1)</script> `x`", Version: "v0\x1b", Options: []string{"<b>"}}
	gated := nurseryDiff() // an absolute budget that the new cause exceeds
	gated.Budget = compare.Budget{Relative: 0.1, Absolute: 1e6, Set: true}
	calm := nurseryDiff() // nothing beyond the budget; shares
	calm.Basis, calm.Unit = compare.BasisShare, "share of database+network cost"
	calm.Changes = slices.DeleteFunc(calm.Changes[3:], func(ch compare.Change) bool { return ch.Verdict == compare.OutcomeRegressed })
	for i := range calm.Changes {
		calm.Changes[i].Base /= 1e8
		calm.Changes[i].Candidate /= 1e8
		calm.Changes[i].Change /= 1e8
	}
	return []diffCase{
		{"nursery", nurseryDiff(), Options{Provenance: prov}},
		{"nursery/limit3", nurseryDiff(), Options{Limit: 3, Provenance: prov}},
		{"gated", gated, Options{Provenance: prov}},
		{"calm", calm, Options{Provenance: prov}},
		{"hostile", hostileDiff(), Options{Provenance: evil}},
		{"hostile/limit2", hostileDiff(), Options{Limit: 2, Provenance: evil}},
		{"empty", &compare.Comparison{Basis: compare.BasisShare, Changes: []compare.Change{}, Warnings: []string{}}, Options{}},
	}
}

func renderDiff(t *testing.T, rd DiffRenderer, tc diffCase) string {
	t.Helper()
	var b bytes.Buffer
	if err := rd.RenderDiff(&b, tc.c, tc.opts); err != nil {
		t.Fatalf("RenderDiff: %v", err)
	}
	return b.String()
}

func TestForDiffFormat(t *testing.T) {
	for _, name := range DiffFormats {
		t.Run(name, func(t *testing.T) {
			if _, err := ForDiffFormat(name); err != nil {
				t.Fatal(err)
			}
		})
	}
	if _, err := ForDiffFormat("pdf"); err == nil || !strings.Contains(err.Error(), "--format must be one of: text, markdown, json, csv, html") {
		t.Errorf("ForDiffFormat(pdf) error = %v, want the list of formats", err)
	}
}

func TestDiffDeterministic(t *testing.T) {
	for _, name := range DiffFormats {
		rd, _ := ForDiffFormat(name)
		for _, tc := range diffCases() {
			t.Run(name+"/"+tc.name, func(t *testing.T) {
				if a, b := renderDiff(t, rd, tc), renderDiff(t, rd, tc); a != b {
					t.Error("two renderings differ")
				}
			})
		}
	}
}

func TestDiffGolden(t *testing.T) {
	tc := diffCases()[0]
	for _, g := range []struct{ file, format string }{
		{"diff.txt", "text"}, {"diff.md", "markdown"}, {"diff.json", "json"}, {"diff.csv", "csv"}, {"diff.html", "html"},
	} {
		t.Run(g.file, func(t *testing.T) {
			rd, _ := ForDiffFormat(g.format)
			got := renderDiff(t, rd, tc)
			checkGolden(t, g.file, got)
		})
	}
}

func TestDiffFormatting(t *testing.T) {
	c := nurseryDiff()
	ch := c.Changes
	share := &compare.Comparison{Basis: compare.BasisShare, Unit: "share of database+network cost"}
	count := &compare.Comparison{Basis: compare.BasisPerSecond, Unit: "count per second", ValueType: traces.ValueType{Type: "samples", Unit: "count"}}
	for _, tt := range []struct{ name, got, want string }{
		{"rel with interval", relText(ch[0]), "+38% [+30%, +47%]"},
		{"rel below ten percent", relText(ch[2]), "+8.5% [+1.2%, +16%]"},
		{"rel negative", relText(ch[3]), "-32% [-38%, -25%]"},
		{"rel unbounded", relText(ch[7]), "+50% [-40%, +∞]"},
		{"rel new", relText(ch[1]), "new"},
		{"rel gone", relText(ch[4]), "gone"},
		{"rel without interval", relText(compare.Change{RelativeChange: fp(0.1)}), "+10%"},
		{"rel rounds to zero", relText(compare.Change{RelativeChange: fp(-0.0004)}), "0%"},
		{"q nil", qText(nil), "-"},
		{"q tiny", qText(fp(7e-9)), "<0.0001"},
		{"q two digits", qText(fp(0.0123)), "0.012"},
		{"q one", qText(fp(1)), "1"},
		{"mde", mdeText(ch[0]), "6.0%"},
		{"mde new", mdeText(ch[1]), "-"},
		{"mde unbounded", mdeText(ch[7]), "∞"},
		{"duration", rateText(12.4e6, c), "12.4ms"},
		{"duration change", signedRateText(4.7e6, c), "+4.7ms"},
		{"tiny negative duration", signedRateText(-0.2, c), "0"},
		{"share", rateText(0.1234, share), "12.3%"},
		{"share change in points", signedRateText(0.004, share), "+0.4 pp"},
		{"count", rateText(1234.4, count), "1234"},
		{"small count", rateText(0.01234, count), "0.0123"},
		{"small count change", signedRateText(0.01234, count), "+0.0123"},
		{"default budget", budgetText(c), "default +5.0%"},
		{"absolute budget", budgetText(&compare.Comparison{Basis: compare.BasisPerRequest, Unit: "nanoseconds per request",
			ValueType: c.ValueType, Budget: compare.Budget{Relative: 0.1, Absolute: 2e6, Set: true}}), "+10% and +2.0ms per request"},
		{"absolute count budget", budgetText(&compare.Comparison{Basis: compare.BasisPerSecond, Unit: "count per second",
			ValueType: count.ValueType, Budget: compare.Budget{Absolute: 3, Set: true}}), "0% and +3 count per second"},
	} {
		t.Run(tt.name, func(t *testing.T) {
			if tt.got != tt.want {
				t.Errorf("got %q, want %q", tt.got, tt.want)
			}
		})
	}
}

func TestDiffHeadline(t *testing.T) {
	want := map[string]string{
		"nursery": "2 root causes regressed; worst: example.com/nursery/catalog.(*Repo).VarietyByID +38% [+30%, +47%]",
		"gated":   "2 root causes regressed and 1 new root cause exceeds the absolute budget; worst: example.com/nursery/catalog.(*Repo).VarietyByID +38% [+30%, +47%]",
		"calm":    "No root cause regressed beyond the budget (budget default +5.0%, q ≤ 0.05)",
		"empty":   "No root cause on either side: nothing to compare",
	}
	for _, tc := range diffCases() {
		w, ok := want[tc.name]
		if !ok {
			continue
		}
		t.Run(tc.name, func(t *testing.T) {
			h := newDiffHeadline(tc.c)
			got := h.Lead
			if h.Function != "" {
				got += "; worst: " + h.Function + " " + h.Change
			}
			if got != w {
				t.Errorf("headline %q, want %q", got, w)
			}
			if tc.name == "nursery" && h.Counts != "8 root causes compared: 2 regressed, 1 new, 1 inconclusive, 1 improved, 1 gone, 1 unchanged, 1 below detection" {
				t.Errorf("counts %q", h.Counts)
			}
		})
	}
}

// ansiRe matches the colour codes of the text format.
var ansiRe = regexp.MustCompile("\x1b\\[[0-9;]*m")

func TestDiffText(t *testing.T) {
	for _, tc := range diffCases() {
		t.Run(tc.name, func(t *testing.T) {
			plain := renderDiff(t, DiffText{}, tc)
			if i := strings.IndexFunc(plain, func(r rune) bool { return r < 0x20 && r != '\n' || r == 0x7f }); i >= 0 {
				t.Errorf("control character %q at byte %d", plain[i], i)
			}
			tc.opts.Color = true
			coloured := renderDiff(t, DiffText{}, tc)
			if len(tc.c.Changes) > 0 && !strings.Contains(coloured, verdictANSI(tc.c.Changes[0].Verdict)+verdictText(tc.c.Changes[0])+ansiReset) {
				t.Error("verdict not coloured with Options.Color")
			}
			// Colour codes of equal length keep tabwriter's columns.
			if got := ansiRe.ReplaceAllString(coloured, ""); got != plain {
				t.Errorf("coloured output differs from plain once codes are removed:\n%s\n---\n%s", got, plain)
			}
			if !strings.Contains(plain, "\"unchanged\" means no change above the MDE shown") {
				t.Error("no explanation of unchanged")
			}
			rows := 0
			for _, line := range strings.Split(plain, "\n") {
				for _, v := range verdicts() {
					if strings.HasPrefix(line, string(v)+" ") {
						rows++
					}
				}
			}
			shown := len(shownChanges(tc.c, tc.opts))
			if rows != shown {
				t.Errorf("%d table rows, want %d", rows, shown)
			}
			if more := hiddenChanges(tc.c, tc.opts); more > 0 && !strings.Contains(plain, fmt.Sprintf("(%s not shown", plural(more, "more change", "more changes"))) {
				t.Error("hidden changes not counted")
			}
			unwrapped := strings.ReplaceAll(plain, "\n  ", " ")
			for _, wn := range tc.c.Warnings {
				if !strings.Contains(unwrapped, strings.Join(strings.Fields("warning: "+oneLine(wn, 400)), " ")) {
					t.Errorf("warning %q missing", wn)
				}
			}
		})
	}
}

func TestDiffMarkdown(t *testing.T) {
	for _, tc := range diffCases() {
		t.Run(tc.name, func(t *testing.T) {
			out := renderDiff(t, DiffMarkdown{}, tc)
			if !utf8.ValidString(out) {
				t.Error("output is not valid UTF-8")
			}
			if i := strings.IndexFunc(out, func(r rune) bool { return r < 0x20 && r != '\n' || r == 0x7f }); i >= 0 {
				t.Errorf("control character %q at byte %d", out[i], i)
			}
			var table []string
			fence := ""
			for _, line := range strings.Split(out, "\n") {
				switch {
				case fence == "" && strings.HasPrefix(line, "```"):
					fence = line[:strings.IndexFunc(line, func(r rune) bool { return r != '`' })]
				case fence != "":
					if strings.HasPrefix(line, fence) && strings.Trim(line, "`") == "" {
						fence = ""
					}
				case strings.HasPrefix(line, "# injected") || strings.HasPrefix(line, "- injected"):
					t.Errorf("user text starts a block: %q", line)
				case strings.ContainsAny(unescaped(outsideCode(line)), "<`&"):
					t.Errorf("raw HTML, entity or unclosed code span outside code: %q", line)
				case strings.HasPrefix(line, "|"):
					table = append(table, line)
				}
			}
			if fence != "" {
				t.Error("code block not closed")
			}
			shown := len(shownChanges(tc.c, tc.opts))
			if shown > 0 && len(table) != shown+2 {
				t.Fatalf("table has %d lines, want %d (a raw newline would split a row)", len(table), shown+2)
			}
			cols := 9 // 8 columns, 3 more when calls were compared
			if anyCalls(shownChanges(tc.c, tc.opts)) {
				cols = 12
			}
			for _, row := range table {
				// Cells are split at '|' not escaped by a backslash.
				if got := strings.Count(unescaped(row), "|"); got != cols || !strings.HasSuffix(row, " |") {
					t.Errorf("row has %d cell separators, want %d: %q", got, cols, row)
				}
			}
			for i, ch := range shownChanges(tc.c, tc.opts) {
				if !strings.Contains(table[i+2], "| "+mdText(ch.Function)+" |") {
					t.Errorf("row %d does not show %q: %q", i+1, mdText(ch.Function), table[i+2])
				}
			}
			if h := newDiffHeadline(tc.c); h.Function != "" && !strings.Contains(out, "worst: **"+mdText(h.Function)+"** "+mdText(h.Change)) {
				t.Error("headline does not name the worst regression")
			}
		})
	}
}

// lowerCamel matches the keys of the JSON document.
var lowerCamel = regexp.MustCompile(`^[a-z][a-zA-Z0-9]*$`)

func checkKeys(t *testing.T, v any, path string) {
	switch v := v.(type) {
	case map[string]any:
		for k, x := range v {
			if !lowerCamel.MatchString(k) {
				t.Errorf("key %s.%s is not lowerCamelCase", path, k)
			}
			checkKeys(t, x, path+"."+k)
		}
	case []any:
		for i, x := range v {
			checkKeys(t, x, path+"["+strconv.Itoa(i)+"]")
		}
	}
}

func TestDiffJSON(t *testing.T) {
	for _, tc := range diffCases() {
		t.Run(tc.name, func(t *testing.T) {
			out := renderDiff(t, DiffJSON{}, tc)
			var doc DiffDocument
			if err := json.Unmarshal([]byte(out), &doc); err != nil {
				t.Fatal(err)
			}
			if doc.Schema != "culprit.diff/v1" {
				t.Errorf("schema %q", doc.Schema)
			}
			want := *tc.c
			want.Changes = limitedChanges(tc.c, tc.opts)
			if cut := len(tc.c.Changes) - len(want.Changes); (doc.Omitted == nil) != (cut == 0) || cut > 0 && doc.Omitted.Count != cut {
				t.Errorf("omitted = %+v, want %d changes", doc.Omitted, cut)
			}
			gate := tc.c.Gate()
			// JSON strings are UTF-8: encoding/json writes invalid bytes
			// as \ufffd, so the hostile cases round-trip only from the
			// first decoding on (a decoded U+FFFD is then written raw).
			if !strings.HasPrefix(tc.name, "hostile") {
				if !reflect.DeepEqual(&doc, NewDiffDocument(tc.c, tc.opts)) || !reflect.DeepEqual(doc.ProducedBy, tc.opts.Provenance) {
					t.Error("the document does not decode back into the comparison")
				}
				if len(doc.Gate) != len(gate) {
					t.Errorf("gate has %d changes, want %d", len(doc.Gate), len(gate))
				}
				for i := range want.Changes {
					if doc.Changes[i].Function != want.Changes[i].Function || doc.Changes[i].Verdict != string(want.Changes[i].Verdict) {
						t.Errorf("changes[%d] = %+v", i, doc.Changes[i])
					}
				}
			}
			var again bytes.Buffer
			enc := json.NewEncoder(&again)
			enc.SetIndent("", "  ")
			if err := enc.Encode(doc); err != nil || again.String() != strings.ReplaceAll(out, `\ufffd`, "\uFFFD") {
				t.Errorf("decoding and encoding again changes the document (%v)", err)
			}
			var raw map[string]any
			if err := json.Unmarshal([]byte(out), &raw); err != nil {
				t.Fatal(err)
			}
			checkKeys(t, raw, "")
			if g, ok := raw["gate"].([]any); !ok || len(g) != len(gate) {
				t.Errorf("gate = %v, want a list of %d", raw["gate"], len(gate))
			}
			changes, _ := raw["changes"].([]any)
			for i, ch := range want.Changes {
				m := changes[i].(map[string]any)
				for key, p := range map[string]*float64{"relativeChange": ch.RelativeChange, "relLo": ch.RelLo, "relHi": ch.RelHi, "qValue": ch.QValue, "mde": ch.MDE} {
					if v, ok := m[key]; !ok || (v == nil) != (p == nil) {
						t.Errorf("changes[%d].%s = %v, want null exactly when undefined", i, key, v)
					}
				}
			}
		})
	}
}

func TestDiffCSV(t *testing.T) {
	for _, tc := range diffCases() {
		t.Run(tc.name, func(t *testing.T) {
			recs, err := csv.NewReader(strings.NewReader(renderDiff(t, DiffCSV{}, tc))).ReadAll()
			if err != nil {
				t.Fatal(err)
			}
			want := "verdict,function,identity,kind,base,candidate,change,relative_change,rel_lo,rel_hi,p_value,q_value,mde,method,basis,unit"
			// Columns are only ever added at the end.
			if !strings.HasPrefix(strings.Join(recs[0], ","), want+",") {
				t.Fatalf("header = %v", recs[0])
			}
			changes := limitedChanges(tc.c, tc.opts)
			rows := len(changes)
			if cut := len(tc.c.Changes) - len(changes); cut > 0 {
				rows++
				if last := recs[len(recs)-1]; last[0] != fmt.Sprintf("(omitted %d)", cut) {
					t.Errorf("last row %q, want (omitted %d)", last, cut)
				}
			}
			if len(recs)-1 != rows {
				t.Fatalf("%d rows, want one per change (%d)", len(recs)-1, rows)
			}
			for i, ch := range changes {
				rec := recs[i+1]
				if rec[0] != string(ch.Verdict) || rec[1] != ch.Function || rec[2] != ch.Identity || rec[15] != tc.c.Unit {
					t.Errorf("row %d = %q", i+1, rec)
				}
				for j, v := range []float64{ch.Base, ch.Candidate, ch.Change} {
					if got, err := strconv.ParseFloat(rec[4+j], 64); err != nil || got != v {
						t.Errorf("row %d column %s = %q, want %v", i+1, recs[0][4+j], rec[4+j], v)
					}
				}
				for j, p := range []*float64{ch.RelativeChange, ch.RelLo, ch.RelHi, ch.PValue, ch.QValue, ch.MDE} {
					cell := rec[7+j]
					got, err := strconv.ParseFloat(cell, 64)
					if p == nil && cell != "" || p != nil && (err != nil || got != *p) {
						t.Errorf("row %d column %s = %q, want %v (empty for null)", i+1, recs[0][7+j], cell, p)
					}
				}
			}
		})
	}
}

func TestDiffHTML(t *testing.T) {
	for _, tc := range diffCases() {
		t.Run(tc.name, func(t *testing.T) {
			out := renderDiff(t, DiffHTML{}, tc)
			if strings.Contains(out, "<script>alert") {
				t.Error("unescaped <script>alert in output")
			}
			doc, err := html.Parse(strings.NewReader(out))
			if err != nil {
				t.Fatal(err)
			}
			if doc.FirstChild == nil || doc.FirstChild.Type != html.DoctypeNode || doc.FirstChild.Data != "html" {
				t.Error("missing <!DOCTYPE html>")
			}
			var csp string
			for _, m := range find(doc, "meta", "") {
				if attr(m, "http-equiv") == "Content-Security-Policy" {
					csp = attr(m, "content")
				}
			}
			scripts := find(doc, "script", "")
			if len(scripts) != 1 {
				t.Fatalf("%d <script> elements, want 1", len(scripts))
			}
			sum := sha256.Sum256([]byte(text(scripts[0])))
			if !strings.HasPrefix(csp, "default-src 'none';") || !strings.Contains(csp, "'sha256-"+base64.StdEncoding.EncodeToString(sum[:])+"'") {
				t.Errorf("Content-Security-Policy %q does not allow exactly the page's script", csp)
			}
			for n := range doc.Descendants() {
				switch n.Data {
				case "link", "img", "iframe", "object", "embed", "base", "form", "image", "use":
					t.Errorf("unexpected <%s> element", n.Data)
				}
				for _, a := range n.Attr {
					v := strings.ToLower(strings.TrimSpace(a.Val))
					if strings.HasPrefix(a.Key, "on") || a.Key == "style" || strings.HasPrefix(v, "http://") ||
						strings.HasPrefix(v, "https://") || strings.HasPrefix(v, "//") || strings.HasPrefix(v, "javascript:") {
						t.Errorf("<%s %s=%q> could act or fetch", n.Data, a.Key, a.Val)
					}
				}
			}
			changes := shownChanges(tc.c, tc.opts)
			chart := byID(doc, "change-chart")
			if len(changes) == 0 {
				if chart != nil {
					t.Error("chart drawn without changes")
				}
				return
			}
			if chart == nil || chart.Namespace != "svg" {
				t.Fatal("no change chart parsed as SVG")
			}
			bars, fns := find(chart, "rect", "bar "), find(byID(doc, "changes-table"), "td", "fn")
			if len(bars) != len(changes) || len(fns) != len(changes) {
				t.Fatalf("%d bars and %d table rows, want one per shown change (%d)", len(bars), len(fns), len(changes))
			}
			zero, _ := strconv.ParseFloat(attr(find(chart, "line", "axis")[0], "x1"), 64)
			perUnit := 0.0 // bar width per unit of relative change, one scale for all
			for i, ch := range changes {
				if got := text(fns[i]); got != clean(ch.Function) {
					t.Errorf("table row %d shows %q, want %q", i+1, got, clean(ch.Function))
				}
				if got := attr(bars[i], "class"); got != "bar v-"+string(ch.Verdict) {
					t.Errorf("bar %d class %q", i+1, got)
				}
				x, _ := strconv.ParseFloat(attr(bars[i], "x"), 64)
				w := width(bars[i])
				rel := ch.RelativeChange
				switch {
				case rel == nil:
				case *rel > 0 && math.Abs(x-zero) > 0.1, *rel < 0 && math.Abs(x+w-zero) > 0.15:
					t.Errorf("bar %d (%+.3f) spans %.1f..%.1f, zero at %.1f", i+1, *rel, x, x+w, zero)
				case math.Abs(*rel) >= 0.05 && perUnit == 0:
					perUnit = w / math.Abs(*rel)
				case math.Abs(*rel) >= 0.05 && math.Abs(w-perUnit*math.Abs(*rel)) > 0.2:
					t.Errorf("bar %d is %.1f wide, want %.1f", i+1, w, perUnit*math.Abs(*rel))
				}
			}
			budget := find(chart, "line", "budget")
			if len(budget) != 2 {
				t.Fatalf("%d budget lines, want 2", len(budget))
			}
			if x, _ := strconv.ParseFloat(attr(budget[1], "x1"), 64); perUnit > 0 && math.Abs(x-zero-perUnit*tc.c.Budget.Relative) > 0.2 {
				t.Errorf("budget line at %.1f, want %.1f", x, zero+perUnit*tc.c.Budget.Relative)
			}
		})
	}
}
