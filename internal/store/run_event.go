package store

import (
	"context"
	"fmt"
	"time"

	"github.com/jackc/pgx/v5"
)

// RunVoid is the decision that a run is not to be used: who voided it,
// when and why (a row of run_event of kind "voided"). The run itself stays
// as recorded.
type RunVoid struct {
	ID         int64
	RunID      int64
	Reason     string
	RecordedBy string
	RecordedAt time.Time
}

// RunVoidInsertParams void a run.
type RunVoidInsertParams struct {
	RunID      int64
	Reason     string
	RecordedBy string
}

// RunVoidInsert records the void of a run and returns it; ErrAlreadyExists
// when the run is voided already (or being voided: the insert waits for
// that transaction to end). It needs RolePublisher.
func RunVoidInsert(ctx context.Context, db DBTX, p RunVoidInsertParams) (RunVoid, error) {
	v := RunVoid{RunID: p.RunID, Reason: p.Reason, RecordedBy: p.RecordedBy}
	err := db.QueryRow(ctx, `INSERT INTO run_event (run_id, kind, reason, recorded_by) VALUES ($1, 'voided', $2, $3)
		RETURNING id, recorded_at`, p.RunID, p.Reason, p.RecordedBy).Scan(&v.ID, &v.RecordedAt)
	if err != nil {
		return RunVoid{}, fmt.Errorf("void run %d: %w", p.RunID, translateAs(err, RolePublisher))
	}
	return v, nil
}

// RunVoidedList returns the voids of those of runIDs that are voided, by
// run; a run that stands (or does not exist) is absent. The publish gates
// ask it which of an adjustment's runs were voided since the draft.
func RunVoidedList(ctx context.Context, db DBTX, runIDs []int64) (map[int64]RunVoid, error) {
	rows, err := db.Query(ctx, `SELECT e.id, e.run_id, e.reason, e.recorded_by, e.recorded_at
		FROM (SELECT DISTINCT unnest($1::bigint[]) AS run_id) AS u JOIN run_event e ON e.run_id = u.run_id AND e.kind = 'voided'
		ORDER BY e.run_id`, runIDs)
	if err != nil {
		return nil, translate(err)
	}
	voids, err := collect(rows, func(r pgx.Row) (RunVoid, error) {
		var v RunVoid
		err := r.Scan(&v.ID, &v.RunID, &v.Reason, &v.RecordedBy, &v.RecordedAt)
		return v, translate(err)
	})
	if err != nil {
		return nil, err
	}
	out := make(map[int64]RunVoid, len(voids))
	for _, v := range voids {
		out[v.RunID] = v
	}
	return out, nil
}
