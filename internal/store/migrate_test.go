package store_test

import (
	"context"
	"errors"
	"fmt"
	"strings"
	"testing"
	"time"

	"github.com/jackc/pgx/v5/pgconn"

	"cairn/internal/pgtest"
	"cairn/internal/registertest"
	"cairn/internal/store"
)

// The migrations go all the way down and up again (pressly/goose's habit).
func TestMigrateDownAndUp(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	ctx := context.Background()
	if err := store.MigrateDown(ctx, db.Pool); err != nil {
		t.Fatalf("down: %v", err)
	}
	var n int
	if err := db.Pool.QueryRow(ctx, "SELECT count(*) FROM pg_tables WHERE schemaname = 'public' AND tablename IN ('datum', 'mark', 'mark_condition', 'height')").Scan(&n); err != nil {
		t.Fatal(err)
	}
	if n != 0 {
		t.Fatalf("%d register tables left after migrating down", n)
	}
	if c, err := store.TableCount(ctx, db.Pool); err != nil || len(c) != 0 {
		t.Fatalf("tables left after migrating down: %v (%v)", c, err)
	}
	tempOK := func() bool {
		t.Helper()
		var ok bool
		if err := db.Pool.QueryRow(ctx, "SELECT has_database_privilege('public', current_database(), 'TEMPORARY')").Scan(&ok); err != nil {
			t.Fatal(err)
		}
		return ok
	}
	if !tempOK() {
		t.Error("after migrating down, PUBLIC may not make TEMP tables (as PostgreSQL makes every database)")
	}
	if err := store.Migrate(ctx, db.Pool); err != nil {
		t.Fatalf("up again: %v", err)
	}
	if tempOK() {
		t.Error("after migrating up, PUBLIC may make TEMP tables (migrations/00011 revokes it)")
	}
	cur, latest, err := store.SchemaVersion(ctx, db.Pool)
	if err != nil {
		t.Fatal(err)
	}
	if cur != latest || cur < 1 {
		t.Fatalf("schema version %d, newest %d", cur, latest)
	}
}

// A register that holds two designations of one folded form (and two
// datum codes) is not migrated to schema v9: the migration stops, lists
// them, and changes nothing.
func TestMigrationRefusesFoldedCollisions(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	ctx := context.Background()
	if err := store.MigrateTo(ctx, db.Pool, 8); err != nil {
		t.Fatalf("down to 8: %v", err)
	}
	for _, q := range []string{
		"INSERT INTO mark (designation, created_by) VALUES ('TC-0412', 'test'), ('tc-0412', 'test'), ('TC-0413', 'test')",
		"INSERT INTO datum (code, name) VALUES ('TCVD', 'Tallis County Vertical Datum'), ('tcvd', 'the same, typed again')",
	} {
		if _, err := db.Pool.Exec(ctx, q); err != nil {
			t.Fatal(err)
		}
	}
	err := store.Migrate(ctx, db.Pool)
	if err == nil {
		t.Fatal("migrated a register with folded collisions")
	}
	for _, want := range []string{"schema v9", "marks TC-0412 = tc-0412", "datums TCVD = tcvd", "CA008"} {
		if !strings.Contains(err.Error(), want) {
			t.Errorf("error %q lacks %q", err, want)
		}
	}
	if cur, _, err := store.SchemaVersion(ctx, db.Pool); err != nil || cur != 8 {
		t.Fatalf("schema version %d (%v), want 8", cur, err)
	}
	var n int
	if err := db.Pool.QueryRow(ctx, "SELECT count(*) FROM mark").Scan(&n); err != nil || n != 3 {
		t.Fatalf("%d marks (%v), want the 3 inserted: nothing merged", n, err)
	}
}

// A register migrated to 00010 before 00009 existed gets 00009 when
// migrated: the schema version counts only the unbroken run of applied
// migrations.
func TestMigrationAppliedOutOfOrder(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	ctx := context.Background()
	if err := store.MigrateTo(ctx, db.Pool, 8); err != nil {
		t.Fatal(err)
	}
	if err := store.MigrateOne(ctx, db.Pool, 10); err != nil {
		t.Fatalf("apply 10 alone: %v", err)
	}
	if cur, _, err := store.SchemaVersion(ctx, db.Pool); err != nil || cur != 8 {
		t.Fatalf("schema version %d (%v) with 00009 missing, want 8", cur, err)
	}
	if err := store.Migrate(ctx, db.Pool); err != nil {
		t.Fatalf("migrate: %v", err)
	}
	var idx bool
	if err := db.Pool.QueryRow(ctx, "SELECT to_regclass('mark_designation_folded') IS NOT NULL").Scan(&idx); err != nil || !idx {
		t.Fatalf("00009 not applied (%v)", err)
	}
	cur, latest, err := store.SchemaVersion(ctx, db.Pool)
	if err != nil || cur != latest {
		t.Fatalf("schema version %d of %d (%v)", cur, latest, err)
	}
}

// The database refuses a condition report or a run dated after the last
// date that is today anywhere (UTC+14), whoever writes it; that date
// itself is accepted.
func TestDatabaseRefusesFutureDates(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	ctx := context.Background()
	var id int64
	if err := db.Pool.QueryRow(ctx, "INSERT INTO mark (designation, created_by) VALUES ('TC-0412', 'test') RETURNING id").Scan(&id); err != nil {
		t.Fatal(err)
	}
	const latest = "(statement_timestamp() AT TIME ZONE 'Etc/GMT-14')::date"
	ins := "INSERT INTO mark_condition (mark_id, condition, observed_on, recorded_by) VALUES ($1, 'good', %s, 'test')"
	if _, err := db.Pool.Exec(ctx, fmt.Sprintf(ins, latest), id); err != nil {
		t.Fatalf("today somewhere refused: %v", err)
	}
	before := registertest.Counts(t, db.Pool)
	for _, day := range []string{latest + " + 1", "current_date + 2", "'2999-01-01'"} {
		_, err := db.Pool.Exec(ctx, fmt.Sprintf(ins, day), id)
		var pe *pgconn.PgError
		if !errors.As(err, &pe) || pe.Code != "CA009" || !strings.Contains(pe.Message, "mark_condition: observed on") || !strings.Contains(pe.Message, "is in the future") {
			t.Errorf("condition observed %s: %v", day, err)
		}
		_, err = db.Pool.Exec(ctx, fmt.Sprintf(`INSERT INTO run (observed_on, unit, file_name, book, book_sha256, recorded_by, checks_failed)
			VALUES (%s, 'm', 'b.csv', 'x', sha256('x'), 'test', 0)`, day))
		if !errors.As(err, &pe) || pe.Code != "CA009" || !strings.HasPrefix(pe.Message, "run: observed on") {
			t.Errorf("run observed %s: %v", day, err)
		}
	}
	registertest.AssertNothingWritten(t, db.Pool, before)
	// The store names the refusal.
	_, err := store.ConditionInsert(ctx, db.Pool, store.ConditionInsertParams{MarkID: id, Condition: "good", ObservedOn: time.Date(2999, 1, 1, 0, 0, 0, 0, time.UTC), RecordedBy: "test"})
	if !errors.Is(err, store.ErrFutureDate) {
		t.Errorf("store: %v", err)
	}
}

// Migrate's quick path (one query when every embedded migration is
// applied and the register is at home) still applies a migration that is
// missing: with version 24 taken out of goose's table and its index
// dropped, Migrate applies it again.
func TestMigrateQuickPathMissesNothing(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	ctx := context.Background()
	if _, err := db.Pool.Exec(ctx, "DELETE FROM goose_db_version WHERE version_id = 24; DROP INDEX mark_designation_hint"); err != nil {
		t.Fatal(err)
	}
	if err := store.Migrate(ctx, db.Pool); err != nil {
		t.Fatal(err)
	}
	var back bool
	if err := db.Pool.QueryRow(ctx, "SELECT to_regclass('mark_designation_hint') IS NOT NULL").Scan(&back); err != nil || !back {
		t.Fatalf("the index of migration 24 after Migrate: %v %v", back, err)
	}
}
