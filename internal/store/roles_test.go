package store_test

import (
	"context"
	"fmt"
	"net/url"
	"slices"
	"sync"
	"testing"

	"github.com/jackc/pgx/v5"
	"github.com/jackc/pgx/v5/pgxpool"

	"cairn/internal/localpg"
	"cairn/internal/store"
)

// On a new server, where the roles do not yet exist, six registers
// migrated at the same moment all succeed: each creates the roles or finds
// them made by another, and grants its own privileges. An owner who may
// not create roles migrates too, and is told the roles are missing.
func TestRolesConcurrentMigrations(t *testing.T) {
	t.Parallel()
	ctx := context.Background()
	c, adminURL, err := localpg.Throwaway(ctx)
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { _ = c.Stop(context.Background()) })
	admin, err := pgx.Connect(ctx, adminURL)
	if err != nil {
		t.Fatal(err)
	}
	defer admin.Close(ctx)
	const n = 6
	pools := make([]*pgxpool.Pool, n)
	for i := range pools {
		name := fmt.Sprintf("register_%d", i)
		if _, err := admin.Exec(ctx, "CREATE DATABASE "+name); err != nil {
			t.Fatal(err)
		}
		p, err := store.Open(ctx, c.URL(name))
		if err != nil {
			t.Fatal(err)
		}
		defer p.Close()
		pools[i] = p
	}
	var wg sync.WaitGroup
	start := make(chan struct{})
	errs := make([]error, n)
	for i, p := range pools {
		wg.Add(1)
		go func() {
			defer wg.Done()
			<-start
			errs[i] = store.Migrate(ctx, p)
		}()
	}
	close(start)
	wg.Wait()
	for i, err := range errs {
		if err != nil {
			t.Errorf("register_%d: %v", i, err)
		}
	}
	for i, p := range pools {
		var granted bool
		if err := p.QueryRow(ctx, "SELECT has_any_column_privilege('cairn_publisher', 'height', 'INSERT') AND has_table_privilege('cairn_reader', 'height', 'SELECT') AND NOT has_any_column_privilege('cairn_recorder', 'height', 'INSERT')"+
			" AND has_any_column_privilege('cairn_recorder', 'run_held', 'INSERT') AND has_table_privilege('cairn_reader', 'run_held', 'SELECT')"+
			" AND NOT has_any_column_privilege('cairn_reader', 'run_held', 'INSERT') AND NOT has_table_privilege('cairn_publisher', 'run_held', 'UPDATE')").Scan(&granted); err != nil {
			t.Fatal(err)
		}
		if !granted {
			t.Errorf("register_%d: privileges not as granted", i)
		}
		// Voiding a run is the publisher's (migrations/00006).
		if err := p.QueryRow(ctx, `SELECT has_any_column_privilege('cairn_publisher', 'run_event', 'INSERT')
			AND has_sequence_privilege('cairn_publisher', 'run_event_id_seq', 'USAGE')
			AND has_table_privilege('cairn_reader', 'run_event', 'SELECT')
			AND NOT has_any_column_privilege('cairn_recorder', 'run_event', 'INSERT')
			AND NOT has_table_privilege('cairn_publisher', 'run_event', 'UPDATE')
			AND NOT has_table_privilege('cairn_publisher', 'run_event', 'DELETE')`).Scan(&granted); err != nil {
			t.Fatal(err)
		}
		if !granted {
			t.Errorf("register_%d: privileges on run_event not as granted", i)
		}
	}
	roles, err := store.RoleList(ctx, pools[0])
	if err != nil {
		t.Fatal(err)
	}
	if len(roles) != 3 || !roles[0].Exists || !slices.Equal(roles[0].Members, []string{store.RoleRecorder}) ||
		!slices.Equal(roles[1].Members, []string{store.RolePublisher}) {
		t.Fatalf("roles %+v", roles)
	}

	// An owner without CREATEROLE, on a server where the roles are gone.
	for _, q := range []string{
		"CREATE ROLE plain_owner LOGIN PASSWORD 'plain-owner-pw'", "CREATE DATABASE register_plain OWNER plain_owner",
	} {
		if _, err := admin.Exec(ctx, q); err != nil {
			t.Fatal(err)
		}
	}
	for i := range pools {
		pools[i].Close()
		if _, err := admin.Exec(ctx, fmt.Sprintf("DROP DATABASE register_%d", i)); err != nil {
			t.Fatal(err)
		}
	}
	if _, err := admin.Exec(ctx, "DROP ROLE cairn_publisher, cairn_recorder, cairn_reader"); err != nil {
		t.Fatal(err)
	}
	u, err := url.Parse(c.URL("register_plain"))
	if err != nil {
		t.Fatal(err)
	}
	q := u.Query()
	q.Set("user", "plain_owner")
	q.Set("password", "plain-owner-pw") // a throwaway cluster asks every role for one
	u.RawQuery = q.Encode()
	p, err := store.Open(ctx, u.String())
	if err != nil {
		t.Fatal(err)
	}
	defer p.Close()
	if err := store.Migrate(ctx, p); err != nil {
		t.Fatalf("migrate as an owner who may not create roles: %v", err)
	}
	missing, err := store.RolesApply(ctx, p)
	if err != nil {
		t.Fatal(err)
	}
	if !slices.Equal(missing, []string{store.RoleReader, store.RoleRecorder, store.RolePublisher}) {
		t.Fatalf("missing roles %v", missing)
	}
}
