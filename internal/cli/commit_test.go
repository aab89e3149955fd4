package cli

import (
	"context"
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/jackc/pgx/v5"

	"cairn/internal/pgtest"
	"cairn/internal/registertest"
	"cairn/internal/store"
)

// loginOf is the database login role (session_user) of url.
func loginOf(t *testing.T, url string) string {
	t.Helper()
	conn, err := pgx.Connect(context.Background(), url)
	if err != nil {
		t.Fatal(err)
	}
	defer conn.Close(context.Background())
	var role string
	if err := conn.QueryRow(context.Background(), "SELECT session_user").Scan(&role); err != nil {
		t.Fatal(err)
	}
	return role
}

// Every row every command writes carries the login role that wrote it and
// its transaction, beside the --by text; the roles cannot give either
// themselves (migrations/00012).
func TestEveryRowCarriesItsLogin(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	mustRun(t, db.URL, "db", "roles")
	publisher := loginAs(t, db, store.RolePublisher)
	recorder := loginAs(t, db, store.RoleRecorder)
	login := loginOf(t, publisher)
	orig, err := os.ReadFile(workedCircuit)
	if err != nil {
		t.Fatal(err)
	}
	book := func(n int) string {
		p := filepath.Join(t.TempDir(), fmt.Sprintf("copy-%d.csv", n))
		if err := os.WriteFile(p, registertest.SideShot(t, append([]byte(fmt.Sprintf("# copy %d\n", n)), orig...), fmt.Sprint(n)), 0o644); err != nil {
			t.Fatal(err)
		}
		return p
	}
	mustRun(t, publisher, "datum", "add", "NAVD88", "--name", "North American Vertical Datum of 1988", "--by", "Ada Field")
	mustRun(t, publisher, "run", "record", book(1), "--new-marks", "--by", "Ada Field")
	mustRun(t, publisher, "mark", "add", "TC-0412", "--by", "Ada Field")
	mustRun(t, publisher, "mark", "edit", "TC-0412", "--directions", "north end of the Mere River bridge", "--reason", "directions written", "--by", "Ada Field")
	mustRun(t, publisher, "mark", "alias", "TC-0412", "MR 17", "--kind", "agency", "--agency", "Mere River Drainage Board", "--by", "Ada Field")
	mustRun(t, publisher, "mark", "replace", "TC-0412", "TC-0412A", "--reason", "disk lost in the bridge works", "--by", "Ada Field")
	mustRun(t, publisher, "height", "set", "--in-force-from", inForceNow(), "BM1", "728.730", "--unit", "m", "--datum", "NAVD88",
		"--source", "Outside control sheet 1 (invented citation)", "--reason", "held control", "--by", "Ada Field")
	mustRun(t, publisher, "run", "record", book(2), "--hold", "BM1", "--by", "Ada Field")
	mustRun(t, publisher, "mark", "condition", "BM2", "good", "--note", "found as described", "--photo", "close-up="+pngPhoto(t), "--by", "Ada Field")
	mustRun(t, publisher, "adjust", "2", "--hold", "BM1", "--method", "least-squares", "--sigma-mm-per-sqrt-km", "100", "--by", "Ada Field")
	draft := adjustForTest(t, publisher, "1")
	mustRun(t, publisher, "publish", draft, "--reason", "worked circuit, reviewed", "--yes", "--by", "Ada Field")
	// A check run into the marks now published: check_run and
	// check_connection.
	mustRun(t, publisher, "run", "record", book(3), "--check-only", "--hold", "BM1", "--by", "Ada Field")
	mustRun(t, publisher, "run", "void", "2", "--reason", "wrong rod", "--yes", "--by", "Ada Field")
	mustRun(t, publisher, "datum", "add", "TCLD", "--name", "Tallis County local datum (invented)", "--by", "Ada Field")
	mustRun(t, publisher, "import", importSample, "--by", "Ada Field")

	ctx := context.Background()
	counts, err := store.TableCount(ctx, db.Pool)
	if err != nil {
		t.Fatal(err)
	}
	for table, n := range counts {
		if table == "register_cluster" {
			// The clusters the register met, written by its owner's
			// migrations (migrations/00014), not by a command.
			continue
		}
		if n == 0 {
			t.Errorf("%s: no rows written; the test should write every table", table)
			continue
		}
		var bad int64
		q := fmt.Sprintf("SELECT count(*) FROM %s WHERE recorded_role IS DISTINCT FROM $1 OR created_xid IS NULL", pgx.Identifier{table}.Sanitize())
		if table == "register_commit" {
			q = "SELECT count(*) FROM register_commit WHERE login IS DISTINCT FROM $1"
		}
		if err := db.Pool.QueryRow(ctx, q, login).Scan(&bad); err != nil {
			t.Fatalf("%s: %v", table, err)
		}
		if bad != 0 {
			t.Errorf("%s: %d of %d rows without login %s or their transaction", table, bad, n, login)
		}
	}
	// One commit per command that wrote: fourteen.
	if n := counts.Rows("register_commit"); n != 16 {
		t.Errorf("%d commits, want 16 (one per writing command)", n)
	}
	// Nobody gives the login, the transaction or the time of a row.
	conn, err := pgx.Connect(ctx, recorder)
	if err != nil {
		t.Fatal(err)
	}
	defer conn.Close(ctx)
	before := registertest.Counts(t, db.Pool)
	for _, q := range []string{
		"INSERT INTO mark (designation, created_by, recorded_role) VALUES ('TC-0413', 'x', 'somebody')",
		"INSERT INTO mark (designation, created_by, created_xid) VALUES ('TC-0413', 'x', '1')",
		"INSERT INTO mark (designation, created_by, created_at) VALUES ('TC-0413', 'x', '2020-01-01')",
		"INSERT INTO mark_condition (mark_id, condition, observed_on, recorded_by, recorded_at) VALUES (1, 'good', '2024-01-01', 'x', '2020-01-01')",
		"INSERT INTO register_commit (xid, committed_at, login) VALUES ('1', now(), 'somebody')",
	} {
		if _, err := conn.Exec(ctx, q); err == nil || !strings.Contains(err.Error(), "permission denied") {
			t.Errorf("%s: %v, want permission denied", q, err)
		}
	}
	registertest.AssertNothingWritten(t, db.Pool, before)
}

// history and trace, through the binary, say who recorded each version in
// both ways: the name given and the login role, in text and in JSON.
func TestHistoryAndTraceShowTheLogin(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	mustRun(t, db.URL, "db", "roles")
	publisher := loginAs(t, db, store.RolePublisher)
	login := loginOf(t, publisher)
	mustRun(t, publisher, "datum", "add", "NAVD88", "--name", "North American Vertical Datum of 1988")
	mustRun(t, publisher, "mark", "add", "TC-0412")
	mustRun(t, publisher, "height", "set", "--in-force-from", inForceNow(), "TC-0412", "769.83", "--unit", "usft", "--datum", "NAVD88",
		"--source", "Tallis County Benchmark Book (invented)", "--reason", "entered from the book", "--by", "Ada Field")

	want := "Ada Field (login " + login + ")"
	out, errOut, status := binRun(t, publisher, "history", "TC-0412")
	if status != 0 || !strings.Contains(out, want) {
		t.Errorf("history: exit %d, %q %q; want %q", status, out, errOut, want)
	}
	out, errOut, status = binRun(t, publisher, "trace", "TC-0412")
	if status != 0 || !strings.Contains(out, "recorded ") || !strings.Contains(out, " by "+want) {
		t.Errorf("trace: exit %d, %q %q; want by %q", status, out, errOut, want)
	}
	type version struct {
		RecordedBy   string  `json:"recorded_by"`
		RecordedRole *string `json:"recorded_role"`
	}
	out, errOut, status = binRun(t, publisher, "history", "TC-0412", "-o", "json")
	var hist []version
	if err := json.Unmarshal([]byte(out), &hist); status != 0 || err != nil || len(hist) != 1 ||
		hist[0].RecordedBy != "Ada Field" || hist[0].RecordedRole == nil || *hist[0].RecordedRole != login {
		t.Errorf("history -o json: exit %d, %v, %q %q", status, err, out, errOut)
	}
	out, errOut, status = binRun(t, publisher, "trace", "TC-0412", "-o", "json")
	var tr struct{ Versions []version }
	if err := json.Unmarshal([]byte(out), &tr); status != 0 || err != nil || len(tr.Versions) != 1 ||
		tr.Versions[0].RecordedBy != "Ada Field" || tr.Versions[0].RecordedRole == nil || *tr.Versions[0].RecordedRole != login {
		t.Errorf("trace -o json: exit %d, %v, %q %q", status, err, out, errOut)
	}

	// A version from before schema v12 has no login: it says so, and its
	// JSON gives null.
	ctx := context.Background()
	conn, err := db.Pool.Acquire(ctx)
	if err != nil {
		t.Fatal(err)
	}
	defer conn.Release()
	if _, err := conn.Exec(ctx, `SET session_replication_role = replica;
		INSERT INTO mark (designation, created_by) VALUES ('TC-0413', 'old hand');
		INSERT INTO height (mark_id, datum_id, version, value, unit, decimals, source_kind, source, reason, recorded_by, recorded_at, hash, created_xid, recorded_role)
		SELECT m.id, d.id, 1, 12.345, 'm', 3, 'authority', 'old book (invented)', 'entered long ago', 'old hand', '2020-01-01', '\x00', NULL, NULL
		FROM mark m, datum d WHERE m.designation = 'TC-0413';
		SET session_replication_role = origin`); err != nil {
		t.Fatal(err)
	}
	out, errOut, status = binRun(t, publisher, "history", "TC-0413")
	if status != 0 || !strings.Contains(out, "old hand (login not recorded)") {
		t.Errorf("history of a version from before v12: exit %d, %q %q", status, out, errOut)
	}
	out, _, _ = binRun(t, publisher, "history", "TC-0413", "-o", "json")
	if !strings.Contains(out, `"recorded_role": null`) {
		t.Errorf("history -o json of a version from before v12: %s", out)
	}
}

// A write whose server clock is behind the register's latest time is
// refused with a message naming both times, exit status 1, nothing
// written; never stamped a microsecond after the latest. Simulated as the
// owner: a commit stamped an hour ahead (register_commit), and a height
// version recorded an hour ahead with the triggers off.
func TestClockBehindTheRegisterRefused(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	mustRun(t, db.URL, "datum", "add", "NAVD88", "--name", "North American Vertical Datum of 1988")
	mustRun(t, db.URL, "mark", "add", "TC-0412")
	mustRun(t, db.URL, "height", "set", "--in-force-from", inForceNow(), "TC-0412", "769.83", "--unit", "usft", "--datum", "NAVD88",
		"--source", "Tallis County Benchmark Book (invented)", "--reason", "entered from the book")
	ctx := context.Background()
	ahead := time.Now().Add(time.Hour).UTC()

	// The version's chain: its latest version recorded an hour ahead.
	conn, err := db.Pool.Acquire(ctx)
	if err != nil {
		t.Fatal(err)
	}
	for _, q := range []string{"SET session_replication_role = replica",
		`INSERT INTO height (mark_id, datum_id, version, supersedes, value, unit, decimals, source_kind, source, reason, recorded_by, recorded_at, hash)
		SELECT h.mark_id, h.datum_id, 2, h.id, 769.84, 'usft', 2, 'correction', 'x', 'ahead', 'clock', $1, '\x00' FROM height h`,
		"SET session_replication_role = origin"} {
		var args []any
		if strings.Contains(q, "$1") {
			args = append(args, ahead)
		}
		if _, err := conn.Exec(ctx, q, args...); err != nil {
			t.Fatal(err)
		}
	}
	conn.Release()
	before := registertest.Counts(t, db.Pool)
	_, errOut, status := binRun(t, db.URL, "height", "set", "--in-force-from", inForceNow(), "TC-0412", "769.85", "--unit", "usft", "--datum", "NAVD88",
		"--kind", "correction", "--source", "errata (invented)", "--reason", "a later correction")
	if status != ExitFailure || !strings.Contains(errOut, "clock") || !strings.Contains(errOut, "behind") ||
		!strings.Contains(errOut, ahead.Format("2006-01-02 15:04:05")) {
		t.Errorf("height set on a chain ahead of the clock: exit %d, %q; want exit 1 naming the clock and %s", status, errOut, ahead)
	}
	registertest.AssertNothingWritten(t, db.Pool, before)

	// The register's latest commit an hour ahead: any write is refused at
	// its commit.
	if _, err := db.Pool.Exec(ctx, "INSERT INTO register_commit (xid, committed_at, login, seq, manifest, digest, hash)"+
		" VALUES ('1', $1, 'clock', (SELECT coalesce(max(seq), 0) + 1 FROM register_commit), '', sha256(''), sha256(''))", ahead); err != nil {
		t.Fatal(err)
	}
	before = registertest.Counts(t, db.Pool)
	_, errOut, status = binRun(t, db.URL, "mark", "add", "TC-0413")
	if status != ExitFailure || !strings.Contains(errOut, "clock") || !strings.Contains(errOut, "latest commit") ||
		!strings.Contains(errOut, ahead.Format("2006-01-02 15:04:05")) {
		t.Errorf("mark add with the register's latest commit ahead: exit %d, %q; want exit 1 naming the clock and %s", status, errOut, ahead)
	}
	registertest.AssertNothingWritten(t, db.Pool, before)
}

// A condition report or a run observed after today is refused by the
// database itself, whoever writes it and however; today is refused by
// nobody (the latest date anywhere is UTC+14's).
func TestObservedAfterTodayRefusedByTheDatabase(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	mustRun(t, db.URL, "mark", "add", "TC-0412")
	ctx := context.Background()
	tomorrow := time.Now().UTC().Add(14*time.Hour).AddDate(0, 0, 1).Format("2006-01-02")
	today := time.Now().UTC().Format("2006-01-02")
	before := registertest.Counts(t, db.Pool)
	for _, q := range []string{
		"INSERT INTO mark_condition (mark_id, condition, observed_on, recorded_by) SELECT id, 'good', $1::date, 'x' FROM mark",
		"INSERT INTO run (observed_on, unit, file_name, book, book_sha256, recorded_by, checks_failed) VALUES ($1::date, 'm', 'a.csv', 'x', sha256('x'), 'x', 0)",
	} {
		_, err := db.Pool.Exec(ctx, q, tomorrow)
		if err == nil || !strings.Contains(err.Error(), "is in the future") || !strings.Contains(err.Error(), tomorrow) {
			t.Errorf("%s with %s: %v, want a refusal", q, tomorrow, err)
		}
		if _, err := db.Pool.Exec(ctx, q, today); err != nil {
			t.Errorf("%s with today, %s: %v", q, today, err)
		}
	}
	registertest.AssertWrote(t, db.Pool, before, map[string]int64{"mark_condition": 1, "run": 1, "register_commit": 2})

	// Through the binary, a book dated tomorrow names its file, line and
	// field, and nothing is written.
	orig, err := os.ReadFile(workedCircuit)
	if err != nil {
		t.Fatal(err)
	}
	p := filepath.Join(t.TempDir(), "tomorrow.csv")
	if err := os.WriteFile(p, []byte(strings.Replace(string(orig), "# date: 2024-05-14", "# date: "+tomorrow, 1)), 0o644); err != nil {
		t.Fatal(err)
	}
	before = registertest.Counts(t, db.Pool)
	_, errOut, status := binRun(t, db.URL, "run", "record", p, "--new-marks")
	if status != ExitBadInput || !strings.Contains(errOut, "tomorrow.csv:") || !strings.Contains(errOut, `"date"`) || !strings.Contains(errOut, "after today") {
		t.Errorf("run record of a book dated %s: exit %d, %q", tomorrow, status, errOut)
	}
	registertest.AssertNothingWritten(t, db.Pool, before)
}
