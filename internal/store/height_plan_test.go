package store_test

import (
	"context"
	"strings"
	"testing"

	"cairn/internal/pgtest"
	"cairn/internal/store"
)

// The in-force test probes a version's successor by the unique index on
// supersedes, never by a hashed subplan: a hashed subplan reads the whole
// height table to build its hash, in every statement that shows heights
// (a page of 100 marks of a register of 5,000,000 versions spent seconds
// there; docs/performance.md, the register on the web under load). The
// planner chooses the hash when it expects many outer rows, as for the
// thousand marks asked here of tables it has no statistics of.
func TestHeightCurrentProbesSuccessorByIndex(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	ctx := context.Background()
	ids := make([]int64, 1000)
	for i := range ids {
		ids[i] = int64(i + 1)
	}
	q := "EXPLAIN SELECT " + store.HeightColumns + ` FROM (SELECT DISTINCT unnest($1::bigint[]) AS mark_id) AS u
		JOIN height h ON h.mark_id = u.mark_id JOIN mark m ON m.id = h.mark_id JOIN datum d ON d.id = h.datum_id
		LEFT JOIN register_commit rc ON rc.xid = h.created_xid`
	rows, err := db.Pool.Query(ctx, q, ids)
	if err != nil {
		t.Fatal(err)
	}
	var plan []string
	for rows.Next() {
		var line string
		if err := rows.Scan(&line); err != nil {
			t.Fatal(err)
		}
		plan = append(plan, line)
	}
	if err := rows.Err(); err != nil {
		t.Fatal(err)
	}
	p := strings.Join(plan, "\n")
	if strings.Contains(p, "hashed SubPlan") {
		t.Errorf("the in-force test hashes a subplan (a scan of all heights):\n%s", p)
	}
	if !strings.Contains(p, "height_supersedes_key") {
		t.Errorf("the in-force test does not probe the index on supersedes:\n%s", p)
	}
}
