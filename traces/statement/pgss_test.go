package statement

import (
	"bufio"
	"encoding/json"
	"os"
	"regexp"
	"sort"
	"strings"
	"testing"
)

// pgssRecord is one line of testdata/pgss/pg15.jsonl: a statement as sent
// to PostgreSQL and the group pg_stat_statements put it in.
type pgssRecord struct {
	QueryID    string `json:"queryid"`
	Normalized string `json:"normalized"`
	Statement  string `json:"statement"`
}

// TestFingerprintPostgreSQLGroups checks statement fingerprints against
// PostgreSQL's own normalisation: pg_stat_statements of PostgreSQL 15.18
// (Debian 15.18-0+deb12u1), which recorded the group (queryid) of each of
// 278 statements run through a real server by testdata/pgss/record.sh,
// with literals or with bind parameters.
//
//   - Statements PostgreSQL puts in one group get one fingerprint (literal
//     values, comments, case, white space, casts of literals, typed
//     literals, an IN list of one element and the equality it means).
//   - Statements of different PostgreSQL groups share a fingerprint only
//     where the README says culprit merges them: IN lists of two or more
//     elements whatever their length, repeated VALUES rows whatever their
//     number, literals of different types (culprit does not know column
//     types), and a bind parameter against a literal in its place. Each
//     merged group's normalised text, as PostgreSQL wrote it, must become
//     the same once those four are undone.
func TestFingerprintPostgreSQLGroups(t *testing.T) {
	f, err := os.Open("testdata/pgss/pg15.jsonl")
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	sc := bufio.NewScanner(f)
	sc.Buffer(nil, 1<<20)
	var server struct{ Server string }
	if !sc.Scan() || json.Unmarshal(sc.Bytes(), &server) != nil || !strings.HasPrefix(server.Server, "PostgreSQL 15.") {
		t.Fatalf("first line must name the PostgreSQL server: %q", sc.Text())
	}
	groups := map[string][]pgssRecord{}     // queryid → statements
	byPrint := map[string]map[string]bool{} // fingerprint text → queryids
	n := 0
	for sc.Scan() {
		var r pgssRecord
		if err := json.Unmarshal(sc.Bytes(), &r); err != nil || r.QueryID == "" || r.Statement == "" {
			t.Fatalf("line %d: %v %q", n+2, err, sc.Text())
		}
		n++
		groups[r.QueryID] = append(groups[r.QueryID], r)
		fp := Of("postgresql", r.Statement).Text
		if byPrint[fp] == nil {
			byPrint[fp] = map[string]bool{}
		}
		byPrint[fp][r.QueryID] = true
	}
	if err := sc.Err(); err != nil {
		t.Fatal(err)
	}
	if n < 200 {
		t.Fatalf("only %d statements recorded", n)
	}
	t.Logf("%s: %d statements in %d groups; culprit: %d fingerprints", server.Server, n, len(groups), len(byPrint))

	multi := 0
	for id, rs := range groups {
		if len(rs) > 1 {
			multi++
		}
		want := Of("postgresql", rs[0].Statement)
		for _, r := range rs[1:] {
			if got := Of("postgresql", r.Statement); got != want {
				t.Errorf("PostgreSQL group %s (%s) splits:\n  %q → %q\n  %q → %q", id, rs[0].Normalized, rs[0].Statement, want.Text, r.Statement, got.Text)
			}
		}
	}
	if multi < 20 {
		t.Errorf("only %d PostgreSQL groups hold more than one statement: the fixture checks too little", multi)
	}

	var texts []string
	for fp := range byPrint {
		texts = append(texts, fp)
	}
	sort.Strings(texts)
	merged := 0
	for _, fp := range texts {
		ids := byPrint[fp]
		if len(ids) < 2 {
			continue
		}
		merged++
		var first, firstID string
		for id := range ids {
			c := pgCanonical(groups[id][0].Normalized)
			if first == "" {
				first, firstID = c, id
			} else if c != first {
				t.Errorf("fingerprint %q merges PostgreSQL groups that differ in more than the documented ways:\n  %s: %s\n  %s: %s",
					fp, firstID, groups[firstID][0].Normalized, id, groups[id][0].Normalized)
			}
		}
	}
	if merged == 0 {
		t.Error("no merged groups: the fixture no longer exercises the documented merges")
	}
}

var (
	pgParamRe   = regexp.MustCompile(`\$[0-9]+`)
	pgInListRe  = regexp.MustCompile(`(?i)\bIN \(\$(?:, \$)+\)`)
	pgRowsRe    = regexp.MustCompile(`\((?:\$, )*\$\)(?:, \((?:\$, )*\$\))+`)
	pgCommentRe = regexp.MustCompile(`/\*.*?\*/|--[^\n]*`)
	pgSpaceRe   = regexp.MustCompile(`\s+`)
	pgPrepareRe = regexp.MustCompile(`^prepare \w+ as `)
)

// pgCanonical undoes in a normalised text of pg_stat_statements what
// culprit deliberately merges: parameter numbers (PostgreSQL numbers
// them, so the length of an earlier list shifts them), IN lists of two or
// more elements, repeated VALUES rows of one arity, and the PREPARE … AS
// that a statement run with bind parameters is recorded under (the
// parameters themselves read $n like literals). Literal types are already
// invisible in the text. It also folds what pg_stat_statements keeps of
// the first statement seen (comments, case, spacing).
func pgCanonical(s string) string {
	s = pgCommentRe.ReplaceAllString(s, " ")
	s = strings.TrimSpace(pgSpaceRe.ReplaceAllString(strings.ToLower(s), " "))
	s = pgPrepareRe.ReplaceAllString(s, "")
	s = pgParamRe.ReplaceAllString(s, "$")
	s = pgInListRe.ReplaceAllString(s, "in (…)")
	return pgRowsRe.ReplaceAllStringFunc(s, func(rows string) string {
		first, _, _ := strings.Cut(rows, "), (")
		for _, r := range strings.Split(rows, "), (") {
			if strings.Trim(r, "()") != strings.Trim(first, "()") {
				return rows // rows of different arity stay apart
			}
		}
		return first + ")"
	})
}
