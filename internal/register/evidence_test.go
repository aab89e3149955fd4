package register_test

import (
	"testing"

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
