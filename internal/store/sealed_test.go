package store_test

import (
	"context"
	"strings"
	"testing"

	"github.com/jackc/pgx/v5"

	"cairn/internal/pgtest"
	"cairn/internal/store"
)

// fixedSearchPath is the search_path every function of the register runs
// with (migrations/00011): the catalog first, the temporary schema last.
const fixedSearchPath = "search_path=pg_catalog, public, pg_temp"

// Every function in the register's schema runs with a fixed search_path,
// so that no caller's TEMP table, schema or search path changes what it
// reads or calls. A migration that adds a function without one fails here.
func TestFunctionsHaveFixedSearchPath(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	ctx := context.Background()
	rows, err := db.Pool.Query(ctx, `SELECT p.oid::regprocedure::text, coalesce(p.proconfig, '{}')
		FROM pg_proc p
		WHERE p.pronamespace = 'public'::regnamespace
		  AND NOT EXISTS (SELECT 1 FROM pg_depend d WHERE d.classid = 'pg_proc'::regclass AND d.objid = p.oid AND d.deptype = 'e')
		ORDER BY 1`)
	if err != nil {
		t.Fatal(err)
	}
	type fn struct {
		Name   string
		Config []string
	}
	fns, err := pgx.CollectRows(rows, pgx.RowToStructByPos[fn])
	if err != nil {
		t.Fatal(err)
	}
	seen := map[string]bool{}
	for _, f := range fns {
		seen[f.Name[:strings.Index(f.Name, "(")]] = true
		n := 0
		for _, c := range f.Config {
			if strings.HasPrefix(c, "search_path=") {
				n++
				if c != fixedSearchPath {
					t.Errorf("%s runs with %s, want %s", f.Name, c, fixedSearchPath)
				}
			}
		}
		if n == 0 {
			t.Errorf("%s has no fixed search_path: give it SET %s (ALTER FUNCTION ... SET, or in CREATE FUNCTION)", f.Name,
				strings.Replace(fixedSearchPath, "=", " = ", 1))
		}
	}
	// The test sees the register's functions (or it proves nothing).
	for _, want := range []string{"height_before_insert", "height_canonical", "height_from_adjustment", "refuse_change",
		"refuse_key_change", "cairn_roles_apply", "cairn_database_apply", "seal_stamp", "run_child_sealed", "adjustment_child_sealed"} {
		if !seen[want] {
			t.Errorf("function %s not found among %v", want, fns)
		}
	}
}

// Nobody of the register may make TEMP tables (which come first in a
// search path unless it names them last) or objects on the database or in
// schema public; cairn db roles (RolesApply) revokes them again when an
// administrator, or a database copied from a template, has them back.
func TestDatabasePrivilegesRevoked(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	ctx := context.Background()
	check := func(when string) {
		t.Helper()
		for _, r := range []string{"public", store.RoleReader, store.RoleRecorder, store.RolePublisher} {
			var temp, create, createPublic bool
			if err := db.Pool.QueryRow(ctx, `SELECT has_database_privilege($1, current_database(), 'TEMPORARY'),
				has_database_privilege($1, current_database(), 'CREATE'), has_schema_privilege($1, 'public', 'CREATE')`, r).
				Scan(&temp, &create, &createPublic); err != nil {
				t.Fatal(err)
			}
			if temp || create || createPublic {
				t.Errorf("%s: %s may TEMPORARY %v, CREATE %v on the database, CREATE in public %v; want none", when, r, temp, create, createPublic)
			}
		}
	}
	check("migrated")
	name := pgx.Identifier{db.Pool.Config().ConnConfig.Database}.Sanitize()
	for _, q := range []string{
		"GRANT TEMPORARY, CREATE ON DATABASE " + name + " TO PUBLIC, cairn_publisher",
		"GRANT CREATE ON SCHEMA public TO PUBLIC, cairn_recorder",
	} {
		if _, err := db.Pool.Exec(ctx, q); err != nil {
			t.Fatal(err)
		}
	}
	if _, err := store.RolesApply(ctx, db.Pool); err != nil {
		t.Fatal(err)
	}
	check("granted back, then roles applied")
}
