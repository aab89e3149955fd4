package store_test

import (
	"errors"
	"fmt"
	"testing"

	"github.com/jackc/pgx/v5"
	"github.com/jackc/pgx/v5/pgconn"

	"cairn/internal/registertest"
	"cairn/internal/store"
)

// The references of height, adjustment_result and adjustment_section are
// checked once a statement (schema v26) where PostgreSQL's foreign keys
// checked them row by row: a row that names a mark, an adjustment, a
// version or an adjustment's run that does not exist is refused as the
// dropped key refused it, SQLSTATE 23503 foreign_key_violation
// (PostgreSQL 15 documentation, Appendix A) with the key's name, and the
// statement writes nothing; a version superseding one that does not exist
// is refused by the chain's check (CA002, a conflict). The row that
// refers well goes in. Each refused row is one of several in its
// statement, the others good, so a check that looked at one row of the
// statement only would miss it.
func TestReferencesCheckedAsTheKeysDid(t *testing.T) {
	t.Parallel()
	fx := registertest.Setup(t)
	d := fx.Datum(t, registertest.DatumOpts{})
	runs := fx.WorkedCircuit(t, registertest.WorkedCircuitOpts{})
	bm2, err := store.MarkGet(fx.Ctx, fx.DB.Pool, store.MarkGetParams{Designation: "BM2"})
	if err != nil {
		t.Fatal(err)
	}
	bm1, err := store.MarkGet(fx.Ctx, fx.DB.Pool, store.MarkGetParams{Designation: "BM1"})
	if err != nil {
		t.Fatal(err)
	}
	var held int64
	if err := fx.DB.Pool.QueryRow(fx.Ctx, "SELECT id FROM height WHERE mark_id = $1", bm1.ID).Scan(&held); err != nil {
		t.Fatal(err)
	}
	const missing = 987654321
	// setup makes, in tx, an adjustment of the worked circuit's run with
	// its run row, and returns it.
	setup := func(tx pgx.Tx) int64 {
		t.Helper()
		id, err := store.AdjustmentInsert(fx.Ctx, tx, store.AdjustmentInsertParams{Method: "proportional", DatumID: d.ID, CreatedBy: "test"})
		if err != nil {
			t.Fatal(err)
		}
		if err := store.AdjustmentRunInsert(fx.Ctx, tx, store.AdjustmentRunInsertParams{AdjustmentID: id, RunIDs: runs[:1]}); err != nil {
			t.Fatal(err)
		}
		return id
	}
	for _, c := range []struct {
		name       string
		sql        string // %[1]d the adjustment, %[2]d a missing id, %[3]d BM2, %[4]d BM1's height, %[5]d the run, %[6]d the datum
		constraint string // "" for the chain's conflict
	}{
		{"height of no mark", `INSERT INTO height (mark_id, datum_id, value, unit, decimals, source_kind, source, reason, recorded_by, in_force_from)
			VALUES (%[3]d, %[6]d, 1.000, 'm', 3, 'authority', 'sheet (invented)', 'r', 't', now()),
			       (%[2]d, %[6]d, 1.000, 'm', 3, 'authority', 'sheet (invented)', 'r', 't', now())`, "height_mark_id_fkey"},
		{"height citing no adjustment", `INSERT INTO height (mark_id, datum_id, value, unit, decimals, source_kind, adjustment_id, reason, recorded_by)
			VALUES (%[3]d, %[6]d, 1.000, 'm', 3, 'adjustment', %[2]d, 'r', 't')`, "height_adjustment_fk"},
		{"height superseding no version", `INSERT INTO height (mark_id, datum_id, supersedes, value, unit, decimals, source_kind, source, reason, recorded_by, in_force_from)
			VALUES (%[3]d, %[6]d, %[2]d, 1.000, 'm', 3, 'authority', 'sheet (invented)', 'r', 't', now())`, ""},
		{"result of no adjustment", `INSERT INTO adjustment_result (adjustment_id, mark_id, seq, held, adjusted_m)
			VALUES (%[1]d, %[3]d, 1, true, 1), (%[2]d, %[3]d, 2, true, 1)`, "adjustment_result_adjustment_id_fkey"},
		{"result of no mark", `INSERT INTO adjustment_result (adjustment_id, mark_id, seq, held, adjusted_m)
			VALUES (%[1]d, %[3]d, 1, true, 1), (%[1]d, %[2]d, 2, true, 1)`, "adjustment_result_mark_id_fkey"},
		{"result replacing no version", `INSERT INTO adjustment_result (adjustment_id, mark_id, seq, held, adjusted_m, replaces)
			VALUES (%[1]d, %[3]d, 1, true, 1, %[4]d), (%[1]d, (SELECT id FROM mark WHERE designation = 'BM3'), 2, true, 1, %[2]d)`, "adjustment_result_replaces_fkey"},
		{"section of no run of the adjustment", `INSERT INTO adjustment_section (adjustment_id, run_id, seq, residual_m, residual_sd_m, flagged)
			VALUES (%[1]d, %[5]d, 1, 0, 0, false), (%[1]d, %[2]d, 2, 0, 0, false)`, "adjustment_section_adjustment_id_run_id_fkey"},
		{"section of no adjustment", `INSERT INTO adjustment_section (adjustment_id, run_id, seq, residual_m, residual_sd_m, flagged)
			VALUES (%[2]d, %[5]d, 1, 0, 0, false)`, "adjustment_section_adjustment_id_run_id_fkey"},
	} {
		t.Run(c.name, func(t *testing.T) {
			before := fx.Counts(t)
			tx, err := fx.DB.Pool.Begin(fx.Ctx)
			if err != nil {
				t.Fatal(err)
			}
			defer tx.Rollback(fx.Ctx)
			id := setup(tx)
			_, err = tx.Exec(fx.Ctx, fmt.Sprintf(c.sql, id, missing, bm2.ID, held, runs[0], d.ID))
			var pe *pgconn.PgError
			switch {
			case c.constraint == "" && (!errors.As(err, &pe) || pe.Code != "CA002"):
				t.Errorf("err = %v, want the chain's conflict (CA002)", err)
			case c.constraint != "" && (!errors.As(err, &pe) || pe.Code != "23503" || pe.ConstraintName != c.constraint):
				t.Errorf("err = %v, want foreign_key_violation (23503) of %s", err, c.constraint)
			}
			tx.Rollback(fx.Ctx)
			fx.AssertNothingWritten(t, before)
		})
	}
	// Rows that refer well go in, in one statement with several rows.
	tx, err := fx.DB.Pool.Begin(fx.Ctx)
	if err != nil {
		t.Fatal(err)
	}
	defer tx.Rollback(fx.Ctx)
	id := setup(tx)
	if _, err := tx.Exec(fx.Ctx, fmt.Sprintf(`INSERT INTO adjustment_result (adjustment_id, mark_id, seq, held, adjusted_m, replaces)
		VALUES (%[1]d, %[2]d, 1, true, 1, %[3]d), (%[1]d, %[4]d, 2, true, 1, NULL)`, id, bm1.ID, held, bm2.ID)); err != nil {
		t.Errorf("results that refer well: %v", err)
	}
	if _, err := tx.Exec(fx.Ctx, fmt.Sprintf(`INSERT INTO adjustment_section (adjustment_id, run_id, seq, residual_m, residual_sd_m, flagged)
		VALUES (%[1]d, %[2]d, 1, 0, 0, false), (%[1]d, %[2]d, 2, 0, 0, false)`, id, runs[0])); err != nil {
		t.Errorf("sections that refer well: %v", err)
	}
}
