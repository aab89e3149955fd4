package cli

import (
	"context"
	"errors"
	"fmt"
	"slices"
	"strings"
	"testing"
	"time"

	"github.com/jackc/pgx/v5"
	"github.com/jackc/pgx/v5/pgconn"

	"cairn/internal/pgtest"
	"cairn/internal/registertest"
	"cairn/internal/store"
)

// sealedRegister is a register with history to attack: the worked circuit
// recorded twice (run1, run2), TC-0499 (a mark no run touches), a
// published adjustment of run1 and the owner's draft of run2.
type sealedRegister struct {
	db               *pgtest.DB
	run1, run2       int64
	published, draft int64
}

func newSealedRegister(t *testing.T) *sealedRegister {
	t.Helper()
	db := pgtest.New(t)
	mustRun(t, db.URL, "db", "roles")
	runs, _ := seedWorked(t, db, 2)
	mustRun(t, db.URL, "mark", "add", "TC-0499")
	s := &sealedRegister{db: db, run1: runs[0], run2: runs[1]}
	pub := adjustForTest(t, db.URL, fmt.Sprint(s.run1))
	mustRun(t, db.URL, "publish", pub, "--reason", "worked circuit, reviewed", "--yes")
	draft := adjustForTest(t, db.URL, fmt.Sprint(s.run2))
	for _, x := range []struct {
		s  string
		to *int64
	}{{pub, &s.published}, {draft, &s.draft}} {
		if _, err := fmt.Sscan(x.s, x.to); err != nil {
			t.Fatal(err)
		}
	}
	return s
}

// connectAs connects to the register as a new login member of role.
func connectAs(t *testing.T, db *pgtest.DB, role string) *pgx.Conn {
	t.Helper()
	conn, err := pgx.Connect(context.Background(), loginAs(t, db, role))
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { conn.Close(context.Background()) })
	return conn
}

// sqlState is err's SQLSTATE, "" for none.
func sqlState(err error) string {
	var pe *pgconn.PgError
	if errors.As(err, &pe) {
		return pe.Code
	}
	return ""
}

// Rows that belong to a run or an adjustment are written with it, in its
// transaction, and never after: each attack seen on the register, done
// the same way (the same role, the same SQL), is refused by the database.
// The cases are every table that references run or adjustment, listed from
// the catalog: a new one without its case (and, if it is a child, its
// seal) fails here.
func TestSealedChildren(t *testing.T) {
	t.Parallel()
	s := newSealedRegister(t)
	ctx := context.Background()
	recorder := connectAs(t, s.db, store.RoleRecorder)
	publisher := connectAs(t, s.db, store.RolePublisher)

	type attack struct {
		table string
		// sealed: a child written with its parent (an AFTER INSERT
		// statement trigger of run_child_sealed or adjustment_child_sealed);
		// otherwise why not.
		sealed bool
		why    string
		as     *pgx.Conn
		parent int64
		sql    string
		code   string // SQLSTATE wanted
	}
	attacks := []attack{
		{table: "sighting", sealed: true, as: recorder, parent: s.run1, code: "CA004",
			sql: `INSERT INTO sighting (run_id, seq, line, point, sight, turning_point, middle, distance_from)
				VALUES ($1, 9999, 9999, 'BM3', 'IS', false, 1.234, 'none')`},
		// A section added to a recorded run.
		{table: "section", sealed: true, as: recorder, parent: s.run1, code: "CA004",
			sql: `INSERT INTO section (run_id, seq, from_mark_id, to_mark_id, dh_m, setups, first_line, last_line)
				SELECT $1, 9999, f.id, t.id, 0.5, 1, 1, 1 FROM mark f, mark t WHERE f.designation = 'BM1' AND t.designation = 'TC-0499'`},
		// A run made to touch a mark it never reached.
		{table: "run_mark", sealed: true, as: recorder, parent: s.run1, code: "CA004",
			sql: `INSERT INTO run_mark (run_id, mark_id) SELECT $1, id FROM mark WHERE designation = 'TC-0499'`},
		{table: "run_held", sealed: true, as: recorder, parent: s.run1, code: "CA004",
			sql: `INSERT INTO run_held (run_id, mark_id, value_in_book_unit) SELECT $1, id, 100 FROM mark WHERE designation = 'TC-0499'`},
		// A recorded run made a check run afterwards (adjust would leave
		// it out), or given a check connection it never made.
		{table: "check_run", sealed: true, as: recorder, parent: s.run1, code: "CA004",
			sql: `INSERT INTO check_run (run_id) VALUES ($1)`},
		{table: "check_connection", sealed: true, as: recorder, parent: s.run1, code: "CA004",
			sql: `INSERT INTO check_connection (run_id, seq, from_mark_id, to_mark_id, observed_m, known_m)
				SELECT $1, 1, f.id, t.id, 0.5, 0.5 FROM mark f, mark t WHERE f.designation = 'BM1' AND t.designation = 'TC-0499'`},
		// Voiding is the publisher's, once per run.
		{table: "run_event", why: "an event, decided later: the publisher's alone", as: recorder, parent: s.run1, code: "42501",
			sql: `INSERT INTO run_event (run_id, kind, reason, recorded_by) VALUES ($1, 'voided', 'x', 'x')`},
		{table: "run_event", why: "once per run", as: publisher, parent: s.run1, code: "23505",
			sql: `INSERT INTO run_event (run_id, kind, reason, recorded_by) VALUES ($1, 'voided', 'x', 'x'), ($1, 'voided', 'y', 'y')`},
		{table: "adjustment_run", sealed: true, as: recorder, parent: s.draft, code: "CA004",
			sql: `INSERT INTO adjustment_run (adjustment_id, run_id) SELECT $1, min(id) FROM run`},
		// A held version added to a published adjustment.
		{table: "adjustment_held", sealed: true, as: recorder, parent: s.published, code: "CA004",
			sql: `INSERT INTO adjustment_held (adjustment_id, height_id, mark_id)
				SELECT $1, h.id, h.mark_id FROM height h JOIN mark m ON m.id = h.mark_id WHERE m.designation = 'BM2'`},
		// A forged result in someone else's draft, citing a mark no run
		// of it touched.
		{table: "adjustment_result", sealed: true, as: recorder, parent: s.draft, code: "CA004",
			sql: `INSERT INTO adjustment_result (adjustment_id, mark_id, seq, held, adjusted_m, value, unit, decimals)
				SELECT $1, id, 999, false, 999.99, 999.99, 'm', 2 FROM mark WHERE designation = 'TC-0499'`},
		{table: "adjustment_section", sealed: true, as: recorder, parent: s.draft, code: "CA004",
			sql: `INSERT INTO adjustment_section (adjustment_id, run_id, seq, residual_m, residual_sd_m, flagged)
				SELECT adjustment_id, run_id, 9999, 0, 0, false FROM adjustment_run WHERE adjustment_id = $1`},
		// Publishing is the publisher's, once per adjustment.
		{table: "adjustment_event", why: "an event, decided later: the publisher's alone", as: recorder, parent: s.draft, code: "42501",
			sql: `INSERT INTO adjustment_event (adjustment_id, status, reason, recorded_by) VALUES ($1, 'published', 'x', 'x')`},
		{table: "adjustment_event", why: "once per adjustment", as: publisher, parent: s.published, code: "23505",
			sql: `INSERT INTO adjustment_event (adjustment_id, status, reason, recorded_by) VALUES ($1, 'published', 'again', 'x')`},
		// A height citing an adjustment is written with its publication,
		// never later (say, to bring an old value back).
		{table: "height", why: "a version citing an adjustment is sealed to its publication (height_from_adjustment)", as: publisher,
			parent: s.published, code: "CA004",
			sql: `INSERT INTO height (mark_id, datum_id, supersedes, value, unit, decimals, class, source_kind, source, adjustment_id, reason, recorded_by)
				SELECT r.mark_id, a.datum_id, (SELECT max(h.id) FROM height h WHERE h.mark_id = r.mark_id), r.value, r.unit, r.decimals, r.class,
				       'adjustment', 'again', a.id, 'again', 'x'
				FROM adjustment a JOIN adjustment_result r ON r.adjustment_id = a.id JOIN mark m ON m.id = r.mark_id
				WHERE a.id = $1 AND m.designation = 'BM4'`},
	}

	// Every table referring to a run or an adjustment has its case: by a
	// foreign key, or by a column run_id or adjustment_id whose reference
	// a trigger checks (schema v26: adjustment_result, adjustment_section
	// and height, once a statement).
	rows, err := s.db.Pool.Query(ctx, `SELECT c.conrelid::regclass::text FROM pg_constraint c
		WHERE c.contype = 'f' AND c.confrelid IN ('run'::regclass, 'adjustment'::regclass)
		UNION
		SELECT a.attrelid::regclass::text FROM pg_attribute a JOIN pg_class r ON r.oid = a.attrelid
		WHERE r.relnamespace = 'public'::regnamespace AND r.relkind = 'r' AND a.attname IN ('run_id', 'adjustment_id') AND NOT a.attisdropped
		ORDER BY 1`)
	if err != nil {
		t.Fatal(err)
	}
	children, err := pgx.CollectRows(rows, pgx.RowTo[string])
	if err != nil {
		t.Fatal(err)
	}
	if len(children) < 11 {
		t.Fatalf("children of run and adjustment in the catalog: %v", children)
	}
	for _, c := range children {
		if !slices.ContainsFunc(attacks, func(a attack) bool { return a.table == c }) {
			t.Errorf("table %s refers to a run or an adjustment but has no case here: if its rows are written with their parent, seal it "+
				"(AFTER INSERT ... REFERENCING NEW TABLE AS added FOR EACH STATEMENT EXECUTE FUNCTION run_child_sealed() or adjustment_child_sealed()) "+
				"and add its attack; otherwise add the rule that guards it and its case", c)
		}
	}
	for _, a := range attacks {
		if !slices.Contains(children, a.table) {
			t.Errorf("case of %s, which refers to no run or adjustment", a.table)
		}
		if !a.sealed {
			continue
		}
		var n int
		if err := s.db.Pool.QueryRow(ctx, `SELECT count(*) FROM pg_trigger g JOIN pg_proc p ON p.oid = g.tgfoid
			WHERE g.tgrelid = $1::regclass AND NOT g.tgisinternal AND g.tgenabled = 'O'
			  AND p.proname IN ('run_child_sealed', 'adjustment_child_sealed')
			  AND g.tgtype & 3 = 0 AND g.tgtype & 4 = 4 AND g.tgnewtable IS NOT NULL`, a.table).Scan(&n); err != nil {
			t.Fatal(err)
		}
		if n != 1 {
			t.Errorf("%s has %d seal triggers, want 1", a.table, n)
		}
	}

	before := registertest.Counts(t, s.db.Pool)
	for _, a := range attacks {
		_, err := a.as.Exec(ctx, a.sql, a.parent)
		if got := sqlState(err); got != a.code {
			t.Errorf("%s: %v (SQLSTATE %q), want SQLSTATE %s", a.table, err, got, a.code)
			continue
		}
		if a.code == "CA004" && !strings.Contains(err.Error(), "is sealed") && !strings.Contains(err.Error(), "no height may cite it since") {
			t.Errorf("%s: message %q does not say the record is sealed", a.table, err)
		}
	}
	if !registertest.AssertNothingWritten(t, s.db.Pool, before) {
		t.Error("an attack wrote something")
	}
	mustRun(t, s.db.URL, "audit", "verify")

	// The messages say what was refused and why.
	_, err = recorder.Exec(ctx, attacks[1].sql, s.run1)
	if want := fmt.Sprintf("run %d is sealed: it was recorded whole on ", s.run1); err == nil || !strings.Contains(err.Error(), want) ||
		!strings.Contains(err.Error(), "no section row may be added to it since") {
		t.Errorf("section: %v, want %q", err, want)
	}

	// The transaction that made a parent is stamped by the database: a
	// run cannot be given a later transaction to be added to. The roles
	// may not even name the column (INSERT is granted column by column,
	// 00012), and what the database stamps is the creating transaction.
	_, err = recorder.Exec(ctx, `INSERT INTO run (unit, file_name, book, book_sha256, recorded_by, checks_failed, created_xid, created_server_start)
		VALUES ('m', 'forged.csv', 'x', sha256('x'), 'x', 0, '99999999', '2000-01-01')`)
	if err == nil || !strings.Contains(err.Error(), "permission denied for table run") {
		t.Errorf("a run given its creating transaction: %v, want permission denied", err)
	}
	tx, err := recorder.Begin(ctx)
	if err != nil {
		t.Fatal(err)
	}
	var stamped bool
	if err := tx.QueryRow(ctx, `INSERT INTO run (unit, file_name, book, book_sha256, recorded_by, checks_failed)
		VALUES ('m', 'forged.csv', 'x', sha256('x'), 'x', 0)
		RETURNING created_xid = pg_current_xact_id() AND created_server_start = pg_postmaster_start_time()`).Scan(&stamped); err != nil {
		t.Fatal(err)
	}
	if !stamped {
		t.Error("a run kept the creating transaction its INSERT gave")
	}
	// ... and within its own transaction, its rows go in.
	if _, err := tx.Exec(ctx, `INSERT INTO sighting (run_id, seq, line, point, sight, turning_point, middle, distance_from)
		SELECT max(id), 1, 1, 'BM1', 'BS', false, 1.0, 'none' FROM run`); err != nil {
		t.Errorf("a sighting of a run in the run's own transaction: %v", err)
	}
	if err := tx.Rollback(ctx); err != nil {
		t.Fatal(err)
	}
}

// The triggers read the register's own tables and functions, whatever the
// caller's session holds: a TEMP table named after a table of the register
// (the temporary schema comes first in a search path unless named), and a
// function or operator in a schema of the caller's, change nothing they
// compute. The roles may not make TEMP tables or objects in schema public
// at all.
func TestShadowsChangeNothing(t *testing.T) {
	t.Parallel()
	s := newSealedRegister(t)
	ctx := context.Background()
	login := loginAs(t, s.db, store.RolePublisher)
	publisher, err := pgx.Connect(ctx, login)
	if err != nil {
		t.Fatal(err)
	}
	defer publisher.Close(ctx)
	user := publisher.Config().User
	// The grants below go before the login role does.
	t.Cleanup(func() {
		if _, err := s.db.Pool.Exec(context.Background(), "DROP OWNED BY "+pgx.Identifier{user}.Sanitize()); err != nil {
			t.Errorf("drop what %s owns: %v", user, err)
		}
	})
	recorder := connectAs(t, s.db, store.RoleRecorder)

	// Nobody of the register makes TEMP tables, schemas, or objects in
	// schema public.
	for _, who := range []struct {
		name string
		conn *pgx.Conn
	}{{"recorder", recorder}, {"publisher", publisher}} {
		for _, q := range []string{
			"CREATE TEMP TABLE height (id bigint)",
			"CREATE SCHEMA cairn_mine",
			"CREATE FUNCTION public.format(text, text, integer, text) RETURNS text LANGUAGE sql AS $$SELECT 'forged'$$",
			"CREATE TABLE public.height_copy (id bigint)",
		} {
			if _, err := who.conn.Exec(ctx, q); sqlState(err) != "42501" {
				t.Errorf("%s: %s: %v, want permission denied", who.name, q, err)
			}
		}
	}

	// On a server where TEMPORARY was given back (a restore not followed
	// by cairn db roles, an administrator's grant), the shadows still
	// change nothing.
	if _, err := s.db.Pool.Exec(ctx, fmt.Sprintf("GRANT TEMPORARY ON DATABASE %s TO %s",
		pgx.Identifier{s.db.Pool.Config().ConnConfig.Database}.Sanitize(), pgx.Identifier{user}.Sanitize())); err != nil {
		t.Fatal(err)
	}
	publisher.Close(ctx)
	if publisher, err = pgx.Connect(ctx, login); err != nil {
		t.Fatal(err)
	}
	defer publisher.Close(ctx)

	// 1. A TEMP height whose latest version is dated 2099: the new
	// version must still follow the real latest, dated now.
	var latest int
	if err := s.db.Pool.QueryRow(ctx, `SELECT max(h.version) FROM height h JOIN mark m ON m.id = h.mark_id WHERE m.designation = 'BM2'`).Scan(&latest); err != nil {
		t.Fatal(err)
	}
	for _, q := range []string{
		"CREATE TEMP TABLE height AS SELECT * FROM public.height",
		"UPDATE height SET recorded_at = '2099-01-01T00:00:00Z'",
	} {
		if _, err := publisher.Exec(ctx, q); err != nil {
			t.Fatalf("%s: %v", q, err)
		}
	}
	var at time.Time
	var version int
	if err := publisher.QueryRow(ctx, `INSERT INTO public.height (mark_id, datum_id, supersedes, value, unit, decimals, source_kind, source, reason, recorded_by, in_force_from)
		SELECT h.mark_id, h.datum_id, h.id, 783.250, 'm', 3, 'authority', 'Outside check (invented citation)', 'outside check', 'x', '2024-01-01T00:00:00Z'
		FROM public.height h JOIN public.mark m ON m.id = h.mark_id WHERE m.designation = 'BM2' ORDER BY h.version DESC LIMIT 1
		RETURNING recorded_at, version`).Scan(&at, &version); err != nil {
		t.Fatal(err)
	}
	if at.Year() >= 2099 || time.Since(at) > time.Hour || version != latest+1 {
		t.Errorf("the new version of BM2 is version %d recorded %s; want version %d, recorded now", version, at, latest+1)
	}

	// 2. TEMP publication and results: a draft that never produced 999.99
	// is not cited for it.
	for _, q := range []string{
		"CREATE TEMP TABLE adjustment_event AS SELECT * FROM public.adjustment_event WHERE false",
		fmt.Sprintf(`INSERT INTO adjustment_event (id, adjustment_id, status, reason, recorded_by, recorded_at, created_xid, created_server_start)
			VALUES (1, %d, 'published', 'x', 'x', now(), pg_current_xact_id(), pg_postmaster_start_time())`, s.draft),
		fmt.Sprintf("CREATE TEMP TABLE adjustment_result AS SELECT * FROM public.adjustment_result WHERE adjustment_id = %d", s.draft),
		"UPDATE adjustment_result SET value = 999.99, decimals = 2",
		"CREATE TEMP TABLE adjustment AS SELECT * FROM public.adjustment",
	} {
		if _, err := publisher.Exec(ctx, q); err != nil {
			t.Fatalf("%s: %v", q, err)
		}
	}
	citeDraft := fmt.Sprintf(`INSERT INTO public.height (mark_id, datum_id, supersedes, value, unit, decimals, source_kind, source, adjustment_id, reason, recorded_by)
		SELECT m.id, a.datum_id, (SELECT max(h.id) FROM public.height h WHERE h.mark_id = m.id), 999.99, 'm', 2, 'adjustment', 'forged', a.id, 'forged', 'x'
		FROM public.adjustment a, public.mark m WHERE a.id = %d AND m.designation = 'BM4'`, s.draft)
	if _, err := publisher.Exec(ctx, citeDraft); sqlState(err) != "CA003" || !strings.Contains(err.Error(), "is not published") {
		t.Errorf("a height citing draft %d through TEMP tables: %v, want refused as not published", s.draft, err)
	}

	// 3. A TEMP run stamped with this transaction: a section is still not
	// added to the real, sealed run.
	tx, err := publisher.Begin(ctx)
	if err != nil {
		t.Fatal(err)
	}
	for _, q := range []string{
		"CREATE TEMP TABLE run ON COMMIT DROP AS SELECT * FROM public.run",
		"UPDATE run SET created_xid = pg_current_xact_id(), created_server_start = pg_postmaster_start_time()",
	} {
		if _, err := tx.Exec(ctx, q); err != nil {
			t.Fatalf("%s: %v", q, err)
		}
	}
	_, err = tx.Exec(ctx, `INSERT INTO public.sighting (run_id, seq, line, point, sight, turning_point, middle, distance_from)
		VALUES ($1, 9999, 9999, 'BM3', 'IS', false, 1.234, 'none')`, s.run1)
	if sqlState(err) != "CA004" {
		t.Errorf("a sighting added to run %d through a TEMP run: %v, want refused as sealed", s.run1, err)
	}
	_ = tx.Rollback(ctx)

	// 4. An operator and functions in a schema first in the caller's
	// search path (pg_catalog named after it): an = that is always true, a
	// clock in 2099, a canonical text that is a constant.
	for _, q := range []string{
		"CREATE SCHEMA cairn_shadow",
		"CREATE FUNCTION cairn_shadow.always(numeric, numeric) RETURNS boolean LANGUAGE sql AS 'SELECT true'",
		"CREATE OPERATOR cairn_shadow.= (LEFTARG = numeric, RIGHTARG = numeric, FUNCTION = cairn_shadow.always)",
		"CREATE FUNCTION cairn_shadow.clock_timestamp() RETURNS timestamptz LANGUAGE sql AS $$SELECT '2099-01-01T00:00:00Z'::timestamptz$$",
		"CREATE FUNCTION cairn_shadow.height_canonical(bytea, text, text, public.height) RETURNS text LANGUAGE sql AS $$SELECT 'forged'$$",
		"CREATE FUNCTION cairn_shadow.sha256(bytea) RETURNS bytea LANGUAGE sql AS $$SELECT '\\x00'::bytea$$",
		"GRANT USAGE ON SCHEMA cairn_shadow TO " + pgx.Identifier{user}.Sanitize(),
		"GRANT EXECUTE ON ALL FUNCTIONS IN SCHEMA cairn_shadow TO " + pgx.Identifier{user}.Sanitize(),
	} {
		if _, err := s.db.Pool.Exec(ctx, q); err != nil {
			t.Fatalf("%s: %v", q, err)
		}
	}
	if _, err := publisher.Exec(ctx, "DISCARD TEMP"); err != nil {
		t.Fatal(err)
	}
	if _, err := publisher.Exec(ctx, "SET search_path = cairn_shadow, pg_catalog, public"); err != nil {
		t.Fatal(err)
	}
	var shadowed bool
	if err := publisher.QueryRow(ctx, "SELECT 1.0::numeric = 2.0::numeric AND clock_timestamp() > '2098-01-01'").Scan(&shadowed); err != nil || !shadowed {
		t.Fatalf("the shadows do not work in the session itself (%v): the test would prove nothing", err)
	}
	tx, err = publisher.Begin(ctx)
	if err != nil {
		t.Fatal(err)
	}
	if _, err := tx.Exec(ctx, `INSERT INTO public.adjustment_event (adjustment_id, status, reason, recorded_by) VALUES ($1, 'published', 'forged', 'x')`, s.draft); err != nil {
		t.Fatal(err)
	}
	if _, err := tx.Exec(ctx, citeDraft); sqlState(err) != "CA003" || !strings.Contains(err.Error(), "has no result 999.99 m") {
		t.Errorf("a height of 999.99 citing draft %d with an = always true: %v, want refused", s.draft, err)
	}
	_ = tx.Rollback(ctx)
	if err := publisher.QueryRow(ctx, `INSERT INTO public.height (mark_id, datum_id, supersedes, value, unit, decimals, source_kind, source, reason, recorded_by, in_force_from)
		SELECT h.mark_id, h.datum_id, h.id, 783.251, 'm', 3, 'authority', 'Outside check (invented citation)', 'outside check', 'x', '2024-01-01T00:00:00Z'
		FROM public.height h JOIN public.mark m ON m.id = h.mark_id WHERE m.designation = 'BM2' ORDER BY h.version DESC LIMIT 1
		RETURNING recorded_at, version`).Scan(&at, &version); err != nil {
		t.Fatal(err)
	}
	if at.Year() >= 2099 || time.Since(at) > time.Hour || version != latest+2 {
		t.Errorf("with the shadow clock, the new version of BM2 is version %d recorded %s; want version %d, recorded now", version, at, latest+2)
	}
	// Every hash is the sha256 of the real canonical text (cairn audit
	// verify rebuilds it in Go), and every row follows from its inputs;
	// the audit's only breaks are the schema's: the TEMPORARY given back
	// and what the login made with it.
	rep, errOut, _ := auditOf(t, s.db.URL)
	if len(rep.Breaks) != 0 {
		t.Errorf("audit: chain breaks %s\n%s", rep.Breaks, errOut)
	}
	temporary := false
	for _, f := range rep.Findings {
		if f.Kind != "schema" {
			t.Errorf("audit: %+v", f)
		}
		if f.Where == "grant on the database to "+user && strings.Contains(f.What, "TEMPORARY") {
			temporary = true
		}
	}
	if !temporary {
		t.Errorf("audit: the TEMPORARY given back to %s is not reported: %+v", user, rep.Findings)
	}
}

// Publication computes the draft again from its stored inputs and refuses
// one whose stored results differ, naming the mark and both values, with
// exit status 2, writing nothing. The tampering is done as the database's
// superuser with the triggers off (session_replication_role = replica),
// the one way past the seal and the append-only rules.
func TestPublishRefusesTamperedDraft(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	runs, _ := seedWorked(t, db, 1)
	run1 := fmt.Sprint(runs[0])
	mustRun(t, db.URL, "mark", "add", "TC-0499")
	ctx := context.Background()
	// Untouched, a draft publishes.
	mustRun(t, db.URL, "publish", adjustForTest(t, db.URL, run1), "--reason", "reviewed", "--yes")
	// BM4 of the worked circuit adjusts to 843.337 m (TestAdjustPublishTraceCommands).
	for _, c := range []struct {
		name   string
		tamper string
		want   []string
	}{
		{"value altered", `UPDATE adjustment_result SET value = 999.990 WHERE adjustment_id = $1 AND mark_id = (SELECT id FROM mark WHERE designation = 'BM4')`,
			[]string{"BM4 is stored as 999.990 m, 3 decimals", "give 843.337 m, 3 decimals"}},
		{"decimals altered", `UPDATE adjustment_result SET value = round(value, 2), decimals = 2 WHERE adjustment_id = $1 AND mark_id = (SELECT id FROM mark WHERE designation = 'BM4')`,
			[]string{"BM4 is stored as 843.34 m, 2 decimals", "give 843.337 m, 3 decimals"}},
		{"unit altered", `UPDATE adjustment_result SET unit = 'ft' WHERE adjustment_id = $1 AND mark_id = (SELECT id FROM mark WHERE designation = 'BM4')`,
			[]string{"BM4 is stored as 843.337 ft, 3 decimals", "give 843.337 m, 3 decimals"}},
		{"mark added", `INSERT INTO adjustment_result (adjustment_id, mark_id, seq, held, adjusted_m, value, unit, decimals)
			SELECT $1, id, 999, false, 999.99, 999.990, 'm', 3 FROM mark WHERE designation = 'TC-0499'`,
			[]string{"TC-0499 is stored as 999.990 m, 3 decimals", "give none (no run of the adjustment reaches it)"}},
		{"mark removed", `DELETE FROM adjustment_result WHERE adjustment_id = $1 AND mark_id = (SELECT id FROM mark WHERE designation = 'BM4')`,
			[]string{"BM4 is stored as none", "give 843.337 m, 3 decimals"}},
		{"held mark made adjusted", `UPDATE adjustment_result SET held = false, value = 728.730, unit = 'm', decimals = 3 WHERE adjustment_id = $1 AND mark_id = (SELECT id FROM mark WHERE designation = 'BM1')`,
			[]string{"BM1 is stored as 728.730 m, 3 decimals", "give held"}},
		{"section altered", `UPDATE section SET dh_m = dh_m + 0.5 WHERE run_id = (SELECT run_id FROM adjustment_run WHERE adjustment_id = $1) AND seq = 2`,
			[]string{"BM4 is stored as 843.337 m, 3 decimals, but its runs and held heights give "}},
	} {
		t.Run(c.name, func(t *testing.T) {
			id := adjustForTest(t, db.URL, run1)
			conn, err := db.Pool.Acquire(ctx)
			if err != nil {
				t.Fatal(err)
			}
			var adj int64
			if _, err := fmt.Sscan(id, &adj); err != nil {
				t.Fatal(err)
			}
			for _, q := range []string{"SET session_replication_role = replica", c.tamper, "RESET session_replication_role"} {
				var args []any
				if q == c.tamper {
					args = []any{adj}
				}
				if _, err := conn.Exec(ctx, q, args...); err != nil {
					conn.Release()
					t.Fatalf("%s: %v", q, err)
				}
			}
			conn.Release()
			before := registertest.Counts(t, db.Pool)
			_, errOut, status := run(t, db.URL, "publish", id, "--reason", "reviewed", "--yes")
			if status != ExitBadInput {
				t.Errorf("publish: exit %d, want %d: %s", status, ExitBadInput, errOut)
			}
			for _, w := range append([]string{fmt.Sprintf("adjustment %s does not follow from its stored inputs, so it is not published (nothing was written)", id)}, c.want...) {
				if !strings.Contains(errOut, w) {
					t.Errorf("publish: %q, want %q", errOut, w)
				}
			}
			registertest.AssertNothingWritten(t, db.Pool, before)
		})
	}
}
