package store_test

import (
	"context"
	"strings"
	"testing"
	"time"

	"cairn/internal/pgtest"
	"cairn/internal/store"
)

// A pool opened with PoolOptions has every session bounded by the
// statement timeout and read-only: a write is refused by the server
// whatever the role may do (PostgreSQL 16 documentation, 20.11.1,
// statement_timeout and default_transaction_read_only); with NoJIT its
// sessions do not JIT-compile (the same documentation, the setting jit,
// whose default is on).
func TestOpenWithReadOnlyAndTimeout(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	ctx := context.Background()
	pool, err := store.OpenWith(ctx, db.URL, store.PoolOptions{StatementTimeout: 1500 * time.Millisecond, ReadOnly: true, MaxConns: 2, ApplicationName: "cairn serve", NoJIT: true})
	if err != nil {
		t.Fatal(err)
	}
	defer pool.Close()
	var timeout, ro, app, jit string
	if err := pool.QueryRow(ctx, "SELECT current_setting('statement_timeout'), current_setting('default_transaction_read_only'), current_setting('application_name'), current_setting('jit')").Scan(&timeout, &ro, &app, &jit); err != nil {
		t.Fatal(err)
	}
	if timeout != "1500ms" || ro != "on" || app != "cairn serve" || jit != "off" {
		t.Errorf("statement_timeout %q, default_transaction_read_only %q, application_name %q, jit %q", timeout, ro, app, jit)
	}
	if pool.Config().MaxConns != 2 {
		t.Errorf("MaxConns %d", pool.Config().MaxConns)
	}
	if _, err := pool.Exec(ctx, "INSERT INTO datum (code, name, created_by) VALUES ('X', 'x', 'test')"); err == nil || !strings.Contains(err.Error(), "read-only") {
		t.Errorf("a write through a read-only pool: %v", err)
	}
	if _, err := pool.Exec(ctx, "SELECT pg_sleep(5)"); err == nil || !strings.Contains(err.Error(), "statement timeout") {
		t.Errorf("a statement past the timeout: %v", err)
	}
	// The superuser of the test server may write everywhere.
	privs, err := store.WritePrivileges(ctx, db.Pool)
	if err != nil || len(privs) == 0 {
		t.Errorf("the superuser's write privileges: %v %v", privs, err)
	}
}
