package store_test

import (
	"context"
	"strings"
	"testing"

	"github.com/jackc/pgx/v5"

	"cairn/internal/pgtest"
	"cairn/internal/store"
)

// The audit's transactions run without JIT compilation, whatever the
// planner's estimates (PostgreSQL 15 documentation, 32.2 "When to JIT?":
// a query is compiled when its estimated cost is above jit_above_cost,
// and EXPLAIN ANALYZE then shows a "JIT:" section; 20.7.4: jit = off
// disables it). jit_above_cost is set to 0 here so that every query would
// be compiled; without the audit's session the same query is.
func TestAuditSessionsRunWithoutJIT(t *testing.T) {
	db := pgtest.New(t)
	ctx := context.Background()
	var available bool
	if err := db.Pool.QueryRow(ctx, "SELECT pg_jit_available()").Scan(&available); err != nil {
		t.Fatal(err)
	}
	if !available {
		t.Skip("this server has no JIT provider: nothing to turn off")
	}
	compiled := func(session func(context.Context, pgx.Tx) error) bool {
		t.Helper()
		tx, err := db.Pool.BeginTx(ctx, pgx.TxOptions{IsoLevel: pgx.RepeatableRead, AccessMode: pgx.ReadOnly})
		if err != nil {
			t.Fatal(err)
		}
		defer tx.Rollback(ctx)
		if _, err := tx.Exec(ctx, "SET LOCAL jit = on; SET LOCAL jit_above_cost = 0"); err != nil {
			t.Fatal(err)
		}
		if session != nil {
			if err := session(ctx, tx); err != nil {
				t.Fatal(err)
			}
		}
		rows, err := tx.Query(ctx, "EXPLAIN (ANALYZE) SELECT count(*) FROM height WHERE mark_id > 0")
		if err != nil {
			t.Fatal(err)
		}
		defer rows.Close()
		jit := false
		for rows.Next() {
			var line string
			if err := rows.Scan(&line); err != nil {
				t.Fatal(err)
			}
			jit = jit || strings.HasPrefix(strings.TrimSpace(line), "JIT:")
		}
		if err := rows.Err(); err != nil {
			t.Fatal(err)
		}
		return jit
	}
	if !compiled(nil) {
		t.Fatal("without the audit's session the query was not compiled: the test shows nothing")
	}
	if compiled(store.TxNoJIT) {
		t.Error("TxNoJIT: the query was compiled")
	}
	if compiled(store.EvidenceSession) {
		t.Error("EvidenceSession: the query was compiled")
	}
}

// The schema's key names the register's roles present on the server, not
// the logins: a login made on the server (here one named like the
// register's own, as tests and offices do) leaves the key, and so the
// kept reference schema, as they were. (Roles are the cluster's, shared
// by every database on the server: PostgreSQL 15 documentation, 22.1.)
func TestSchemaServerKeyIgnoresLogins(t *testing.T) {
	db := pgtest.New(t)
	ctx := context.Background()
	before, err := store.SchemaServerKey(ctx, db.Pool)
	if err != nil {
		t.Fatal(err)
	}
	for _, r := range []string{store.RoleReader, store.RoleRecorder, store.RolePublisher} {
		if !strings.Contains(before, r) {
			t.Fatalf("key %q does not name the register's role %s", before, r)
		}
	}
	login := pgx.Identifier{"cairn_t_key_" + strings.ReplaceAll(db.Pool.Config().ConnConfig.Database, "cairn_test_", "")}.Sanitize()
	if _, err := db.Pool.Exec(ctx, "CREATE ROLE "+login+" LOGIN IN ROLE "+store.RoleReader); err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { db.Pool.Exec(context.Background(), "DROP ROLE IF EXISTS "+login) })
	after, err := store.SchemaServerKey(ctx, db.Pool)
	if err != nil {
		t.Fatal(err)
	}
	if after != before {
		t.Errorf("a new login changed the schema's key: %q, was %q", after, before)
	}
}
