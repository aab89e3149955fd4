package store_test

import (
	"context"
	"errors"
	"strings"
	"testing"

	"github.com/jackc/pgx/v5/pgconn"

	"cairn/internal/pgtest"
	"cairn/internal/store"
)

// A register in a cluster it has not met (here: its last cluster's row
// names another system identifier, as after a copy by other means than
// cairn restore) refuses every write at its commit, naming the remedy,
// until its owner migrates; then its numbers come after every number it
// recorded, and the write goes through.
func TestWriteRefusedUntilNumbersCarried(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	ctx := context.Background()
	write := func() error {
		_, err := db.Pool.Exec(ctx, `INSERT INTO datum (code, name) VALUES ('TCVD', 'Tallis County Vertical Datum (invented)')`)
		return err
	}
	var highest int64
	if err := db.Pool.QueryRow(ctx, "SELECT coalesce(max(xid)::text::bigint, 0) FROM register_commit").Scan(&highest); err != nil {
		t.Fatal(err)
	}
	// Another cluster's row, whose base puts the numbers far ahead.
	if _, err := db.Pool.Exec(ctx, `INSERT INTO register_cluster (system_identifier, xact_base)
		SELECT system_identifier + 1, 1000000 FROM pg_control_system()`); err != nil {
		t.Fatal(err)
	}
	var pe *pgconn.PgError
	if err := write(); !errors.As(err, &pe) || pe.Code != "CA013" || !strings.Contains(pe.Hint, "cairn db migrate") {
		t.Fatalf("write in a cluster not met: %v; want SQLSTATE CA013 naming cairn db migrate", err)
	}
	if carried, err := store.CarryTransactionNumbers(ctx, db.Pool); err != nil || !carried {
		t.Fatalf("carry: %v, %v", carried, err)
	}
	if carried, err := store.CarryTransactionNumbers(ctx, db.Pool); err != nil || carried {
		t.Fatalf("carry again: %v, %v; want nothing to do", carried, err)
	}
	if err := write(); err != nil {
		t.Fatalf("write after the carry: %v", err)
	}
	var xid int64
	if err := db.Pool.QueryRow(ctx, "SELECT max(xid)::text::bigint FROM register_commit").Scan(&xid); err != nil {
		t.Fatal(err)
	}
	if xid <= highest {
		t.Fatalf("commit after the carry numbered %d; want past %d", xid, highest)
	}
}

// Every table of the evidence numbers its rows by an expression, not by a
// call per row of a function with a fixed search path (migrations/00021:
// the call cost about 4 µs a row on a recording), and the constant in it
// is the register's base in this cluster.
func TestCreatedXidDefaultIsAnExpression(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	ctx := context.Background()
	rows, err := db.Pool.Query(ctx, `SELECT e.tbl, pg_get_expr(d.adbin, d.adrelid)
		FROM cairn_evidence_tables() e
		JOIN pg_attribute a ON a.attrelid = ('public.' || e.tbl)::regclass AND a.attname = 'created_xid'
		LEFT JOIN pg_attrdef d ON d.adrelid = a.attrelid AND d.adnum = a.attnum
		ORDER BY e.ord`)
	if err != nil {
		t.Fatal(err)
	}
	defer rows.Close()
	n := 0
	for rows.Next() {
		var tbl string
		var def *string
		if err := rows.Scan(&tbl, &def); err != nil {
			t.Fatal(err)
		}
		n++
		if def == nil || !strings.Contains(*def, "pg_current_xact_id()") || strings.Contains(*def, "cairn_xact") || !strings.Contains(*def, "+ 0)") {
			t.Errorf("%s.created_xid defaults to %v; want the server's id plus the base 0 as an expression", tbl, def)
		}
	}
	if err := rows.Err(); err != nil || n < 20 {
		t.Fatalf("read %d tables: %v", n, err)
	}
}
