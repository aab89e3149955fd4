package cli

import (
	"context"
	"encoding/json"
	"fmt"
	"path/filepath"
	"strings"
	"testing"

	"cairn/internal/backup"
	"cairn/internal/demo"
	"cairn/internal/pgtest"
	"cairn/internal/register"
	"cairn/internal/store"
)

// demoDB builds the invented Tallis County register (internal/demo)
// in a fresh database.
func demoDB(t *testing.T) *pgtest.DB {
	t.Helper()
	db := pgtest.New(t)
	if err := demo.Build(context.Background(), register.New(db.Pool)); err != nil {
		t.Fatalf("demo: %v", err)
	}
	return db
}

// asSuperuser runs statements on one connection of db as the test server's
// superuser, with the triggers off (session_replication_role = replica):
// the one way past the register's triggers, as an intruder with the
// server's keys would go.
func asSuperuser(t *testing.T, db *pgtest.DB, stmts ...string) {
	t.Helper()
	ctx := context.Background()
	conn, err := db.Pool.Acquire(ctx)
	if err != nil {
		t.Fatal(err)
	}
	defer conn.Release()
	for _, q := range append(append([]string{"SET session_replication_role = replica"}, stmts...), "SET session_replication_role = origin") {
		if _, err := conn.Exec(ctx, q); err != nil {
			t.Fatalf("%s: %v", q, err)
		}
	}
}

func queryInt(t *testing.T, db *pgtest.DB, q string) int64 {
	t.Helper()
	var n int64
	if err := db.Pool.QueryRow(context.Background(), q).Scan(&n); err != nil {
		t.Fatalf("%s: %v", q, err)
	}
	return n
}

type auditJSON struct {
	Breaks      []json.RawMessage  `json:"breaks"`
	Runs        int                `json:"runs"`
	Adjustments int                `json:"adjustments"`
	Schema      int                `json:"schema_objects"`
	Findings    []register.Finding `json:"findings"`
}

func auditOf(t *testing.T, url string) (auditJSON, string, int) {
	t.Helper()
	out, errOut, st := binRun(t, url, "audit", "verify", "-o", "json")
	var rep auditJSON
	if err := json.Unmarshal([]byte(out), &rep); err != nil {
		t.Fatalf("audit verify -o json: %v\n%s\n%s", err, out, errOut)
	}
	return rep, errOut, st
}

// An honest register, the demo's, verifies clean through the binary: its
// books reduce to their stored rows, its published adjustment computes
// again to its results and versions, its schema is its migrations'.
func TestAuditVerifyDemoClean(t *testing.T) {
	t.Parallel()
	db := demoDB(t)
	rep, errOut, st := auditOf(t, db.URL)
	if st != 0 || len(rep.Findings) != 0 || len(rep.Breaks) != 0 {
		t.Fatalf("exit %d, findings %+v\n%s", st, rep.Findings, errOut)
	}
	if rep.Runs == 0 || rep.Adjustments == 0 || rep.Schema < 500 {
		t.Fatalf("the demo audit checked %d runs, %d adjustments, %d schema objects: want some of each", rep.Runs, rep.Adjustments, rep.Schema)
	}
	_, errOut, st = binRun(t, db.URL, "audit", "verify")
	if st != 0 || !strings.Contains(errOut, "run(s) parse and reduce to their stored sightings and sections") ||
		!strings.Contains(errOut, "are those its migrations make") {
		t.Fatalf("exit %d: %s", st, errOut)
	}
}

// Stored rows altered past the triggers are found by deriving them again,
// each named with where and what, and the exit status is 3.
func TestAuditVerifyFindsTamperedRows(t *testing.T) {
	t.Parallel()
	for _, c := range []struct {
		name string
		// tamper returns the statements to run, given the demo register.
		tamper func(db *pgtest.DB) []string
		// want are texts of one finding: kind, then parts of where and what.
		kind, where, what string
	}{
		{"sighting", func(db *pgtest.DB) []string {
			return []string{"UPDATE sighting SET middle = middle + 0.001 WHERE run_id = (SELECT min(id) FROM run) AND seq = 3"}
		}, "book", "sighting 3, field middle", "but the book gives"},
		{"section", func(db *pgtest.DB) []string {
			return []string{"UPDATE section SET dh_m = dh_m + 0.010 WHERE run_id = (SELECT min(id) FROM run) AND seq = 1"}
		}, "book", "section 1, field dh_m", "but the book gives"},
		{"published height", func(db *pgtest.DB) []string {
			return []string{"UPDATE height SET value = value + 0.010 WHERE id = (SELECT min(id) FROM height WHERE source_kind = 'adjustment')"}
		}, "height", "version", "but adjustment"},
		{"adjustment result", func(db *pgtest.DB) []string {
			return []string{`UPDATE adjustment_result SET value = value + 0.010, adjusted_m = adjusted_m + 0.010
				WHERE NOT held AND (adjustment_id, seq) = (SELECT adjustment_id, min(seq) FROM adjustment_result WHERE NOT held
				AND adjustment_id IN (SELECT adjustment_id FROM adjustment_event WHERE status = 'published') GROUP BY adjustment_id ORDER BY 1 LIMIT 1)`}
		}, "adjustment", "result of", "but its runs and held heights give"},
		{"height citing a draft", func(db *pgtest.DB) []string {
			runID := queryInt(t, db, "SELECT min(run_id) FROM adjustment_run")
			mark := ""
			if err := db.Pool.QueryRow(context.Background(), `SELECT m.designation FROM adjustment_held ah JOIN height h ON h.id = ah.height_id
				JOIN mark m ON m.id = h.mark_id WHERE ah.adjustment_id = (SELECT min(adjustment_id) FROM adjustment_run WHERE run_id = $1)`, runID).Scan(&mark); err != nil {
				t.Fatal(err)
			}
			mustRun(t, db.URL, "adjust", fmt.Sprint(runID), "--hold", mark)
			return []string{`UPDATE height SET adjustment_id = (SELECT max(a.id) FROM adjustment a WHERE NOT EXISTS (SELECT 1 FROM adjustment_event e WHERE e.adjustment_id = a.id))
				WHERE id = (SELECT min(id) FROM height WHERE source_kind = 'adjustment')`}
		}, "height", "version", "which is draft, not published"},
	} {
		t.Run(c.name, func(t *testing.T) {
			t.Parallel()
			db := demoDB(t)
			asSuperuser(t, db, c.tamper(db)...)
			rep, errOut, st := auditOf(t, db.URL)
			if st != ExitChecks {
				t.Fatalf("exit %d, want %d: %s", st, ExitChecks, errOut)
			}
			found := false
			for _, f := range rep.Findings {
				if f.Kind == c.kind && strings.Contains(f.Where, c.where) && strings.Contains(f.What, c.what) && strings.HasPrefix(f.Since, "after ") {
					found = true
				}
			}
			if !found {
				t.Fatalf("no %s finding at %q saying %q: %+v", c.kind, c.where, c.what, rep.Findings)
			}
			if c.kind == "book" {
				// Where names the run and the book's line.
				if !strings.Contains(rep.Findings[0].Where, "run ") || !strings.Contains(rep.Findings[0].Where, "book line") {
					t.Fatalf("where: %q", rep.Findings[0].Where)
				}
			}
			// The table names it too.
			out, _, _ := binRun(t, db.URL, "audit", "verify")
			if !strings.Contains(out, c.where) {
				t.Fatalf("table output lacks %q:\n%s", c.where, out)
			}
		})
	}
}

// schemaTampers are four ways of undoing the register's rules in its
// schema, each with the text that must name it.
var schemaTampers = []struct {
	name, sql string
	want      []string
}{
	{"trigger dropped", "DROP TRIGGER height_append_only ON height", []string{"trigger height_append_only on public.height", "missing: the migrations make it"}},
	{"refuse_change rewritten", `CREATE OR REPLACE FUNCTION refuse_change() RETURNS trigger LANGUAGE plpgsql
		SET search_path = pg_catalog, public, pg_temp AS $$BEGIN RETURN NULL; END$$`, []string{"function public.refuse_change()", "differs from the migrations'"}},
	{"security definer backdoor", `CREATE FUNCTION public.cairn_maintenance(v text) RETURNS void LANGUAGE plpgsql SECURITY DEFINER
		AS $$BEGIN EXECUTE v; END$$`, []string{"function public.cairn_maintenance(v text)", "unknown SECURITY DEFINER function"}},
	{"trigger disabled", "ALTER TABLE sighting DISABLE TRIGGER sighting_append_only", []string{"trigger sighting_append_only on public.sighting", "the trigger is disabled"}},
}

// A schema altered by its owner or a superuser — a trigger dropped,
// refuse_change() made to do nothing, a SECURITY DEFINER function added, a
// trigger disabled — is found by comparing it with a database migrated
// afresh, each named.
func TestAuditVerifyFindsTamperedSchema(t *testing.T) {
	t.Parallel()
	for _, c := range schemaTampers {
		t.Run(c.name, func(t *testing.T) {
			t.Parallel()
			db := pgtest.New(t)
			if _, err := db.Pool.Exec(context.Background(), c.sql); err != nil {
				t.Fatal(err)
			}
			out, errOut, st := binRun(t, db.URL, "audit", "verify")
			if st != ExitChecks {
				t.Fatalf("exit %d: %s\n%s", st, out, errOut)
			}
			for _, w := range c.want {
				if !strings.Contains(out, w) {
					t.Errorf("output lacks %q:\n%s", w, out)
				}
			}
		})
	}
}

// A backup restored, tampered with (rows and schema), dumped again and
// restored into a new database is refused by restore, with the reasons;
// the honest backup restores and verifies.
func TestRestoreRefusesTamperedDump(t *testing.T) {
	t.Parallel()
	db := demoDB(t)
	dir := t.TempDir()
	honest := filepath.Join(dir, "honest.dump")
	if _, errOut, st := binRun(t, db.URL, "backup", honest); st != 0 {
		t.Fatalf("backup: %s", errOut)
	}
	scratch := freshDatabase(t, db)
	if out, errOut, st := binRun(t, scratch, "restore", honest); st != 0 {
		t.Fatalf("the honest backup: exit %d\n%s\n%s", st, out, errOut)
	}
	sdb := &pgtest.DB{URL: scratch}
	pool, err := store.Open(context.Background(), scratch)
	if err != nil {
		t.Fatal(err)
	}
	defer pool.Close()
	sdb.Pool = pool
	asSuperuser(t, sdb, "UPDATE sighting SET middle = middle + 0.002 WHERE run_id = (SELECT min(id) FROM run) AND seq = 2")
	for _, c := range schemaTampers {
		if c.name == "refuse_change rewritten" || c.name == "trigger dropped" {
			continue // one of each kind is enough here, and the others are tested above
		}
		if _, err := pool.Exec(context.Background(), c.sql); err != nil {
			t.Fatal(err)
		}
	}
	// cairn backup refuses a register whose evidence does not verify (its
	// statement would vouch for it), so the tampered copy is dumped with
	// pg_dump itself, as an attacker would.
	tampered := filepath.Join(dir, "tampered.dump")
	var version string
	if err := pool.QueryRow(context.Background(), "SHOW server_version").Scan(&version); err != nil {
		t.Fatal(err)
	}
	if err := backup.Dump(context.Background(), scratch, version, tampered); err != nil {
		t.Fatalf("pg_dump of the tampered copy: %v", err)
	}
	target := freshDatabase(t, db)
	out, errOut, st := binRun(t, target, "restore", tampered)
	if st != ExitChecks {
		t.Fatalf("restore of a tampered dump: exit %d, want %d\n%s\n%s", st, ExitChecks, out, errOut)
	}
	for _, w := range []string{"sighting 2, field middle", "unknown SECURITY DEFINER function", "public.cairn_maintenance(v text)",
		"trigger sighting_append_only on public.sighting", "the trigger is disabled"} {
		if !strings.Contains(out, w) {
			t.Errorf("restore output lacks %q:\n%s", w, out)
		}
	}
	if !strings.Contains(errOut, "the restore of "+tampered+" is refused") || !strings.Contains(errOut, "kept as restored, for inspection") {
		t.Errorf("restore's refusal: %s", errOut)
	}
	// The copy kept for inspection is a database of its own; the one
	// named stays empty.
	if dropKeptRestore(t, db, errOut) == "" {
		t.Fatalf("restore's refusal names no database kept: %s", errOut)
	}
	if !strings.Contains(errOut, "is left empty") {
		t.Errorf("restore's refusal does not say the target is left empty: %s", errOut)
	}
	tpool, err := store.Open(context.Background(), target)
	if err != nil {
		t.Fatal(err)
	}
	defer tpool.Close()
	if empty, err := store.DatabaseEmpty(context.Background(), tpool); err != nil || !empty {
		t.Errorf("the database restored into after a refusal: empty %v, %v", empty, err)
	}
}
