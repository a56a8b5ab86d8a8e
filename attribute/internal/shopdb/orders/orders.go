// Package orders reads order lines through the shared SQL helper, and
// counts orders with a query function of its own that only this package
// calls (so it stays a root cause).
package orders

import (
	"context"
	"database/sql"

	"github.com/culprithq/culprit/attribute/internal/shopdb/sqldb"
)

// Lines returns the quantity on an order's lines.
//
//go:noinline
func Lines(ctx context.Context, d *sqldb.DB, order int) (int, error) {
	var qty int
	err := d.QueryRow(ctx, "SELECT coalesce(sum(qty), 0) FROM order_lines WHERE order_id = ?", []any{order}, &qty)
	return qty, err
}

// Report counts an order's lines three ways, each through count.
//
//go:noinline
func Report(ctx context.Context, db *sql.DB, order int) (int, error) {
	a, err := byOrder(ctx, db, order)
	if err != nil {
		return 0, err
	}
	b, err := byPlant(ctx, db, order)
	if err != nil {
		return 0, err
	}
	c, err := all(ctx, db)
	return a + b + c, err
}

//go:noinline
func byOrder(ctx context.Context, db *sql.DB, order int) (int, error) {
	return count(ctx, db, "SELECT count(*) FROM order_lines WHERE order_id = ?", order)
}

//go:noinline
func byPlant(ctx context.Context, db *sql.DB, plant int) (int, error) {
	return count(ctx, db, "SELECT count(*) FROM order_lines WHERE plant_id = ?", plant)
}

//go:noinline
func all(ctx context.Context, db *sql.DB) (int, error) {
	return count(ctx, db, "SELECT count(*) FROM order_lines WHERE qty > ?", 0)
}

// count is right above the database call and has three callers, all in
// this package: not a shared helper.
//
//go:noinline
func count(ctx context.Context, db *sql.DB, query string, arg int) (int, error) {
	var n int
	err := db.QueryRowContext(ctx, query, arg).Scan(&n)
	return n, err
}
