package attribute

import (
	"errors"
	"strings"
	"testing"
)

func TestDomainsRollup(t *testing.T) {
	d, err := ParseDomainsFile("d.json", strings.NewReader(`{"domains": [
  {"name": "catalog", "prefixes": ["example.com/shop/catalog."]},
  {"name": "orders", "regexps": ["^example\\.com/shop/(orders|checkout)\\."]}
]}`))
	if err != nil {
		t.Fatal(err)
	}
	r := &Result{Causes: []*Cause{
		{Function: "example.com/shop/catalog.(*Repo).Get", Cost: 50, Database: 50, Share: 0.5},
		{Function: "example.com/shop/orders.Save", Cost: 20, Database: 20, Share: 0.2},
		{Function: "example.com/shop/checkout.Quote", Cost: 15, Network: 15, Share: 0.15},
		{Function: "example.com/shop/misc.Helper", Cost: 10, Database: 10, Share: 0.1},
		{Function: NoAppFramePrefix + "example.com/shop/catalog.Handler", NoAppFrame: true, Cost: 5, Network: 5, Share: 0.05},
	}}
	d.Rollup(r)
	want := []DomainTotal{
		{Domain: "catalog", Cost: 50, Database: 50, Share: 0.5, Causes: 1},
		{Domain: "orders", Cost: 35, Database: 20, Network: 15, Share: 0.35, Causes: 2},
		{Domain: Unassigned, Cost: 15, Database: 10, Network: 5, Share: 0.15, Causes: 2},
	}
	if len(r.Domains) != len(want) {
		t.Fatalf("domains = %+v", r.Domains)
	}
	for i, w := range want {
		g := r.Domains[i]
		if g.Domain != w.Domain || g.Cost != w.Cost || g.Database != w.Database || g.Network != w.Network || g.Causes != w.Causes || abs(g.Share-w.Share) > 1e-12 {
			t.Errorf("domain %d = %+v, want %+v", i, g, w)
		}
	}
	if r.Causes[4].Domain != Unassigned {
		t.Error("a no-application-frame bucket must stay unassigned")
	}
}

func TestDomainsFileErrors(t *testing.T) {
	tests := []struct {
		name, input string
		line, col   int
		want        string
	}{
		{"no name", "{\"domains\": [\n  {\"prefixes\": [\"a\"]}\n]}", 2, 3, "has no name"},
		{"duplicate", "{\"domains\": [{\"name\": \"a\", \"prefixes\": [\"x\"]},\n {\"name\": \"a\", \"prefixes\": [\"y\"]}]}", 2, 2, "defined twice"},
		{"no patterns", "{\"domains\": [{\"name\": \"a\"}]}", 1, 14, "needs"},
		{"bad regexp", "{\"domains\": [{\"name\": \"a\", \"regexps\": [\"(\"]}]}", 1, 14, "bad regexp"},
		{"syntax", "{\"domains\": [\n  {\"name\": }]}", 2, 12, "invalid character"},
		{"unknown field", "{\"domain\": []}", 1, 2, "unknown field"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			_, err := ParseDomainsFile("d.json", strings.NewReader(tt.input))
			var fe *RulesFileError
			if !errors.As(err, &fe) || fe.Line != tt.line || fe.Column != tt.col || !strings.Contains(err.Error(), tt.want) {
				t.Errorf("err = %v, want d.json:%d:%d … %q", err, tt.line, tt.col, tt.want)
			}
		})
	}
}

func FuzzDomainsFile(f *testing.F) {
	f.Add(`{"domains": [{"name": "a", "prefixes": ["x."]}, {"name": "b", "regexps": ["^y"]}]}`)
	f.Add(`{"domains": []}`)
	f.Add(`{"domains": [{"name": "", "prefixes": []}]}`)
	f.Fuzz(func(t *testing.T, in string) {
		d, err := ParseDomainsFile("f.json", strings.NewReader(in))
		if err != nil {
			if err.Error() == "" {
				t.Fatal("empty error")
			}
			return
		}
		// Every function gets exactly one domain, the same from the same
		// file read again.
		again, err := ParseDomainsFile("f.json", strings.NewReader(in))
		if err != nil {
			t.Fatalf("second read fails: %v", err)
		}
		for _, fn := range []string{"x.a", "y", "", in} {
			if d.Of(fn) == "" || again.Of(fn) != d.Of(fn) {
				t.Fatalf("Of(%q) = %q, then %q from the same file", fn, d.Of(fn), again.Of(fn))
			}
		}
	})
}
