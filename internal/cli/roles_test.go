package cli

import (
	"context"
	"crypto/rand"
	"encoding/hex"
	"encoding/json"
	"fmt"
	"net/url"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/jackc/pgx/v5"

	"cairn/internal/pgtest"
	"cairn/internal/registertest"
	"cairn/internal/store"
)

// loginAs makes a login role with a unique name and password, a member of
// role, and returns db's URL for it; the role is dropped when the test
// ends. (A throwaway cluster asks every role for its password.)
func loginAs(t *testing.T, db *pgtest.DB, role string) string {
	t.Helper()
	name := uniqueName(t, "cairn_t_"+strings.TrimPrefix(role, "cairn_")+"_")
	password := uniqueName(t, "pw")
	ident := pgx.Identifier{name}.Sanitize()
	ctx := context.Background()
	if _, err := db.Pool.Exec(ctx, "CREATE ROLE "+ident+" LOGIN PASSWORD '"+password+"' IN ROLE "+pgx.Identifier{role}.Sanitize()); err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() {
		if _, err := db.Pool.Exec(context.Background(), "DROP ROLE IF EXISTS "+ident); err != nil {
			t.Errorf("drop role %s: %v", name, err)
		}
	})
	u, err := url.Parse(db.URL)
	if err != nil {
		t.Fatal(err)
	}
	if q := u.Query(); q.Has("user") {
		q.Set("user", name)
		q.Set("password", password)
		u.RawQuery = q.Encode()
	} else {
		u.User = url.UserPassword(name, password)
	}
	return u.String()
}

// uniqueName returns prefix and twelve random hex digits.
func uniqueName(t *testing.T, prefix string) string {
	t.Helper()
	b := make([]byte, 6)
	if _, err := rand.Read(b); err != nil {
		t.Fatal(err)
	}
	return prefix + hex.EncodeToString(b)
}

// adjustForTest makes a draft adjustment of run holding BM1 and returns
// its identifier.
func adjustForTest(t *testing.T, url, runID string) string {
	t.Helper()
	var rep adjustmentJSON
	if err := json.Unmarshal([]byte(mustRun(t, url, "adjust", runID, "--hold", "BM1", "-o", "json")), &rep); err != nil {
		t.Fatal(err)
	}
	return fmt.Sprint(*rep.AdjustmentID)
}

// refused runs a command that must fail for want of role, and checks that
// nothing was written.
func refused(t *testing.T, db *pgtest.DB, url, role string, args ...string) {
	t.Helper()
	before := registertest.Counts(t, db.Pool)
	_, errOut, status := run(t, url, args...)
	if status == 0 || !strings.Contains(errOut, "permission denied") || !strings.Contains(errOut, "needs role "+role) {
		t.Errorf("cairn %s: exit %d, %q; want a refusal naming %s", strings.Join(args, " "), status, errOut, role)
	}
	if !registertest.AssertNothingWritten(t, db.Pool, before) {
		t.Errorf("cairn %s was refused but the register changed", strings.Join(args, " "))
	}
}

// Each role may do its own work and nothing more: the reader looks up but
// cannot record, report a condition, publish or alter anything; the
// recorder records but cannot publish; the publisher publishes. Every
// refusal names the role needed and writes nothing. Nobody, through SQL
// of their own, can change or remove history.
func TestRolesPrivileges(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	mustRun(t, db.URL, "db", "roles")
	runs, _ := seedWorked(t, db, 2)
	run1, run2 := fmt.Sprint(runs[0]), fmt.Sprint(runs[1])
	draft := adjustForTest
	ownerDraft := draft(t, db.URL, run1)

	reader := loginAs(t, db, store.RoleReader)
	recorder := loginAs(t, db, store.RoleRecorder)
	publisher := loginAs(t, db, store.RolePublisher)

	book := filepath.Join(t.TempDir(), "copy-3.csv")
	orig, err := os.ReadFile(workedCircuit)
	if err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(book, registertest.SideShot(t, append([]byte("# copy 3\n"), orig...), "copy 3"), 0o644); err != nil {
		t.Fatal(err)
	}

	// The reader looks up everything.
	for _, args := range [][]string{
		{"mark", "list"}, {"mark", "show", "BM1"}, {"height", "show", "BM1"}, {"history", "BM1"},
		{"audit", "verify"}, {"run", "list"}, {"run", "show", run1}, {"adjustment", "list"},
		{"adjustment", "show", ownerDraft}, {"trace", "BM1"}, {"stale"}, {"datum", "list"},
	} {
		mustRun(t, reader, args...)
	}
	// ... and writes nothing.
	refused(t, db, reader, store.RoleRecorder, "mark", "add", "TC-0412")
	refused(t, db, reader, store.RoleRecorder, "mark", "condition", "BM2", "disturbed", "--note", "post tilted")
	refused(t, db, reader, store.RoleRecorder, "run", "record", book)
	refused(t, db, reader, store.RoleRecorder, "adjust", run1, "--hold", "BM1")
	refused(t, db, reader, store.RolePublisher, "height", "set", "--in-force-from", inForceNow(), "BM2", "783.250", "--unit", "m", "--datum", "NAVD88",
		"--source", "Outside check (invented citation)", "--reason", "outside check")
	refused(t, db, reader, store.RolePublisher, "publish", ownerDraft, "--reason", "reviewed", "--yes")
	refused(t, db, reader, store.RolePublisher, "discard", ownerDraft, "--reason", "not wanted", "--yes")
	refused(t, db, reader, store.RolePublisher, "datum", "add", "OBLD61", "--name", "Orrin Bay Local Datum 1961")
	refused(t, db, reader, store.RolePublisher, "run", "void", run1, "--reason", "wrong rod", "--yes")

	// The recorder records, reports conditions, adds marks and makes drafts.
	mustRun(t, recorder, "mark", "add", "TC-0412")
	mustRun(t, recorder, "mark", "condition", "BM6", "good", "--note", "found as described")
	mustRun(t, recorder, "run", "record", book)
	// A run held from the register keeps its held version (run_held),
	// which the recorder may write.
	held := filepath.Join(t.TempDir(), "copy-4.csv")
	if err := os.WriteFile(held, registertest.SideShot(t, append([]byte("# copy 4\n"), orig...), "copy 4"), 0o644); err != nil {
		t.Fatal(err)
	}
	mustRun(t, recorder, "run", "record", held, "--hold", "BM1")
	recorderDraft := draft(t, recorder, run2)
	// A least-squares draft also keeps each section's residual
	// (adjustment_section), which the recorder may write.
	mustRun(t, recorder, "adjust", run1, "--hold", "BM1", "--method", "least-squares", "--sigma-mm-per-sqrt-km", "100", "-o", "json")
	// ... but publishes nothing.
	refused(t, db, recorder, store.RolePublisher, "publish", recorderDraft, "--reason", "reviewed", "--yes")
	refused(t, db, recorder, store.RolePublisher, "discard", ownerDraft, "--reason", "not wanted", "--yes")
	refused(t, db, recorder, store.RolePublisher, "height", "set", "--in-force-from", inForceNow(), "BM2", "783.250", "--unit", "m", "--datum", "NAVD88",
		"--source", "Outside check (invented citation)", "--reason", "outside check")
	refused(t, db, recorder, store.RolePublisher, "datum", "add", "OBLD61", "--name", "Orrin Bay Local Datum 1961")
	// Voiding evidence is a publisher's decision.
	refused(t, db, recorder, store.RolePublisher, "run", "void", run1, "--reason", "wrong rod", "--yes")

	// The publisher publishes and discards.
	mustRun(t, publisher, "discard", ownerDraft, "--reason", "superseded by the recorder's draft", "--yes")
	mustRun(t, publisher, "publish", recorderDraft, "--reason", "worked circuit, reviewed", "--yes")
	mustRun(t, publisher, "height", "set", "--in-force-from", inForceNow(), "BM2", "783.250", "--unit", "m", "--datum", "NAVD88",
		"--source", "Outside check (invented citation)", "--reason", "outside check")
	mustRun(t, publisher, "datum", "add", "OBLD61", "--name", "Orrin Bay Local Datum 1961")
	mustRun(t, publisher, "run", "void", run1, "--reason", "wrong rod", "--yes")
	mustRun(t, reader, "audit", "verify")

	// No role alters anything with SQL of its own: every statement is
	// refused for want of privilege, before any trigger.
	alter := []string{
		"UPDATE height SET reason = 'rewritten'", "DELETE FROM height", "TRUNCATE height",
		"UPDATE mark SET to_reach = 'moved'", "DELETE FROM mark", "UPDATE datum SET note = 'x'",
		"UPDATE run SET crew = 'x'", "DELETE FROM sighting", "DELETE FROM mark_condition",
		"UPDATE adjustment_event SET reason = 'x'", "DELETE FROM adjustment_result", "TRUNCATE run CASCADE",
		"UPDATE run_held SET value_in_book_unit = 0", "DELETE FROM run_held",
		"INSERT INTO goose_db_version (version_id, is_applied) VALUES (99, true)",
		"UPDATE run_event SET reason = 'x'", "DELETE FROM run_event", "TRUNCATE run_event",
	}
	for _, who := range []struct{ name, url string }{{"reader", reader}, {"recorder", recorder}, {"publisher", publisher}} {
		conn, err := pgx.Connect(context.Background(), who.url)
		if err != nil {
			t.Fatal(err)
		}
		for _, sql := range alter {
			_, err := conn.Exec(context.Background(), sql)
			if err == nil || !strings.Contains(err.Error(), "SQLSTATE 42501") {
				t.Errorf("%s: %s: %v, want permission denied", who.name, sql, err)
			}
		}
		conn.Close(context.Background())
	}
	// The reader inserts nothing either.
	conn, err := pgx.Connect(context.Background(), reader)
	if err != nil {
		t.Fatal(err)
	}
	defer conn.Close(context.Background())
	for _, sql := range []string{
		"INSERT INTO mark (designation, created_by) VALUES ('TC-0499', 'x')",
		"INSERT INTO mark_condition (mark_id, condition, observed_on, recorded_by) SELECT id, 'good', now(), 'x' FROM mark LIMIT 1",
		"SELECT 1 FROM mark FOR UPDATE", "SELECT cairn_roles_apply()",
	} {
		if _, err := conn.Exec(context.Background(), sql); err == nil || !strings.Contains(err.Error(), "SQLSTATE 42501") {
			t.Errorf("reader: %s: %v, want permission denied", sql, err)
		}
	}
}

// cairn db roles again changes nothing and lists the three roles.
func TestDBRolesIdempotent(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	var first, second []roleJSON
	for _, into := range []*[]roleJSON{&first, &second} {
		if err := json.Unmarshal([]byte(mustRun(t, db.URL, "db", "roles", "-o", "json")), into); err != nil {
			t.Fatal(err)
		}
	}
	// Other tests (and other registers on the same server: roles are the
	// cluster's) add and drop login members meanwhile: compare the roles
	// and their membership in one another.
	groups := func(rs []roleJSON) string {
		var b strings.Builder
		for _, r := range rs {
			fmt.Fprint(&b, r.Role, r.Exists, r.May)
			for _, m := range r.Members {
				if m == store.RoleReader || m == store.RoleRecorder || m == store.RolePublisher {
					fmt.Fprint(&b, " ", m)
				}
			}
			b.WriteString(";")
		}
		return b.String()
	}
	if len(first) != 3 || first[0].Role != store.RoleReader || !first[2].Exists || groups(first) != groups(second) ||
		!strings.Contains(groups(first), "audit cairn_recorder;") {
		t.Fatalf("db roles: %+v then %+v", first, second)
	}
}
