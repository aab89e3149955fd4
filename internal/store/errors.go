package store

import (
	"context"
	"errors"
	"fmt"

	"github.com/jackc/pgx/v5"
	"github.com/jackc/pgx/v5/pgconn"
	"github.com/jackc/pgx/v5/pgxpool"
)

// Errors the store returns; test with errors.Is.
var (
	// ErrNotFound: the row asked for does not exist.
	ErrNotFound = errors.New("not found")
	// ErrAlreadyExists: a row with the same key exists (designation, datum code).
	ErrAlreadyExists = errors.New("already exists")
	// ErrConflict: another writer changed the same chain of versions first.
	ErrConflict = errors.New("changed by another writer")
	// ErrAppendOnly: the database refused to change or remove history.
	ErrAppendOnly = errors.New("history is append-only")
)

// SQLSTATE codes raised by the register's triggers (migrations/00001).
const (
	codeAppendOnly = "CA001" // UPDATE, DELETE or TRUNCATE of append-only history
	codeStale      = "CA002" // a new version does not supersede the latest
)

// constraintsOfChains are the unique constraints that keep each mark's
// versions on one datum a single line; violating one means a concurrent
// writer won.
var constraintsOfChains = map[string]bool{
	"height_supersedes_key":               true,
	"height_first":                        true,
	"height_mark_id_datum_id_version_key": true,
}

// translate maps driver errors to the store's errors, keeping the driver's
// message for context.
func translate(err error) error {
	if err == nil {
		return nil
	}
	if errors.Is(err, pgx.ErrNoRows) {
		return ErrNotFound
	}
	var pe *pgconn.PgError
	if !errors.As(err, &pe) {
		return err
	}
	switch {
	case pe.Code == codeAppendOnly:
		return fmt.Errorf("%w: %s", ErrAppendOnly, pe.Message)
	case pe.Code == codeStale, pe.Code == "40001", pe.Code == "40P01",
		pe.Code == "23505" && constraintsOfChains[pe.ConstraintName]:
		return fmt.Errorf("%w: %s", ErrConflict, pe.Message)
	case pe.Code == "23505":
		return fmt.Errorf("%w: %s", ErrAlreadyExists, pe.Message)
	}
	return err
}

// DBTX is what queries run on: a pool, a connection or a transaction.
type DBTX interface {
	Exec(ctx context.Context, sql string, args ...any) (pgconn.CommandTag, error)
	Query(ctx context.Context, sql string, args ...any) (pgx.Rows, error)
	QueryRow(ctx context.Context, sql string, args ...any) pgx.Row
}

var (
	_ DBTX = (*pgxpool.Pool)(nil)
	_ DBTX = (pgx.Tx)(nil)
)
