// Package statement fingerprints database statements: literals become
// placeholders, comments are dropped, keywords and whitespace folded, so
// that statements that differ only in their values group together and no
// value a user sent (personal data) is kept or shown.
//
// It is a leaf package: the readers in traces call AppendText while they
// decode spans, so that raw literals never stay in memory, and attribute
// uses Of for statements read without it. The rules follow PostgreSQL's
// own grouping (pg_stat_statements), checked in pgss_test.go against
// statements recorded from a real server; where they deliberately merge
// more, the README says so.
package statement
