package pgtest

import (
	"context"
	"testing"
)

func TestNewGivesIsolatedMigratedDatabases(t *testing.T) {
	t.Parallel()
	a, b := New(t), New(t)
	ctx := context.Background()
	var na, nb string
	if err := a.Pool.QueryRow(ctx, "SELECT current_database()").Scan(&na); err != nil {
		t.Fatal(err)
	}
	if err := b.Pool.QueryRow(ctx, "SELECT current_database()").Scan(&nb); err != nil {
		t.Fatal(err)
	}
	if na == nb {
		t.Fatalf("two tests share database %s", na)
	}
	var v int64
	if err := a.Pool.QueryRow(ctx, "SELECT max(version_id) FROM goose_db_version").Scan(&v); err != nil {
		t.Fatalf("test database is not migrated: %v", err)
	}
	if v < 1 {
		t.Fatalf("schema version %d", v)
	}
}
