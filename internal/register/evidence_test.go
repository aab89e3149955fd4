package register_test

import (
	"crypto/sha256"
	"encoding/hex"
	"fmt"
	"strings"
	"testing"

	"github.com/jackc/pgx/v5/pgxpool"

	"cairn/internal/booktest"
	"cairn/internal/register"
	"cairn/internal/registertest"
	"cairn/internal/store"
)

// evidenceFixture records a register with rows in as many tables as the
// register's use cases write: a worked circuit, a condition report, an
// adjustment published, a run voided.
func evidenceFixture(t *testing.T) *registertest.Bundle {
	b := registertest.Setup(t)
	runs := b.WorkedCircuit(t, registertest.WorkedCircuitOpts{Copies: 2})
	b.Condition(t, registertest.ConditionOpts{Designation: "BM1"})
	v := b.Adjustment(t, registertest.AdjustmentOpts{Runs: runs[:1]})
	b.Publication(t, v.Adjustment.ID, registertest.PublicationOpts{})
	if _, err := b.Reg.VoidRun(b.Ctx, register.VoidRunParams{RunID: runs[1], Reason: "copy of run 1", By: "test"}); err != nil {
		t.Fatal(err)
	}
	return b
}

// Every table of the register (listed from the catalog, so that a new
// table not in the evidence fails here) is in the evidence, and a row of
// each deleted, edited, or moved to another commit, by the superuser with
// the triggers off, is reported by the audit, naming the table and the
// commit that wrote it. The register's own ledgers are not rows of a
// commit: register_commit is the chain itself, and register_cluster
// (migrations/00014) only the base of its numbers in each cluster, whose
// lowering makes numbers meet again, which the chain reports.
func TestEvidenceEveryTableTampered(t *testing.T) {
	t.Parallel()
	b := evidenceFixture(t)
	ctx, pool := b.Ctx, b.DB.Pool
	rep, err := b.Reg.EvidenceVerify(ctx, nil)
	if err != nil || len(rep.Breaks) != 0 {
		t.Fatalf("untouched register: %v %+v", err, rep.Breaks)
	}
	inEvidence := map[string]bool{}
	for _, e := range store.EvidenceTables {
		inEvidence[e.Name] = true
	}
	rows, err := pool.Query(ctx, "SELECT tablename FROM pg_tables WHERE schemaname = 'public' AND tablename NOT IN ('goose_db_version', 'register_commit', 'register_cluster') ORDER BY 1")
	if err != nil {
		t.Fatal(err)
	}
	var tables []string
	for rows.Next() {
		var n string
		rows.Scan(&n)
		tables = append(tables, n)
	}
	rows.Close()
	for _, tbl := range tables {
		if !inEvidence[tbl] {
			t.Errorf("table %s is not in the evidence (store.EvidenceTables, cairn_evidence_tables)", tbl)
		}
	}
	for _, tbl := range tables {
		var n int
		pool.QueryRow(ctx, "SELECT count(*) FROM "+tbl).Scan(&n)
		if n == 0 {
			t.Logf("the fixture wrote no row of %s: not tampered here", tbl)
			continue
		}
		for _, how := range []string{"delete", "edit", "move"} {
			t.Run(tbl+"/"+how, func(t *testing.T) {
				var seq int64
				// The commit of the row tampered with.
				if err := pool.QueryRow(ctx, "SELECT c.seq FROM register_commit c JOIN "+tbl+" r ON r.created_xid = c.xid ORDER BY r.ctid LIMIT 1").Scan(&seq); err != nil {
					t.Fatal(err)
				}
				tx, err := pool.Begin(ctx)
				if err != nil {
					t.Fatal(err)
				}
				defer tx.Rollback(ctx)
				tx.Exec(ctx, "SET LOCAL session_replication_role = replica")
				var q string
				switch how {
				case "delete":
					q = "DELETE FROM " + tbl + " WHERE ctid = (SELECT ctid FROM " + tbl + " ORDER BY ctid LIMIT 1)"
				case "edit":
					// An edit of the row's text: its recorded_role, which every table has.
					q = "UPDATE " + tbl + " SET recorded_role = 'someone' WHERE ctid = (SELECT ctid FROM " + tbl + " ORDER BY ctid LIMIT 1)"
				case "move":
					q = "UPDATE " + tbl + " SET created_xid = (SELECT xid FROM register_commit WHERE seq <> " +
						"(SELECT c.seq FROM register_commit c JOIN " + tbl + " r ON r.created_xid = c.xid ORDER BY r.ctid LIMIT 1) ORDER BY seq DESC LIMIT 1)" +
						" WHERE ctid = (SELECT ctid FROM " + tbl + " ORDER BY ctid LIMIT 1)"
				}
				if tag, err := tx.Exec(ctx, q); err != nil || tag.RowsAffected() != 1 {
					t.Fatalf("%s: %v %v", q, tag, err)
				}
				if err := tx.Commit(ctx); err != nil {
					t.Fatal(err)
				}
				rep, err := b.Reg.EvidenceVerify(ctx, nil)
				if err != nil {
					t.Fatal(err)
				}
				found := false
				for _, br := range rep.Breaks {
					if br.Table == tbl && br.Seq == seq {
						found = true
					}
				}
				if !found {
					t.Errorf("%s of a %s row of commit %d not reported: %+v", how, tbl, seq, rep.Breaks)
				}
			})
			// Each case on a fresh copy: start again.
			b = evidenceFixture(t)
			ctx, pool = b.Ctx, b.DB.Pool
		}
	}
}

// BenchmarkEvidenceVerify20k verifies the commit chain of the largest
// register the benchmarks build: a run of 20 001 setups and 20 001 new
// marks, adjusted and published (20 000 versions).
func BenchmarkEvidenceVerify20k(b *testing.B) {
	fx := registertest.Setup(b)
	fx.Datum(b, registertest.DatumOpts{})
	loop := booktest.Loop{Setups: 20001, MarkEvery: 1, Seed: 1}
	rec := fx.Run(b, registertest.RunOpts{Path: "large.csv", Book: loop.Book(), By: "bench", NewMarks: true})
	fx.Height(b, registertest.HeightOpts{Designation: "TC-1001", Value: "100.000", Unit: "m", Source: "invented", Reason: "bench", By: "bench"})
	v := fx.Adjustment(b, registertest.AdjustmentOpts{Runs: []int64{rec.Run.ID}, Hold: []string{"TC-1001"}, By: "bench"})
	fx.Publication(b, v.Adjustment.ID, registertest.PublicationOpts{Reason: "bench", By: "bench"})
	for b.Loop() {
		rep, err := fx.Reg.EvidenceVerify(fx.Ctx, nil)
		if err != nil || len(rep.Breaks) != 0 {
			b.Fatal(err, rep.Breaks)
		}
	}
}

// A commit's manifest hashed in pieces (migrations/00022): with pieces of
// 4 rows (cairn.manifest_piece_rows, set for the recording session), a
// run of 20 setups and new marks writes more than one piece of marks and
// sightings. Each such line is "rows pieces-of 4 sha256", whose digest
// this test recomputes by the documented rule with crypto/sha256
// (SHA-256, FIPS 180-4): the rows' canonical texts in key order, a
// newline after each, cut every 4 rows, each piece hashed, the pieces'
// 32-byte digests hashed in order. A table of at most one piece keeps the
// form of v21 (the digest of all its rows' text). The audit verifies
// both forms, and still finds a row edited in the second piece.
func TestEvidenceManifestInPieces(t *testing.T) {
	t.Parallel()
	b := registertest.Setup(t)
	cfg, err := pgxpool.ParseConfig(b.DB.URL)
	if err != nil {
		t.Fatal(err)
	}
	cfg.ConnConfig.RuntimeParams["cairn.manifest_piece_rows"] = "4"
	pool, err := pgxpool.NewWithConfig(b.Ctx, cfg)
	if err != nil {
		t.Fatal(err)
	}
	defer pool.Close()
	pieced := &registertest.Bundle{Ctx: b.Ctx, DB: b.DB, Reg: register.New(pool)}
	pieced.Datum(t, registertest.DatumOpts{})
	rec := pieced.Run(t, registertest.RunOpts{Book: booktest.Loop{Setups: 20, MarkEvery: 2, Seed: 3}.Book(), NewMarks: true})

	var manifest string
	if err := b.DB.Pool.QueryRow(b.Ctx, `SELECT c.manifest FROM register_commit c JOIN run r ON r.created_xid = c.xid WHERE r.id = $1`, rec.Run.ID).Scan(&manifest); err != nil {
		t.Fatal(err)
	}
	lines := map[string]string{}
	for _, l := range strings.Split(strings.TrimSuffix(manifest, "\n"), "\n") {
		name, rest, _ := strings.Cut(l, " ")
		lines[name] = rest
	}
	keys := map[string]string{}
	for _, e := range store.EvidenceTables {
		keys[e.Name] = e.Key
	}
	piecedTables := 0
	for name, line := range lines {
		rows, err := b.DB.Pool.Query(b.Ctx, fmt.Sprintf(`SELECT (to_jsonb(r) - 'created_xid'
			- CASE WHEN %[1]s = 'height' AND (to_jsonb(r) ->> 'in_force_from') IS NULL THEN 'in_force_from' ELSE '' END
			- CASE WHEN %[1]s = 'run' AND (to_jsonb(r) ->> 'standards_profile') IS NULL THEN '{standards_profile,standards_version,standards_source,standards_file}'::text[]
			       WHEN %[1]s = 'run' AND (to_jsonb(r) ->> 'standards_file') IS NULL THEN '{standards_file}'::text[] ELSE '{}'::text[] END)::text
			FROM public.%[2]s r WHERE created_xid = (SELECT created_xid FROM run WHERE id = $1) ORDER BY %[3]s`, "'"+name+"'", name, keys[name]), rec.Run.ID)
		if err != nil {
			t.Fatal(err)
		}
		var texts []string
		for rows.Next() {
			var s string
			rows.Scan(&s)
			texts = append(texts, s)
		}
		rows.Close()
		var want string
		if len(texts) <= 4 {
			h := sha256.Sum256([]byte(strings.Join(texts, "\n") + "\n"))
			want = fmt.Sprintf("%d %s", len(texts), hex.EncodeToString(h[:]))
		} else {
			piecedTables++
			var digests []byte
			for i := 0; i < len(texts); i += 4 {
				h := sha256.Sum256([]byte(strings.Join(texts[i:min(i+4, len(texts))], "\n") + "\n"))
				digests = append(digests, h[:]...)
			}
			h := sha256.Sum256(digests)
			want = fmt.Sprintf("%d pieces-of 4 %s", len(texts), hex.EncodeToString(h[:]))
		}
		if line != want {
			t.Errorf("manifest line of %s:\n got %s\nwant %s", name, line, want)
		}
	}
	if piecedTables < 2 || !strings.Contains(lines["sighting"], "pieces-of 4") || !strings.Contains(lines["mark"], "pieces-of 4") {
		t.Fatalf("the run's commit has %d tables in pieces; want mark and sighting among them:\n%s", piecedTables, manifest)
	}
	if rep, err := b.Reg.EvidenceVerify(b.Ctx, nil); err != nil || len(rep.Breaks) != 0 {
		t.Fatalf("untouched register: %v %+v", err, rep.Breaks)
	}

	// A sighting of the second piece edited behind the register's back.
	tx, err := b.DB.Pool.Begin(b.Ctx)
	if err != nil {
		t.Fatal(err)
	}
	tx.Exec(b.Ctx, "SET LOCAL session_replication_role = replica")
	if tag, err := tx.Exec(b.Ctx, `UPDATE sighting SET recorded_role = 'someone' WHERE run_id = $1 AND seq = (SELECT seq FROM sighting WHERE run_id = $1 ORDER BY seq OFFSET 5 LIMIT 1)`, rec.Run.ID); err != nil || tag.RowsAffected() != 1 {
		t.Fatal(tag, err)
	}
	if err := tx.Commit(b.Ctx); err != nil {
		t.Fatal(err)
	}
	rep, err := b.Reg.EvidenceVerify(b.Ctx, nil)
	if err != nil {
		t.Fatal(err)
	}
	if len(rep.Breaks) != 1 || rep.Breaks[0].Table != "sighting" {
		t.Errorf("a sighting of the second piece edited: breaks %+v, want one, of sighting", rep.Breaks)
	}
}

// A large commit's tables are read on two transactions at once, on one
// snapshot (evidencePeer); the split is lowered here to one row, so that
// every commit of the fixture is shared out. The chain recomputed so ends
// at the head recomputed on one transaction, and a row edited behind the
// register's back in every table the fixture writes (its recorded_role,
// by the superuser with the triggers off) is reported for each, naming
// the table and the commit that wrote it, whichever transaction read it.
func TestEvidenceCommitReadOnTwoTransactions(t *testing.T) {
	b := evidenceFixture(t)
	ctx, pool := b.Ctx, b.DB.Pool
	one, err := b.Reg.EvidenceVerify(ctx, nil)
	if err != nil || len(one.Breaks) != 0 {
		t.Fatalf("untouched register, one transaction: %v %+v", err, one.Breaks)
	}
	done := register.SetEvidenceSplit(1)
	two, err := b.Reg.EvidenceVerify(ctx, nil)
	if split := done(); split < 2 {
		t.Fatalf("%d commit(s) read on two transactions, want every commit of the fixture's", split)
	}
	if err != nil || len(two.Breaks) != 0 || two.Head != one.Head || two.Commits != one.Commits {
		t.Fatalf("untouched register, two transactions: %v, head %s (one: %s), %d commits (one: %d), %+v", err, two.Head, one.Head, two.Commits, one.Commits, two.Breaks)
	}
	for tbl, n := range one.Rows {
		if two.Rows[tbl] != n {
			t.Errorf("%s: %d rows on two transactions, %d on one", tbl, two.Rows[tbl], n)
		}
	}
	want := map[string]int64{} // table: the commit of the row edited
	tx, err := pool.Begin(ctx)
	if err != nil {
		t.Fatal(err)
	}
	defer tx.Rollback(ctx)
	if _, err := tx.Exec(ctx, "SET LOCAL session_replication_role = replica"); err != nil {
		t.Fatal(err)
	}
	for _, e := range store.EvidenceTables {
		var seq int64
		err := tx.QueryRow(ctx, "SELECT c.seq FROM register_commit c JOIN "+e.Name+" r ON r.created_xid = c.xid ORDER BY r.ctid LIMIT 1").Scan(&seq)
		if err != nil {
			continue // no row of this table in the fixture
		}
		if tag, err := tx.Exec(ctx, "UPDATE "+e.Name+" SET recorded_role = 'someone' WHERE ctid = (SELECT ctid FROM "+e.Name+" ORDER BY ctid LIMIT 1)"); err != nil || tag.RowsAffected() != 1 {
			t.Fatalf("edit a row of %s: %v %v", e.Name, tag, err)
		}
		want[e.Name] = seq
	}
	if err := tx.Commit(ctx); err != nil {
		t.Fatal(err)
	}
	if len(want) < 10 {
		t.Fatalf("rows edited in %d tables only: %v", len(want), want)
	}
	done = register.SetEvidenceSplit(1)
	rep, err := b.Reg.EvidenceVerify(ctx, nil)
	done()
	if err != nil {
		t.Fatal(err)
	}
	for tbl, seq := range want {
		found := false
		for _, br := range rep.Breaks {
			found = found || (br.Table == tbl && br.Seq == seq)
		}
		if !found {
			t.Errorf("the edited row of %s (commit %d) is not reported: %+v", tbl, seq, rep.Breaks)
		}
	}
}
