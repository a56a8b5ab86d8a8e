#!/usr/bin/env bash
# record.sh: run a few hundred real statements through a real PostgreSQL
# server and record the group (queryid) pg_stat_statements puts each in.
#
# TestFingerprintPostgreSQLGroups (attribute/pgss_test.go) reads the
# result, pg15.jsonl, with no PostgreSQL needed at test time.
#
# Needs the PostgreSQL server from Debian's packages (PostgreSQL 15 on
# Debian 12: apt-get install -y postgresql postgresql-contrib). Run as
# root or as the postgres user, from anywhere:
#
#     bash attribute/testdata/pgss/record.sh
#
# It makes a throwaway cluster in a temporary directory, listening on
# 127.0.0.1 and a socket in that directory only, loads pg_stat_statements,
# and for every statement: resets pg_stat_statements, runs the statement,
# and writes one JSON line {"queryid", "normalized", "statement"}: the
# queryid and normalised text pg_stat_statements recorded for it, and the
# statement as sent. The first line names the server version.
set -euo pipefail

here=$(cd "$(dirname "$0")" && pwd)
out=$here/pg15.jsonl
bindir=$(ls -d /usr/lib/postgresql/*/bin | sort -V | tail -1)
port=${PGSS_PORT:-54329}
work=$(mktemp -d)
trap 'runas "$bindir/pg_ctl" -D "$work/data" -m immediate stop >/dev/null 2>&1 || true; rm -rf "$work"' EXIT

runas() {
	if [ "$(id -u)" = 0 ]; then runuser -u postgres -- "$@"; else "$@"; fi
}

[ "$(id -u)" = 0 ] && chown postgres "$work"
runas "$bindir/initdb" -D "$work/data" -A trust -U postgres >/dev/null
runas "$bindir/pg_ctl" -D "$work/data" -l "$work/log" -w start -o "-p $port -c listen_addresses=127.0.0.1 -k $work \
	-c shared_preload_libraries=pg_stat_statements -c compute_query_id=on \
	-c pg_stat_statements.track=top -c pg_stat_statements.track_utility=off" >/dev/null

psql() { runas "$bindir/psql" -h "$work" -p "$port" -U postgres -d postgres -X -v ON_ERROR_STOP=1 -q -At "$@"; }

psql <<'SQL'
CREATE EXTENSION pg_stat_statements;
CREATE TABLE plants (id int PRIMARY KEY, name text, genus text, price numeric(8,2), planted date, hardy boolean);
CREATE TABLE orders (id serial PRIMARY KEY, plant_id int, qty int, note text);
INSERT INTO plants SELECT g, 'plant ' || g, 'Rosa', g * 1.5, DATE '2024-01-01' + g, g % 2 = 0 FROM generate_series(1, 200) g;
SQL

# The statements: each call of q adds one. Families of statements that
# differ in literals, IN-list length, VALUES rows, comments, case, casts,
# signs, quoting and white space.
script=$work/run.sql
: >"$script"
q() {
	printf 'SELECT pg_stat_statements_reset() \\g /dev/null\n%s \\g /dev/null\n' "$1" >>"$script"
	printf "SELECT json_build_object('queryid', queryid::text, 'normalized', query, 'statement', \$culprit\$%s\$culprit\$) FROM pg_stat_statements WHERE query NOT LIKE '%%pg_stat_statements%%';\n" "$1" >>"$script"
}

# qp NAME QUERY ARGS runs QUERY with bind parameters: PREPARE makes the
# query tree a driver's Parse message makes, EXECUTE binds ARGS. The
# statement recorded is QUERY, as a driver would send it.
qp() {
	printf 'SELECT pg_stat_statements_reset() \\g /dev/null\nPREPARE %s AS %s \\g /dev/null\nEXECUTE %s(%s) \\g /dev/null\nDEALLOCATE %s \\g /dev/null\n' "$1" "$2" "$1" "$3" "$1" >>"$script"
	printf "SELECT json_build_object('queryid', queryid::text, 'normalized', query, 'statement', \$culprit\$%s\$culprit\$) FROM pg_stat_statements WHERE query NOT LIKE '%%pg_stat_statements%%';\n" "$2" >>"$script"
}

# Literal values, signs and numbers of one type.
for n in 1 2 3 7 42 199 0 -1 -17 2147483647; do
	q "SELECT name, price FROM plants WHERE id = $n"
	q "SELECT name FROM plants WHERE id = $n AND hardy = true"
	q "UPDATE plants SET price = price + 1 WHERE id = $n"
	q "DELETE FROM orders WHERE plant_id = $n"
	q "SELECT id FROM plants WHERE id > $n ORDER BY id LIMIT 5 OFFSET $((n < 0 ? 0 : n % 7))"
done
for p in 1.5 -2.25 100.00 0.01 -0.5 3e2; do
	q "SELECT id FROM plants WHERE price > $p"
	q "UPDATE plants SET price = $p WHERE genus = 'Rosa' AND id = 3"
done
# Strings, with quotes inside, escapes and dollar quotes.
for s in "'Rosa'" "'O''Brien''s fern'" "'it''s'" "E'tab\\there'" "\$\$dollar 'quoted'\$\$" "\$t\$tagged\$t\$" "''" "'ünïcödé'"; do
	q "SELECT id FROM plants WHERE genus = $s"
	q "SELECT count(*) FROM plants WHERE name LIKE $s"
	q "INSERT INTO orders (plant_id, qty, note) VALUES (1, 2, $s)"
done
# Case and white space.
for v in 5 9; do
	q "SELECT name FROM plants WHERE id = $v"
	q "select name from plants where id = $v"
	q "Select Name From Plants Where ID = $v"
	q "SELECT   name
	FROM plants
	WHERE  id=$v"
done
# Comments.
for v in 4 8; do
	q "/* route=/plants/{id} */ SELECT name FROM plants WHERE id = $v"
	q "SELECT name FROM plants WHERE id = $v /* trailing */"
	q "SELECT name /* inside */ FROM plants WHERE id = $v"
	q "-- a line comment
SELECT name FROM plants WHERE id = $v"
	q "SELECT name FROM plants -- after
WHERE id = $v"
done
# Casts and typed literals.
for v in 6 11; do
	q "SELECT name FROM plants WHERE id = '$v'"
	q "SELECT name FROM plants WHERE id = '$v'::int"
	q "SELECT name FROM plants WHERE id = CAST('$v' AS integer)"
	q "SELECT name FROM plants WHERE id = $v::int"
	q "SELECT id FROM plants WHERE planted > '2024-02-0$((v % 9))'"
	q "SELECT id FROM plants WHERE planted > '2024-02-0$((v % 9))'::date"
	q "SELECT id FROM plants WHERE planted > DATE '2024-02-0$((v % 9))'"
done
for b in true false TRUE; do
	q "SELECT count(*) FROM plants WHERE hardy = $b"
done
# IN lists of different lengths.
list=""
for n in $(seq 1 24); do
	list="${list:+$list, }$((n * 3))"
	q "SELECT name FROM plants WHERE id IN ($list)"
	q "SELECT count(*) FROM plants WHERE genus = 'Rosa' AND id NOT IN ($list)"
done
for l in "'Rosa'" "'Rosa', 'Malus'" "'Rosa', 'Malus', 'Prunus'"; do
	q "SELECT id FROM plants WHERE genus IN ($l)"
done
# VALUES rows.
rows=""
for n in $(seq 1 12); do
	rows="${rows:+$rows, }($n, $((n + 1)), 'note $n')"
	q "INSERT INTO orders (plant_id, qty, note) VALUES $rows"
done
rows=""
for n in $(seq 1 6); do
	rows="${rows:+$rows, }($n, $n)"
	q "SELECT * FROM (VALUES $rows) AS v(a, b)"
done
# More shapes with literals: joins, ranges, updates of several columns.
for n in 2 5 -8 13 21 34 55 89; do
	q "SELECT p.name, o.qty FROM plants p JOIN orders o ON o.plant_id = p.id WHERE p.id = $n AND o.qty > ${n#-}"
	q "SELECT name FROM plants WHERE id BETWEEN $n AND $((n + 10))"
	q "UPDATE plants SET name = 'renamed $n', price = $n.5, hardy = false WHERE id = $n"
	q "SELECT name FROM plants WHERE genus = 'Rosa' AND price < $n ORDER BY price DESC LIMIT 3"
	q "SELECT coalesce(max(qty), 0) FROM orders WHERE plant_id = $n"
	q "DELETE FROM orders WHERE qty < $n AND note = 'n$n'"
	q "select NAME from PLANTS where ID = $n and GENUS = 'rosa'"
	q "SELECT name FROM plants WHERE id = $n /* request $n */"
done
# Literals of different types where one column is compared: PostgreSQL
# tells the types apart (int4 = int4 against numeric = numeric).
for v in 2 2.5 3 3.75; do
	q "SELECT name FROM plants WHERE price > $v"
	q "SELECT name FROM plants WHERE id = $v"
done
# Bind parameters.
qp s1 'SELECT name FROM plants WHERE id = $1' 5
qp s2 'select name from plants where id = $1' 9
qp s3 'SELECT name FROM plants WHERE id = $1 AND genus = $2' "5, 'Rosa'"
qp s4 'SELECT name FROM plants WHERE id IN ($1, $2, $3)' '1, 2, 3'
qp s5 'UPDATE plants SET price = $1 WHERE id = $2' '2.5, 3'
qp s6 'UPDATE plants  SET price = $1  WHERE id = $2 /* retry */' '4.5, 3'
# Statements of different shapes: never one group.
q "SELECT name FROM plants WHERE id = 1 OR id = 2"
q "SELECT name FROM plants WHERE genus = 'Rosa' ORDER BY name"
q "SELECT name FROM plants WHERE genus = 'Rosa' ORDER BY name DESC"
q "SELECT genus, count(*) FROM plants GROUP BY genus"
q "SELECT genus, count(*) FROM plants GROUP BY genus HAVING count(*) > 3"
q "SELECT p.name, o.qty FROM plants p JOIN orders o ON o.plant_id = p.id WHERE p.id = 5"
q "SELECT p.name, o.qty FROM plants p LEFT JOIN orders o ON o.plant_id = p.id WHERE p.id = 5"
q "SELECT name FROM plants WHERE id = 1 AND genus IS NULL"
q "SELECT name FROM plants WHERE id = 1 AND genus IS NOT NULL"
q "SELECT name, genus FROM plants WHERE id = 1"

{
	psql -c "SELECT json_build_object('server', version())"
	psql -f "$script"
} >"$out.tmp"
mv "$out.tmp" "$out"
echo "wrote $(($(wc -l <"$out") - 1)) statements to $out" >&2
