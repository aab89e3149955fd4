package store

import (
	"context"
	"fmt"
	"time"

	"github.com/jackc/pgx/v5"
)

// Datum is a vertical datum heights refer to.
type Datum struct {
	ID        int64
	Code      string
	Name      string
	Note      string
	CreatedAt time.Time
	CreatedBy string // empty for datums added before schema v4
}

const datumColumns = "id, code, name, note, created_at, created_by"

func scanDatum(row pgx.Row) (Datum, error) {
	var d Datum
	err := row.Scan(&d.ID, &d.Code, &d.Name, &d.Note, &d.CreatedAt, &d.CreatedBy)
	return d, translate(err)
}

// DatumInsertParams are the fields of a new datum.
type DatumInsertParams struct {
	Code, Name, Note string
	CreatedBy        string
}

// DatumInsert adds a datum; ErrAlreadyExists if its code is taken.
func DatumInsert(ctx context.Context, db DBTX, p DatumInsertParams) (Datum, error) {
	d, err := scanDatum(db.QueryRow(ctx,
		"INSERT INTO datum (code, name, note, created_by) VALUES ($1, $2, $3, $4) RETURNING "+datumColumns,
		p.Code, p.Name, p.Note, p.CreatedBy))
	if err != nil {
		return Datum{}, fmt.Errorf("insert datum %s: %w", p.Code, err)
	}
	return d, nil
}

// DatumGetByCode returns the datum with code (exact match); ErrNotFound if none.
func DatumGetByCode(ctx context.Context, db DBTX, code string) (Datum, error) {
	return scanDatum(db.QueryRow(ctx, "SELECT "+datumColumns+" FROM datum WHERE code = $1", code))
}

// DatumGetFolded returns the datum whose code has the folded form folded
// (see MarkGetFolded); ErrNotFound if none.
func DatumGetFolded(ctx context.Context, db DBTX, folded string) (Datum, error) {
	return scanDatum(db.QueryRow(ctx, "SELECT "+datumColumns+" FROM datum WHERE lower(normalize(code, NFKC)) = $1", folded))
}

// DatumList returns every datum by code.
func DatumList(ctx context.Context, db DBTX) ([]Datum, error) {
	rows, err := db.Query(ctx, "SELECT "+datumColumns+" FROM datum ORDER BY code")
	if err != nil {
		return nil, translate(err)
	}
	return collect(rows, scanDatum)
}

// collect scans every row with scan.
func collect[T any](rows pgx.Rows, scan func(pgx.Row) (T, error)) ([]T, error) {
	defer rows.Close()
	var out []T
	for rows.Next() {
		v, err := scan(rows)
		if err != nil {
			return nil, err
		}
		out = append(out, v)
	}
	return out, translate(rows.Err())
}
