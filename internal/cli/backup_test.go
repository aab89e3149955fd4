package cli

import (
	"context"
	"fmt"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"

	"github.com/jackc/pgx/v5"

	"cairn/internal/backup"
	"cairn/internal/pgtest"
	"cairn/internal/registertest"
	"cairn/internal/store"
)

// freshDatabase makes an empty database on db's server, dropped when the
// test ends, and returns its URL.
func freshDatabase(t *testing.T, db *pgtest.DB) string {
	t.Helper()
	name := uniqueName(t, "cairn_restore_")
	ctx := context.Background()
	ident := pgx.Identifier{name}.Sanitize()
	if _, err := db.Pool.Exec(ctx, "CREATE DATABASE "+ident); err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() {
		if _, err := db.Pool.Exec(context.Background(), "DROP DATABASE IF EXISTS "+ident+" WITH (FORCE)"); err != nil {
			t.Errorf("drop %s: %v", name, err)
		}
	})
	u, err := store.WithDatabase(db.URL, name)
	if err != nil {
		t.Fatal(err)
	}
	return u
}

// dropKeptRestore drops, when the test ends, the database a refused
// restore kept for inspection and named in errOut (none if it names none),
// so that no test leaves a database on the server.
func dropKeptRestore(t *testing.T, db *pgtest.DB, errOut string) string {
	t.Helper()
	m := regexp.MustCompile(`database "(cairn_restore_[0-9a-f]+)" is kept as restored`).FindStringSubmatch(errOut)
	if m == nil {
		return ""
	}
	t.Cleanup(func() {
		if _, err := db.Pool.Exec(context.Background(), "DROP DATABASE IF EXISTS "+pgx.Identifier{m[1]}.Sanitize()+" WITH (FORCE)"); err != nil {
			t.Errorf("drop %s: %v", m[1], err)
		}
	})
	return m[1]
}

// chains returns every height version's mark, datum, version, hash and
// time, and the row counts of every table, as one comparable text.
func registerImage(t *testing.T, url string) string {
	t.Helper()
	ctx := context.Background()
	conn, err := pgx.Connect(ctx, url)
	if err != nil {
		t.Fatal(err)
	}
	defer conn.Close(ctx)
	var b strings.Builder
	rows, err := conn.Query(ctx, `SELECT m.designation, d.code, h.version, encode(h.hash, 'hex'), h.recorded_at, h.value::text
		FROM height h JOIN mark m ON m.id = h.mark_id JOIN datum d ON d.id = h.datum_id ORDER BY h.id`)
	if err != nil {
		t.Fatal(err)
	}
	vals, err := pgx.CollectRows(rows, func(r pgx.CollectableRow) ([]any, error) { return r.Values() })
	if err != nil {
		t.Fatal(err)
	}
	for _, v := range vals {
		fmt.Fprintln(&b, v...)
	}
	for _, tab := range registertest.Counts(t, conn).Tables() {
		var n int64
		var sum string
		if err := conn.QueryRow(ctx, "SELECT count(*), md5(coalesce(string_agg(t::text, ',' ORDER BY t::text), '')) FROM "+tab+" t").Scan(&n, &sum); err != nil {
			t.Fatal(err)
		}
		fmt.Fprintf(&b, "%s %d %s\n", tab, n, sum)
	}
	return b.String()
}

// A register backed up and restored into a fresh database is the same,
// row for row: the same versions with the same hashes and times, and its
// audit passes. A backup never overwrites a file; a restore goes only into
// an empty database.
func TestBackupRestore(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	runs, _ := seedWorked(t, db, 2)
	id := adjustForTest(t, db.URL, fmt.Sprint(runs[0]))
	mustRun(t, db.URL, "publish", id, "--reason", "worked circuit, reviewed", "--yes")
	mustRun(t, db.URL, "discard", adjustForTest(t, db.URL, fmt.Sprint(runs[1])), "--reason", "one is enough", "--yes")
	mustRun(t, db.URL, "mark", "condition", "BM3", "disturbed", "--note", "tilted; 'quoted' \\ back-slashed")
	mustRun(t, db.URL, "height", "set", "--in-force-from", inForceNow(), "BM2", "783.250", "--unit", "m", "--datum", "NAVD88",
		"--source", "Outside check (invented citation)", "--reason", "outside check")

	file := filepath.Join(t.TempDir(), "register.dump")
	_, out, _ := run(t, db.URL, "backup", file)
	if !strings.Contains(out, "backed up 6 mark(s) and 7 height version(s)") {
		t.Fatalf("backup: %s", out)
	}
	// The backup is the invoking user's alone, and the temporary file it
	// was written to (of a unique name, beside it) is gone.
	if fi, err := os.Stat(file); err != nil || fi.Mode().Perm() != 0o600 {
		t.Fatalf("backup file: %v, %v; want mode 0600", fi.Mode().Perm(), err)
	}
	if left, _ := filepath.Glob(filepath.Join(filepath.Dir(file), ".*partial*")); len(left) > 0 {
		t.Errorf("temporary files left beside the backup: %v", left)
	}
	if _, errOut, st := run(t, db.URL, "backup", file); st != ExitBadInput || !strings.Contains(errOut, "exists") {
		t.Fatalf("backup over an existing file: exit %d, %s", st, errOut)
	}
	if _, errOut, st := run(t, db.URL, "restore", file); st != ExitBadInput || !strings.Contains(errOut, "not empty") {
		t.Fatalf("restore into the register itself: exit %d, %s", st, errOut)
	}

	fresh := freshDatabase(t, db)
	_, out, _ = run(t, fresh, "restore", file)
	if !strings.Contains(out, "restored 6 mark(s) and 7 height version(s)") || !strings.Contains(out, "audit: 6 chain(s) of 7 version(s) verify") {
		t.Fatalf("restore: %s", out)
	}
	if _, out, st := run(t, fresh, "audit", "verify"); st != 0 || !strings.Contains(out, "verify") {
		t.Fatalf("audit verify after restore: %s", out)
	}
	if a, b := registerImage(t, db.URL), registerImage(t, fresh); a != b {
		t.Fatalf("restored register differs:\n%s\nwant\n%s", b, a)
	}
	// The restored register goes on: triggers and roles came back.
	mustRun(t, fresh, "height", "set", "--in-force-from", inForceNow(), "BM2", "783.251", "--unit", "m", "--datum", "NAVD88",
		"--source", "Outside check 2 (invented citation)", "--reason", "after restore")
	if _, errOut, st := run(t, fresh, "mark", "add", "BM1"); st != ExitBadInput {
		t.Fatalf("unique designation after restore: exit %d, %s", st, errOut)
	}
	conn, err := pgx.Connect(context.Background(), fresh)
	if err != nil {
		t.Fatal(err)
	}
	defer conn.Close(context.Background())
	if _, err := conn.Exec(context.Background(), "DELETE FROM height"); err == nil || !strings.Contains(err.Error(), "append-only") {
		t.Fatalf("delete after restore: %v", err)
	}
	var granted bool
	if err := conn.QueryRow(context.Background(), "SELECT has_any_column_privilege('cairn_publisher', 'height', 'INSERT')").Scan(&granted); err != nil || !granted {
		t.Fatalf("publisher's privileges after restore: %v %v", granted, err)
	}

	// A file that is not a backup is refused, and nothing is written.
	junk := writeBook(t, "junk.dump", []byte("PGDMP but not really"))
	other := freshDatabase(t, db)
	if _, errOut, st := run(t, other, "restore", junk); st != ExitBadInput || !strings.Contains(errOut, "not a backup") {
		t.Fatalf("restore of junk: exit %d, %s", st, errOut)
	}
}

// A backup whose load fails midway (here a foreign key added after its
// rows, which break it: rows written with the triggers off, as by hand)
// leaves nothing behind: the database made for the load is dropped, and
// the database named stays empty. Not parallel: it names the databases
// it expects gone.
func TestRestoreFailedMidwayLeavesNothing(t *testing.T) {
	db := pgtest.New(t)
	seed(t, db.URL)
	ctx := context.Background()
	if _, err := db.Pool.Exec(ctx, `CREATE TABLE zz_parent (id int PRIMARY KEY); CREATE TABLE zz_child (parent int REFERENCES zz_parent);
		SET session_replication_role = replica; INSERT INTO zz_child VALUES (1); RESET session_replication_role`); err != nil {
		t.Fatal(err)
	}
	var version string
	if err := db.Pool.QueryRow(ctx, "SHOW server_version").Scan(&version); err != nil {
		t.Fatal(err)
	}
	file := filepath.Join(t.TempDir(), "broken.dump")
	if err := backup.Dump(ctx, db.URL, version, file); err != nil {
		t.Fatal(err)
	}
	target := freshDatabase(t, db)
	_, errOut, st := run(t, target, "restore", file)
	m := regexp.MustCompile(`database "(cairn_restore_[0-9a-f]+)", made for the load, is dropped`).FindStringSubmatch(errOut)
	if st == 0 || m == nil || !strings.Contains(errOut, "zz_child") {
		t.Fatalf("restore of a backup that fails midway: exit %d, %s", st, errOut)
	}
	var left bool
	if err := db.Pool.QueryRow(ctx, "SELECT EXISTS (SELECT 1 FROM pg_database WHERE datname = $1)", m[1]).Scan(&left); err != nil || left {
		t.Errorf("database %s made for the load: still there %v, %v", m[1], left, err)
	}
	pool, err := store.Open(ctx, target)
	if err != nil {
		t.Fatal(err)
	}
	defer pool.Close()
	if empty, err := store.DatabaseEmpty(ctx, pool); err != nil || !empty {
		t.Errorf("the database named after a failed load: empty %v, %v", empty, err)
	}
}
