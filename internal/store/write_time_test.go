package store_test

import (
	"context"
	"errors"
	"fmt"
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

// The height trigger reads the transaction's write time and computes its
// number itself (schema v26) instead of calling cairn_write_time() and
// cairn_xact() a row; its rows carry what those functions give, in the
// first write of a transaction and in a later one, and a time given by
// the writer through the setting, before the first write or between two,
// is refused as cairn_write_time() refuses it (CA012), nothing written.
func TestHeightWriteTimeAsTheFunctions(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	ctx := context.Background()
	if _, err := db.Pool.Exec(ctx, `INSERT INTO datum (code, name) VALUES ('TCVD', 'Tallis County Vertical Datum (invented)');
		INSERT INTO mark (designation, created_by) VALUES ('TC-0701', 'test'), ('TC-0702', 'test'), ('TC-0703', 'test'), ('TC-0704', 'test')`); err != nil {
		t.Fatal(err)
	}
	const insert = `INSERT INTO height (mark_id, datum_id, supersedes, value, unit, decimals, source_kind, source, reason, recorded_by, in_force_from)
		SELECT m.id, d.id, (SELECT max(h.id) FROM height h WHERE h.mark_id = m.id), $1::numeric, 'm', 3, 'authority', 'sheet 7 (invented)', 'r', 'test', now()
		FROM mark m, datum d WHERE m.designation = ANY($2) ORDER BY m.id`
	for _, forged := range []string{"2099-01-01T00:00:00.000000", "1990-01-01T00:00:00.000000"} {
		for _, between := range []bool{false, true} {
			err := pgx.BeginFunc(ctx, db.Pool, func(tx pgx.Tx) error {
				if between {
					if _, err := tx.Exec(ctx, insert, "1.000", []string{"TC-0701", "TC-0702"}); err != nil {
						return err
					}
				}
				if _, err := tx.Exec(ctx, "SELECT set_config('cairn.write_time', $1, true)", forged); err != nil {
					return err
				}
				_, err := tx.Exec(ctx, insert, "2.000", []string{"TC-0703", "TC-0704"})
				return err
			})
			var pe *pgconn.PgError
			if !errors.As(err, &pe) || pe.Code != "CA012" {
				t.Errorf("write time %s given (after a first write: %v): %v; want SQLSTATE CA012", forged, between, err)
			}
		}
	}
	var n int
	if err := db.Pool.QueryRow(ctx, "SELECT count(*) FROM height").Scan(&n); err != nil || n != 0 {
		t.Fatalf("versions after the refusals: %d, %v", n, err)
	}
	// Two statements in one transaction (the first keeps the time, the
	// second reads it), each of two rows.
	var bad int
	err := pgx.BeginFunc(ctx, db.Pool, func(tx pgx.Tx) error {
		for i, v := range []string{"1.000", "2.000"} {
			if _, err := tx.Exec(ctx, insert, v, []string{fmt.Sprintf("TC-070%d", 2*i+1), fmt.Sprintf("TC-070%d", 2*i+2)}); err != nil {
				return err
			}
		}
		return tx.QueryRow(ctx, `SELECT count(*) FROM height
			WHERE recorded_at IS DISTINCT FROM cairn_write_time() OR created_xid IS DISTINCT FROM cairn_xact()`).Scan(&bad)
	})
	if err != nil {
		t.Fatal(err)
	}
	if err := db.Pool.QueryRow(ctx, "SELECT count(*) FROM height").Scan(&n); err != nil || n != 4 || bad != 0 {
		t.Errorf("%d versions written (%v), %d of them not at the transaction's time and number; want 4 and 0", n, err, bad)
	}
}
