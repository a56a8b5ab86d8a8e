package traces

import (
	"strings"
	"testing"
)

// Literal values in span text become "?"; names of code, hosts, path
// templates and query keys stay. URL parts as defined by RFC 3986
// (scheme, user information, host, port, path, query, fragment).
func TestRedactText(t *testing.T) {
	cases := []struct{ in, want string }{
		{"GET /reports/monthly", "GET /reports/monthly"},
		{"GET /orders/12345/items", "GET /orders/?/items"},
		{"GET /users/alice@example.org?email=bob%40example.org&page=2", "GET /users/??email=?&page=?"},
		{"GET https://bob:pw@api.example.net:8443/v1/cards/4111111111111111?x=1#frag", "GET https://api.example.net:8443/v1/cards/??x=?"},
		{"https://api.example.net/v2/items/550e8400-e29b-41d4-a716-446655440000", "https://api.example.net/v2/items/?"},
		{"notify alice@example.org about card 4111-1111-1111-1111", "notify ? about card ?"},
		{"lookup 'Alice Liddell' and \"x \\\" y\"", "lookup ? and ?"},
		{"main.(*server).handle.func1", "main.(*server).handle.func1"},
		{"sha256 v2 func1", "sha256 v2 func1"},
		{"trace 5b8efff798038103d269b633813fc60c", "trace ?"},
		{"http://[::1", "?"},
		{"", ""},
		{"a 1", "a ?"},
		{"1 a", "? a"},
		{"x/1/", "x/?/"},
		{"/", "/"},
		{"a  b 7", "a  b ?"},
	}
	for _, c := range cases {
		if got := redactText(c.in); got != c.want {
			t.Errorf("redactText(%q) = %q, want %q", c.in, got, c.want)
		}
	}
	for in, want := range map[string]string{
		"alice@db.example.net": "db.example.net", "db.example.net:5432": "db.example.net:5432",
		"10.0.0.5:5432": "10.0.0.5:5432", "[::1]:5432": "[::1]:5432", "4111111111111111:5432": "?:5432",
		"4111111111111111": "?", "u@4111111111111111": "?",
	} {
		if got := redactPeer(in); got != want {
			t.Errorf("redactPeer(%q) = %q, want %q", in, got, want)
		}
	}
}

// Redacting a name that holds no literal allocates nothing: it runs for
// every span.
func TestRedactTextPlainNoAlloc(t *testing.T) {
	for _, s := range []string{"GET /reports/monthly", "GET /api/v2/pools/pool-a1 func1"} {
		if n := testing.AllocsPerRun(100, func() { _ = redactText(s) }); n != 0 {
			t.Errorf("%q: %v allocations", s, n)
		}
	}
}

// The memo of recent redactions answers as the redactor does, whichever
// of its texts comes back and whatever it had to forget.
func TestLastRedacted(t *testing.T) {
	var m lastRedacted
	texts := []string{"GET /orders/1", "db:5432", "", "GET /orders/1", "u@h", "a 2", "b 3", "c 4", "GET /orders/1", "db:5432", "a 2"}
	for round := range 3 {
		for _, s := range texts {
			if got, want := m.get(s, redactText), redactText(s); got != want {
				t.Errorf("round %d: get(%q) = %q, want %q", round, s, got, want)
			}
		}
	}
}

// FuzzRedactText: any text redacts without panicking, and no '@' (of an
// e-mail address or of URL user information) survives.
func FuzzRedactText(f *testing.F) {
	for _, s := range []string{"GET https://bob:pw@api.example.net/v1/cards/4111?email=a%40b.c#x",
		"notify alice@example.org", "/users/alice@example.org?x=1", "'unclosed @", "x://@", "http://[::1]:80/@"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		if out := redactText(s); strings.Contains(out, "@") {
			t.Errorf("redactText(%q) = %q keeps an @", s, out)
		}
	})
}

// BenchmarkRedactText is the redaction a typical span pays: its function,
// file, service and route, none of which change.
func BenchmarkRedactText(b *testing.B) {
	names := []string{"example.com/greenhouse/catalog.(*Store).List.func1", "/src/greenhouse/catalog/store.go",
		"greenhouse-web", "/plants/{id}"}
	b.ReportAllocs()
	for b.Loop() {
		for _, s := range names {
			_ = redactText(s)
		}
	}
}

// Database span names are names unless they hold literals or
// comparisons: "pg-pool.connect" stays as it is, a whole statement in the
// name goes through Options.Statement (here a marker, standing in for
// the fingerprint), and --show-literals keeps everything.
func TestRedactDatabaseSpanNames(t *testing.T) {
	const tr = "5b8efff798038103d269b633813fc60c"
	db := func(id, name string) tspan {
		return tspan{trace: tr, id: id, parent: "a000000000000001", name: name, kind: 3, start: 2, end: 3,
			attrs: []attr{str("db.system.name", "postgresql")}}
	}
	data := lines(line(tres{"svc", []tspan{
		{trace: tr, id: "a000000000000001", name: "GET /x", kind: 2, start: 1, end: 9},
		db("a000000000000002", "pg-pool.connect"),
		db("a000000000000003", "SELECT orders"),
		db("a000000000000004", "SELECT * FROM users WHERE email = 'alice@example.org'"),
		db("a000000000000005", "UPDATE t SET a = b"),
	}}))
	mark := func(dst []byte, system, raw string) []byte { return append(append(dst, "FP:"...), raw...) }
	functions := func(opts Options) map[string]bool {
		src := mustCollect(t, opts, input{"x.jsonl", data})
		out := map[string]bool{}
		for _, f := range src.Frames {
			out[f.Function] = true
		}
		return out
	}
	got := functions(Options{Statement: mark})
	for _, want := range []string{"pg-pool.connect", "SELECT orders", "FP:SELECT * FROM users WHERE email = ?", "FP:UPDATE t SET a = b"} {
		if !got[want] {
			t.Errorf("no frame %q in %v", want, got)
		}
	}
	if raw := functions(Options{Statement: mark, ShowLiterals: true}); !raw["SELECT * FROM users WHERE email = 'alice@example.org'"] {
		t.Errorf("ShowLiterals changed a name: %v", raw)
	}
}
