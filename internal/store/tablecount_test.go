package store_test

import (
	"context"
	"io/fs"
	"reflect"
	"regexp"
	"slices"
	"strings"
	"testing"

	"cairn/internal/pgtest"
	"cairn/internal/store"
	"cairn/migrations"
)

// createdTables reads the migrations' own text: every table a CREATE
// TABLE makes and no later DROP TABLE removes.
func createdTables(t *testing.T) []string {
	t.Helper()
	create := regexp.MustCompile(`(?im)^\s*CREATE\s+TABLE\s+(?:IF\s+NOT\s+EXISTS\s+)?(\w+)`)
	drop := regexp.MustCompile(`(?im)^\s*DROP\s+TABLE\s+(?:IF\s+EXISTS\s+)?(\w+)`)
	files, err := fs.Glob(migrations.FS, "*.sql")
	if err != nil {
		t.Fatal(err)
	}
	slices.Sort(files)
	made := map[string]bool{}
	for _, f := range files {
		b, err := fs.ReadFile(migrations.FS, f)
		if err != nil {
			t.Fatal(err)
		}
		// Only the up half of each migration.
		up, _, _ := strings.Cut(string(b), "-- +goose Down")
		for _, m := range create.FindAllStringSubmatch(up, -1) {
			made[strings.ToLower(m[1])] = true
		}
		for _, m := range drop.FindAllStringSubmatch(up, -1) {
			delete(made, strings.ToLower(m[1]))
		}
	}
	var out []string
	for n := range made {
		out = append(out, n)
	}
	slices.Sort(out)
	return out
}

// The counter sees exactly the tables the migrations create, by their
// text and by pg_tables, and not goose's own table.
func TestTableCountSeesEveryTable(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	ctx := context.Background()
	c, err := store.TableCount(ctx, db.Pool)
	if err != nil {
		t.Fatal(err)
	}
	fromMigrations := createdTables(t)
	if len(fromMigrations) < 14 {
		t.Fatalf("read %d tables from the migrations (%v): the reading is broken", len(fromMigrations), fromMigrations)
	}
	if got := c.Tables(); !slices.Equal(got, fromMigrations) {
		t.Errorf("counted %v,\nthe migrations create %v", got, fromMigrations)
	}
	rows, err := db.Pool.Query(ctx, "SELECT tablename FROM pg_tables WHERE schemaname = 'public' AND tablename <> 'goose_db_version' ORDER BY tablename")
	if err != nil {
		t.Fatal(err)
	}
	var fromPgTables []string
	for rows.Next() {
		var n string
		if err := rows.Scan(&n); err != nil {
			t.Fatal(err)
		}
		fromPgTables = append(fromPgTables, n)
	}
	if err := rows.Err(); err != nil {
		t.Fatal(err)
	}
	if got := c.Tables(); !slices.Equal(got, fromPgTables) {
		t.Errorf("counted %v,\npg_tables lists %v", got, fromPgTables)
	}
	if _, ok := c["goose_db_version"]; ok {
		t.Errorf("goose's version table is counted: %v", c)
	}
	for tab, n := range c {
		// The one row of register_cluster is the cluster the register
		// was made in (migrations/00014).
		if want := map[bool]int64{true: 1}[tab == "register_cluster"]; n != want {
			t.Errorf("a fresh register has %d rows in %s, want %d", n, tab, want)
		}
	}
}

// A row written shows in its table's count and no other; a table a later
// migration would add is counted as soon as it exists; a table in another
// schema is not.
func TestTableCountCountsRows(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	ctx := context.Background()
	count := func() store.TableCounts {
		t.Helper()
		c, err := store.TableCount(ctx, db.Pool)
		if err != nil {
			t.Fatal(err)
		}
		return c
	}
	before := count()
	for _, sql := range []string{
		"INSERT INTO datum (code, name, created_by) VALUES ('OBLD61', 'Orrin Bay Local Datum 1961', 'test')",
		"INSERT INTO mark (designation, created_by) VALUES ('TC-0412', 'test'), ('TC-0413', 'test')",
	} {
		if _, err := db.Pool.Exec(ctx, sql); err != nil {
			t.Fatalf("%s: %v", sql, err)
		}
	}
	after := count()
	want := store.TableCounts{}
	for k, v := range before {
		want[k] = v
	}
	// Each statement was a transaction of its own: two commits.
	want["datum"], want["mark"], want["register_commit"] = 1, 2, 2
	if !after.Equal(want) || !reflect.DeepEqual(after, want) {
		t.Fatalf("after a datum and two marks: %v, want %v", after, want)
	}
	if d := before.Diff(after); d != "datum 0 → 1, mark 0 → 2, register_commit 0 → 2" {
		t.Fatalf("diff %q", d)
	}
	if d := after.Diff(want); d != "" {
		t.Fatalf("diff of equal counts %q", d)
	}

	for _, sql := range []string{
		"CREATE TABLE survey_note (id bigint PRIMARY KEY, note text)",
		"INSERT INTO survey_note VALUES (1, 'Mere River gauge'), (2, 'Orrin Bay pier')",
		"CREATE SCHEMA elsewhere",
		"CREATE TABLE elsewhere.scratch (id int)",
		"INSERT INTO elsewhere.scratch VALUES (1)",
		"CREATE TABLE gauge_reading (id int, taken date) PARTITION BY RANGE (taken)",
		"CREATE TABLE gauge_reading_2024 PARTITION OF gauge_reading FOR VALUES FROM ('2024-01-01') TO ('2025-01-01')",
		"INSERT INTO gauge_reading VALUES (1, '2024-05-14'), (2, '2024-06-03'), (3, '2024-07-01')",
	} {
		if _, err := db.Pool.Exec(ctx, sql); err != nil {
			t.Fatalf("%s: %v", sql, err)
		}
	}
	c := count()
	if c.Rows("survey_note") != 2 || c.Rows("gauge_reading") != 3 || len(c) != len(before)+2 {
		t.Fatalf("after a new table, another schema's and a partitioned one: %v", c)
	}
	if _, ok := c["gauge_reading_2024"]; ok {
		t.Fatalf("a partition is counted apart from its parent: %v", c)
	}
	if !strings.HasPrefix(c.String(), "adjustment 0, adjustment_event 0, ") || !strings.Contains(c.String(), ", mark 2, ") {
		t.Fatalf("String: %q", c.String())
	}
}

// Rows refuses a table that was not counted, so a misspelt name cannot
// read as zero rows.
func TestTableCountsRowsOfUnknownTablePanics(t *testing.T) {
	t.Parallel()
	defer func() {
		if r := recover(); r == nil || !strings.Contains(r.(string), `no table "runs"`) {
			t.Fatalf("recovered %v, want a panic naming the table", r)
		}
	}()
	store.TableCounts{"run": 0}.Rows("runs")
}
