package store_test

import (
	"context"
	"testing"

	"cairn/internal/pgtest"
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
