package store

import (
	"context"
	"time"

	"github.com/jackc/pgx/v5"
)

// Kinds of cause that make a current height stale.
const (
	// CauseHeldSuperseded: its adjustment held a version that has since
	// been superseded.
	CauseHeldSuperseded = "held-superseded"
	// CauseMarkCondition: its adjustment used a run that touched a mark
	// later reported disturbed or destroyed.
	CauseMarkCondition = "mark-condition"
	// CauseVoidedRun: its adjustment used a run since voided.
	CauseVoidedRun = "voided-run"
)

// StaleCause is one reason a current height, derived from an adjustment,
// no longer stands on current control.
type StaleCause struct {
	// HeightID is the current version concerned; AdjustmentID its
	// adjustment.
	HeightID     int64
	AdjustmentID int64
	Kind         string
	// Mark is the mark the cause concerns: the held mark, or the mark
	// reported on.
	Mark string
	// For CauseHeldSuperseded: the version held and the one that
	// superseded it.
	HeldID, HeldVersion           int64
	SuccessorID, SuccessorVersion int64
	SuccessorAt                   time.Time
	// For CauseMarkCondition: the run, and the condition report; for
	// CauseVoidedRun: the run.
	RunID       int64
	Condition   string
	ObservedOn  time.Time
	ConditionAt time.Time
	// For CauseVoidedRun: the void.
	VoidReason string
	VoidedBy   string
	VoidedAt   time.Time
}

// StaleCauseList returns every cause that makes a current height from an
// adjustment stale, by height. A condition report counts when it says
// disturbed or destroyed, was recorded after the run, and was observed on
// or after the day the run was observed (the same day counts: which came
// first is not known). A report known when the run was recorded, or of a
// state before the run, does not count: the run levelled the mark as it
// then stood. A voided run counts whenever it was voided.
func StaleCauseList(ctx context.Context, db DBTX) ([]StaleCause, error) {
	rows, err := db.Query(ctx, `
		WITH cur AS (
			SELECT h.id, h.adjustment_id FROM height h LEFT JOIN register_commit rc ON rc.xid = h.created_xid
			WHERE h.adjustment_id IS NOT NULL AND `+heightCurrent+`
		)
		SELECT cur.id, cur.adjustment_id, 'held-superseded', m.designation,
			held.id, held.version, s.id, s.version, s.recorded_at,
			0::bigint, '', 'epoch'::date, 'epoch'::timestamptz, '', '', 'epoch'::timestamptz
		FROM cur
		JOIN adjustment_held ah ON ah.adjustment_id = cur.adjustment_id
		JOIN height held ON held.id = ah.height_id
		JOIN height s ON s.supersedes = held.id
		JOIN mark m ON m.id = held.mark_id
		UNION ALL
		SELECT cur.id, cur.adjustment_id, 'mark-condition', m.designation,
			0, 0, 0, 0, 'epoch'::timestamptz,
			r.id, c.condition, c.observed_on, c.recorded_at, '', '', 'epoch'::timestamptz
		FROM cur
		JOIN adjustment_run ar ON ar.adjustment_id = cur.adjustment_id
		JOIN run r ON r.id = ar.run_id
		JOIN run_mark rm ON rm.run_id = r.id
		JOIN mark_condition c ON c.mark_id = rm.mark_id
		JOIN mark m ON m.id = rm.mark_id
		WHERE c.condition IN ('disturbed', 'destroyed')
		  AND c.recorded_at > r.recorded_at
		  AND c.observed_on >= coalesce(r.observed_on, (r.recorded_at AT TIME ZONE 'UTC')::date)
		UNION ALL
		SELECT cur.id, cur.adjustment_id, 'voided-run', '',
			0, 0, 0, 0, 'epoch'::timestamptz,
			e.run_id, '', 'epoch'::date, 'epoch'::timestamptz, e.reason, e.recorded_by, e.recorded_at
		FROM cur
		JOIN adjustment_run ar ON ar.adjustment_id = cur.adjustment_id
		JOIN run_event e ON e.run_id = ar.run_id AND e.kind = 'voided'
		ORDER BY 1, 3, 4, 10, 13`)
	if err != nil {
		return nil, translate(err)
	}
	return collect(rows, func(r pgx.Row) (StaleCause, error) {
		var c StaleCause
		err := r.Scan(&c.HeightID, &c.AdjustmentID, &c.Kind, &c.Mark,
			&c.HeldID, &c.HeldVersion, &c.SuccessorID, &c.SuccessorVersion, &c.SuccessorAt,
			&c.RunID, &c.Condition, &c.ObservedOn, &c.ConditionAt, &c.VoidReason, &c.VoidedBy, &c.VoidedAt)
		return c, translate(err)
	})
}
