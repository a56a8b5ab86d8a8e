// Package plants reads the shop's plants through the shared SQL helper.
package plants

import (
	"context"

	"github.com/culprithq/culprit/attribute/internal/shopdb/sqldb"
)

// ByID returns a plant's stock.
//
//go:noinline
func ByID(ctx context.Context, d *sqldb.DB, id int) (int, error) {
	var stock int
	err := d.QueryRow(ctx, "SELECT stock FROM plants WHERE id = ?", []any{id}, &stock)
	return stock, err
}

// Name returns a plant's name.
//
//go:noinline
func Name(ctx context.Context, d *sqldb.DB, id int) (string, error) {
	var name string
	err := d.QueryRow(ctx, "SELECT name FROM plants WHERE id = ?", []any{id}, &name)
	return name, err
}
