package report

import (
	"bytes"
	"strings"
	"testing"

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
