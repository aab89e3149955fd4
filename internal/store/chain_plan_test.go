package store_test

import (
	"context"
	"strings"
	"testing"

	"github.com/jackc/pgx/v5"

	"cairn/internal/pgtest"
	"cairn/internal/store"
)

// The chains' versions of a chunk that is half of an analyzed height
// table are planned, in the audit's session for the chains (ChainSession),
// as a scan of the unique index on (mark_id, datum_id, version), with no
// sort and no parallel workers; without it the same query on the same
// statistics is planned otherwise (PostgreSQL 15 documentation, 20.7.1:
// enable_sort "discourages" explicit sorts; 20.4.6:
// max_parallel_workers_per_gather = 0 disables parallel query). 20,000
// versions of 4,000 marks are written by the superuser with the triggers
// off (the plan only needs the rows), then analyzed.
func TestChainVersionsStreamByIndex(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	ctx := context.Background()
	if _, err := db.Pool.Exec(ctx, `BEGIN; SET LOCAL session_replication_role = replica;
		INSERT INTO height (mark_id, datum_id, version, supersedes, source_kind, reason, recorded_by, recorded_at, hash)
		SELECT m, 1, v, CASE WHEN v > 1 THEN m * 10 + v END, 'withdrawal', 'plan', 'plan', now(), '\x00'
		FROM generate_series(1, 4000) m, generate_series(1, 5) v;
		COMMIT; ANALYZE height`); err != nil {
		t.Fatal(err)
	}
	plan := func(session bool) string {
		t.Helper()
		tx, err := db.Pool.BeginTx(ctx, pgx.TxOptions{IsoLevel: pgx.RepeatableRead, AccessMode: pgx.ReadOnly})
		if err != nil {
			t.Fatal(err)
		}
		defer tx.Rollback(ctx)
		if session {
			if err := store.ChainSession(ctx, tx); err != nil {
				t.Fatal(err)
			}
		}
		rows, err := tx.Query(ctx, "EXPLAIN "+store.ChainVersionsSQL, int64(2001), int64(4000))
		if err != nil {
			t.Fatal(err)
		}
		defer rows.Close()
		var lines []string
		for rows.Next() {
			var l string
			if err := rows.Scan(&l); err != nil {
				t.Fatal(err)
			}
			lines = append(lines, l)
		}
		if err := rows.Err(); err != nil {
			t.Fatal(err)
		}
		return strings.Join(lines, "\n")
	}
	streamed := func(p string) bool {
		return strings.Contains(p, "Index Scan using height_mark_id_datum_id_version_key") && !strings.Contains(p, "Sort") && !strings.Contains(p, "Gather")
	}
	if p := plan(false); streamed(p) {
		t.Fatalf("without the chains' session the chunk is streamed by the index already: the test shows nothing:\n%s", p)
	}
	if p := plan(true); !streamed(p) {
		t.Errorf("in the chains' session the chunk is not streamed by the unique index:\n%s", p)
	}
}
