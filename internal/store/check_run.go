package store

import (
	"context"
	"fmt"

	"github.com/jackc/pgx/v5"
)

// CheckRunInsert marks run runID as a check run: a check between
// published marks that adjusts nothing (migrations/00016).
func CheckRunInsert(ctx context.Context, db DBTX, runID int64) error {
	if _, err := db.Exec(ctx, "INSERT INTO check_run (run_id) VALUES ($1)", runID); err != nil {
		return fmt.Errorf("insert check run: %w", translate(err))
	}
	return nil
}

// CheckRunIDs returns which of the runs ids are check runs.
func CheckRunIDs(ctx context.Context, db DBTX, ids []int64) (map[int64]bool, error) {
	rows, err := db.Query(ctx, "SELECT c.run_id FROM (SELECT DISTINCT unnest($1::bigint[]) AS run_id) AS u JOIN check_run c ON c.run_id = u.run_id", ids)
	if err != nil {
		return nil, translate(err)
	}
	got, err := collect(rows, func(r pgx.Row) (int64, error) {
		var id int64
		return id, translate(r.Scan(&id))
	})
	if err != nil {
		return nil, err
	}
	out := make(map[int64]bool, len(got))
	for _, id := range got {
		out[id] = true
	}
	return out, nil
}
