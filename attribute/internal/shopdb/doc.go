// Package shopdb is a small invented service (a plant shop) for the
// tests of the attribution on real profiles: its packages reach SQLite
// through a shared SQL helper (package sqldb) called from several
// packages, and through a query function that only its own package
// calls. Nothing outside the tests imports it.
package shopdb

import (
	"context"
	"database/sql"
	"fmt"

	"github.com/culprithq/culprit/attribute/internal/shopdb/orders"
	"github.com/culprithq/culprit/attribute/internal/shopdb/plants"
	"github.com/culprithq/culprit/attribute/internal/shopdb/sqldb"
)

// Open creates the shop's tables in a fresh database and fills them.
func Open(ctx context.Context, db *sql.DB) (*sqldb.DB, error) {
	for _, q := range []string{
		"CREATE TABLE plants (id INTEGER PRIMARY KEY, name TEXT, stock INTEGER)",
		"CREATE TABLE order_lines (order_id INTEGER, plant_id INTEGER, qty INTEGER)",
	} {
		if _, err := db.ExecContext(ctx, q); err != nil {
			return nil, err
		}
	}
	for i := 1; i <= 40; i++ {
		if _, err := db.ExecContext(ctx, "INSERT INTO plants VALUES (?, ?, ?)", i, fmt.Sprintf("plant %d", i), i%7); err != nil {
			return nil, err
		}
		if _, err := db.ExecContext(ctx, "INSERT INTO order_lines VALUES (?, ?, ?)", i%10, i, 1+i%3); err != nil {
			return nil, err
		}
	}
	return sqldb.New(db), nil
}

// Serve runs rounds of requests: each reads plants, names and order lines
// through the helper and counts orders with the orders package's own
// query. It returns the number of rows read.
func Serve(ctx context.Context, d *sqldb.DB, rounds int) (int, error) {
	n := 0
	for r := 0; r < rounds; r++ {
		for id := 1; id <= 10; id++ {
			if _, err := plants.ByID(ctx, d, id); err != nil {
				return n, err
			}
			if _, err := plants.Name(ctx, d, id+10); err != nil {
				return n, err
			}
			if _, err := orders.Lines(ctx, d, id); err != nil {
				return n, err
			}
			if _, err := orders.Report(ctx, d.Raw(), id); err != nil {
				return n, err
			}
			n += 4
		}
	}
	return n, nil
}
