package store_test

import (
	"context"
	"errors"
	"testing"

	"github.com/jackc/pgx/v5"
	"github.com/jackc/pgx/v5/pgconn"

	"cairn/internal/pgtest"
)

// A writer cannot give its rows a write time of its own choosing through
// the setting cairn_write_time keeps it in (migrations/00020): a time
// before the transaction began or after the server's clock is refused,
// and nothing is written; the register's own time still goes through.
func TestWriteTimeCannotBeGiven(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	ctx := context.Background()
	for _, forged := range []string{"2099-01-01T00:00:00.000000", "1990-01-01T00:00:00.000000"} {
		err := pgx.BeginFunc(ctx, db.Pool, func(tx pgx.Tx) error {
			if _, err := tx.Exec(ctx, "SELECT set_config('cairn.write_time', $1, true)", forged); err != nil {
				return err
			}
			_, err := tx.Exec(ctx, `INSERT INTO datum (code, name) VALUES ('TCVD', 'Tallis County Vertical Datum (invented)')`)
			return err
		})
		var pe *pgconn.PgError
		if !errors.As(err, &pe) || pe.Code != "CA012" {
			t.Errorf("write time %s given by the writer: %v; want SQLSTATE CA012", forged, err)
		}
	}
	var n int
	if err := db.Pool.QueryRow(ctx, "SELECT count(*) FROM datum").Scan(&n); err != nil || n != 0 {
		t.Fatalf("datums after the refusals: %d, %v", n, err)
	}
	if _, err := db.Pool.Exec(ctx, `INSERT INTO datum (code, name) VALUES ('TCVD', 'Tallis County Vertical Datum (invented)')`); err != nil {
		t.Fatalf("the register's own write time: %v", err)
	}
}
