package report

import (
	"bytes"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"unicode/utf8"

	"github.com/culprithq/culprit/attribute"
)

func TestTextColorKeepsColumns(t *testing.T) {
	for _, r := range []*attribute.Result{greenhouse(), hostileResult()} {
		var plain, col bytes.Buffer
		if err := (Text{}).Render(&plain, r, Options{}); err != nil {
			t.Fatal(err)
		}
		if err := (Text{}).Render(&col, r, Options{Color: true}); err != nil {
			t.Fatal(err)
		}
		if !strings.Contains(col.String(), "\x1b[") {
			t.Fatal("no colour with Color set")
		}
		if got := ansiRe.ReplaceAllString(col.String(), ""); got != plain.String() {
			t.Errorf("coloured output differs from plain once codes are removed:\n%s\n---\n%s", got, plain.String())
		}
		if strings.ContainsAny(plain.String(), "\x00\x1b\r") {
			t.Error("control characters from input reached the terminal")
		}
	}
}

func TestShorten(t *testing.T) {
	tests := []struct {
		in   string
		max  int
		want string
	}{
		{"example.com/greenhouse/catalog.(*Repo).VarietyByID", 60, "example.com/greenhouse/catalog.(*Repo).VarietyByID"},
		{"example.com/greenhouse/catalog.(*Repo).VarietyByID", 32, "…/catalog.(*Repo).VarietyByID"},
		{"example.com/greenhouse/catalog.(*Repo).VarietyByID", 12, "…VarietyByID"},
		{"example.com/greenhouse/catalog.(*Repo).VarietyByID", 24, "…(*Repo).VarietyByID"},
		// Never mid-word: the tail starts at a name boundary.
		{"example.com/greenhouse/payments.(*Service).Authorize", 21, "…(*Service).Authorize"},
		{"example.com/greenhouse/payments.(*Service).Authorize", 14, "…Authorize"},
		{"example.com/greenhouse/payments.AuthorizeEveryPendingPayment", 12, "AuthorizeEv…"},
		// The no-application bucket keeps its label.
		{"(no application frame) net/http.HandlerFunc.ServeHTTP", 40, "(no application frame) …ServeHTTP"},
		{"(no application frame) net/http.HandlerFunc.ServeHTTP", 24, "(no application frame) …"},
		// The package path ends at the last '/' before the generic shape.
		{"example.com/app/store.Map[go.shape.struct { a/b.C int }]", 45, "…/store.Map[go.shape.struct { a/b.C int }]"},
	}
	for _, tt := range tests {
		got := Shorten(tt.in, tt.max)
		if got != tt.want {
			t.Errorf("Shorten(%q, %d) = %q, want %q", tt.in, tt.max, got, tt.want)
		}
		if n := len([]rune(got)); n > tt.max {
			t.Errorf("Shorten(%q, %d) has %d runes", tt.in, tt.max, n)
		}
	}
}

// TestTextWidth renders the text reports at 80 and 200 columns against
// golden files and checks that no line is longer than the width (counted
// in runes, as a terminal shows them).
func TestTextWidth(t *testing.T) {
	for _, width := range []int{80, 200} {
		for _, g := range []struct {
			name   string
			render func(w *bytes.Buffer) error
		}{
			{"rank-spans", func(w *bytes.Buffer) error { return Text{}.Render(w, greenhouse(), Options{Width: width}) }},
			{"rank-hostile", func(w *bytes.Buffer) error { return Text{}.Render(w, hostileResult(), Options{Width: width}) }},
			{"diff", func(w *bytes.Buffer) error { return DiffText{}.RenderDiff(w, nurseryDiff(), Options{Width: width}) }},
		} {
			file := fmt.Sprintf("%s.%d.txt", g.name, width)
			t.Run(file, func(t *testing.T) {
				var b bytes.Buffer
				if err := g.render(&b); err != nil {
					t.Fatal(err)
				}
				for i, line := range strings.Split(b.String(), "\n") {
					if n := utf8.RuneCountInString(line); n > width {
						t.Errorf("line %d has %d runes, more than %d: %q", i+1, n, width, line)
					}
				}
				checkGolden(t, file, b.String())
			})
		}
	}
}

// checkGolden compares got with testdata/file (rewritten with -update).
func checkGolden(t *testing.T, file, got string) {
	t.Helper()
	path := filepath.Join("testdata", file)
	if *update {
		if err := os.WriteFile(path, []byte(got), 0o644); err != nil {
			t.Fatal(err)
		}
	}
	want, err := os.ReadFile(path)
	if err != nil {
		t.Fatalf("%v (run go test -update to create it)", err)
	}
	if got != string(want) {
		t.Errorf("output differs from %s (go test -update rewrites it):\n%s", path, got)
	}
}

// TestHTMLChartsTopTwenty: with more than 20 root causes the rank chart
// draws 19 of them and one "others" bar holding the rest, and the diff
// chart draws the 20 most severe changes; the tables list all.
func TestHTMLChartsTopTwenty(t *testing.T) {
	r := greenhouse()
	base := r.Causes[0]
	r.Causes = nil
	for i := range 30 {
		c := *base
		c.Function = fmt.Sprintf("example.com/greenhouse/bed%02d.Water", i)
		c.Share = 1.0 / 30
		r.Causes = append(r.Causes, &c)
	}
	ch := newCauseChart(r, r.Causes)
	if len(ch.Bars) != 20 || ch.Bars[19].Name != "11 others" || ch.Bars[19].Label != Percent(11.0/30) {
		t.Errorf("%d bars, last %q %q; want 20 ending with 11 others at %s", len(ch.Bars), ch.Bars[len(ch.Bars)-1].Name,
			ch.Bars[len(ch.Bars)-1].Label, Percent(11.0/30))
	}
	var b bytes.Buffer
	if err := (HTML{}).Render(&b, r, Options{}); err != nil {
		t.Fatal(err)
	}
	if n := strings.Count(b.String(), `<td class="fn">example.<wbr>com/<wbr>greenhouse/<wbr>bed`); n != 30 {
		t.Errorf("table has %d rows, want 30", n)
	}
}
