// Package sqldb is the shop's own SQL layer: every package reaches the
// database through DB.QueryRow (a shared access helper).
package sqldb

import (
	"context"
	"database/sql"
)

// DB wraps a database handle.
type DB struct{ db *sql.DB }

// New wraps db.
func New(db *sql.DB) *DB { return &DB{db: db} }

// Raw returns the wrapped handle.
func (d *DB) Raw() *sql.DB { return d.db }

// QueryRow runs a one-row query and scans its columns into dest.
//
//go:noinline
func (d *DB) QueryRow(ctx context.Context, query string, args []any, dest ...any) error {
	return d.db.QueryRowContext(ctx, query, args...).Scan(dest...)
}
