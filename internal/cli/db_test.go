package cli

import (
	"context"
	"encoding/json"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"cairn/internal/localpg"
	"cairn/internal/pgtest"
	"cairn/internal/store"
)

// runDB executes cairn with args over f's test streams.
func runDB(t *testing.T, f *Factory, args ...string) (stdout, stderr string, err error) {
	t.Helper()
	ios, _, out, errOut := TestStreams(false)
	f.IO = ios
	err = Execute(context.Background(), f, args)
	return out.String(), errOut.String(), err
}

// testFactory returns a factory that sees only env as its environment.
func testFactory(env map[string]string) *Factory {
	ios, _, _, _ := TestStreams(false)
	f := NewFactory(ios, "test")
	f.Getenv = func(k string) string { return env[k] }
	return f
}

func statusJSON(t *testing.T, f *Factory, args ...string) dbStatus {
	t.Helper()
	out, errOut, err := runDB(t, f, append(args, "db", "status", "-o", "json")...)
	if err != nil {
		t.Fatalf("db status: %v\n%s", err, errOut)
	}
	var st dbStatus
	if err := json.Unmarshal([]byte(out), &st); err != nil {
		t.Fatalf("db status -o json: %v\n%s", err, out)
	}
	return st
}

func TestDBStatusAndMigrateOnServer(t *testing.T) {
	t.Parallel()
	ctx := context.Background()
	db := pgtest.New(t)
	latest, err := store.SchemaLatest()
	if err != nil {
		t.Fatal(err)
	}
	if err := store.MigrateDown(ctx, db.Pool); err != nil {
		t.Fatal(err)
	}

	st := statusJSON(t, testFactory(nil), "--db", db.URL)
	if st.From != "--db" || st.Folder != nil || !st.Running {
		t.Errorf("server: %+v", st)
	}
	if st.SchemaVersion == nil || *st.SchemaVersion != 0 || st.SchemaLatest != latest {
		t.Errorf("empty database: schema %v of %d, want 0 of %d", st.SchemaVersion, st.SchemaLatest, latest)
	}
	if st.RegisterTables || st.Marks != nil || st.HeightVersions != nil {
		t.Errorf("empty database: register tables %v, marks %v", st.RegisterTables, st.Marks)
	}
	out, _, _ := runDB(t, testFactory(nil), "--db", db.URL, "db", "status")
	if !strings.Contains(out, "marks\tschema not yet applied") || !strings.Contains(out, "cairn db migrate") {
		t.Errorf("table status of an empty database:\n%s", out)
	}

	_, errOut, err := runDB(t, testFactory(nil), "--db", db.URL, "db", "migrate")
	if err != nil || !strings.Contains(errOut, "from version 0 to") {
		t.Fatalf("db migrate: %v\n%s", err, errOut)
	}
	st = statusJSON(t, testFactory(nil), "--db", db.URL)
	if st.SchemaVersion == nil || *st.SchemaVersion != latest {
		t.Errorf("after migrate: schema %v, want %d", st.SchemaVersion, latest)
	}
	var tables bool
	if err := db.Pool.QueryRow(ctx, "SELECT to_regclass('mark') IS NOT NULL AND to_regclass('height') IS NOT NULL").Scan(&tables); err != nil {
		t.Fatal(err)
	}
	if st.RegisterTables != tables {
		t.Errorf("register_tables %v, but the tables exist: %v", st.RegisterTables, tables)
	}
	if tables && (st.Marks == nil || *st.Marks != 0 || st.HeightVersions == nil || *st.HeightVersions != 0) {
		t.Errorf("fresh register: marks %v, height versions %v; want 0, 0", st.Marks, st.HeightVersions)
	}
	if _, errOut, err = runDB(t, testFactory(nil), "--db", db.URL, "db", "migrate"); err != nil || !strings.Contains(errOut, "already at version") {
		t.Errorf("second db migrate: %v\n%s", err, errOut)
	}
}

func TestDBStartStopNeedEmbeddedDefault(t *testing.T) {
	t.Parallel()
	for _, verb := range []string{"start", "stop"} {
		_, _, err := runDB(t, testFactory(map[string]string{"CAIRN_DATABASE_URL": "postgres://nobody@127.0.0.1:1/x"}), "db", verb)
		if exitCode(err) != ExitBadInput || err == nil || !strings.Contains(err.Error(), "CAIRN_DATABASE_URL") {
			t.Errorf("db %s on a named server: exit %d, %v", verb, exitCode(err), err)
		}
	}
}

// embeddedRoles checks the two connections of an embedded default: the
// everyday one logs in as a member of cairn_publisher that is neither the
// owner nor a superuser, and cannot set session_replication_role; the
// migrations ran as the owner, which owns the tables.
func embeddedRoles(t *testing.T, f *Factory) {
	t.Helper()
	defer f.Close()
	ctx := context.Background()
	pool, err := f.Conn(ctx)
	if err != nil {
		t.Fatal(err)
	}
	admin, err := f.Admin(ctx)
	if err != nil {
		t.Fatal(err)
	}
	var session, current, owner, migrator string
	var super, publisher bool
	if err := pool.QueryRow(ctx, `SELECT session_user, current_user, r.rolsuper, pg_has_role(current_user, 'cairn_publisher', 'USAGE'),
		(SELECT tableowner FROM pg_tables WHERE tablename = 'height') FROM pg_roles r WHERE r.rolname = current_user`).
		Scan(&session, &current, &super, &publisher, &owner); err != nil {
		t.Fatal(err)
	}
	if err := admin.QueryRow(ctx, "SELECT session_user").Scan(&migrator); err != nil {
		t.Fatal(err)
	}
	if session != localpg.EverydayUser || current != session || super || !publisher || session == owner {
		t.Errorf("everyday connection: session_user %s, current_user %s, superuser %v, publisher %v, owner %s; want %s, a publisher, not the owner",
			session, current, super, publisher, owner, localpg.EverydayUser)
	}
	if migrator != localpg.Superuser || owner != migrator {
		t.Errorf("migrations by %s, tables owned by %s; want both %s", migrator, owner, localpg.Superuser)
	}
	if _, err := pool.Exec(ctx, "SET session_replication_role = replica"); err == nil || !strings.Contains(err.Error(), "permission denied") {
		t.Errorf("everyday connection set session_replication_role: %v", err)
	}
	if _, err := pool.Exec(ctx, "ALTER TABLE height DISABLE TRIGGER ALL"); err == nil || !strings.Contains(err.Error(), "must be owner") {
		t.Errorf("everyday connection disabled triggers: %v", err)
	}
}

// TestDBEmbeddedDefault makes, starts, inspects and stops an embedded
// default in a data folder of the test's own.
func TestDBEmbeddedDefault(t *testing.T) {
	t.Parallel()
	data := t.TempDir()
	if os.Geteuid() == 0 { // the server's user must reach the folder
		for _, d := range []string{filepath.Dir(data), data} {
			if err := os.Chmod(d, 0o711); err != nil {
				t.Fatal(err)
			}
		}
	}
	env := map[string]string{"XDG_DATA_HOME": data, localpg.MakeServerUserEnv: "1"}
	folder := filepath.Join(data, "cairn")
	t.Cleanup(func() { runDB(t, testFactory(env), "db", "stop") })

	st := statusJSON(t, testFactory(env))
	if st.From != "embedded default" || st.Folder == nil || *st.Folder != folder || st.Made || st.Running || st.SchemaVersion != nil {
		t.Fatalf("before start: %+v", st)
	}
	if _, errOut, err := runDB(t, testFactory(env), "db", "start"); err != nil || !strings.Contains(errOut, "running in "+folder) {
		t.Fatalf("db start: %v\n%s", err, errOut)
	}
	st = statusJSON(t, testFactory(env))
	if !st.Made || !st.Running || st.Host == nil || *st.Host != folder || *st.Database != "cairn" {
		t.Errorf("after start: %+v", st)
	}
	if st.SchemaVersion == nil || *st.SchemaVersion != st.SchemaLatest {
		t.Errorf("after start: schema %v of %d", st.SchemaVersion, st.SchemaLatest)
	}
	embeddedRoles(t, testFactory(env))
	if _, errOut, err := runDB(t, testFactory(env), "db", "stop"); err != nil || !strings.Contains(errOut, "stopped") {
		t.Fatalf("db stop: %v\n%s", err, errOut)
	}
	out, _, err := runDB(t, testFactory(env), "db", "status")
	if err != nil || !strings.Contains(out, "server\tstopped") {
		t.Errorf("status after stop: %v\n%s", err, out)
	}
}
