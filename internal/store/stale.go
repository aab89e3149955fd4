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
//
// If heightIDs is not nil, only the causes of those heights are returned
// (each must be current and from an adjustment; others have none): the
// heights of one area or datum and those their adjustments held, found by
// their keys rather than by reading every current height.
func StaleCauseList(ctx context.Context, db DBTX, heightIDs []int64) ([]StaleCause, error) {
	cur := `SELECT h.id, h.adjustment_id FROM height h LEFT JOIN register_commit rc ON rc.xid = h.created_xid
			WHERE h.adjustment_id IS NOT NULL AND ` + heightCurrent
	var args []any
	if heightIDs != nil {
		cur = `SELECT h.id, h.adjustment_id FROM unnest($1::bigint[]) AS u (id) JOIN height h ON h.id = u.id
			LEFT JOIN register_commit rc ON rc.xid = h.created_xid
			WHERE h.adjustment_id IS NOT NULL AND ` + heightCurrent
		args = append(args, heightIDs)
	}
	// The causes belong to the adjustments, not to each height: found once
	// per adjustment, then given to each of its current heights. cause is
	// materialized so that it is: the planner takes cur for one row (the
	// in-force test is opaque to it) and, inlined, ran cause again for
	// each current height (an area of 147 heights from 3 adjustments:
	// 390 ms, 22,050 probes of mark_condition; docs/performance.md).
	rows, err := db.Query(ctx, `
		WITH cur AS MATERIALIZED (`+cur+`),
		adj AS MATERIALIZED (SELECT DISTINCT adjustment_id FROM cur),
		cause AS MATERIALIZED (
			SELECT adj.adjustment_id, 'held-superseded' AS kind, m.designation,
				held.id AS held_id, held.version AS held_version, s.id AS successor_id, s.version AS successor_version, s.recorded_at AS successor_at,
				0::bigint AS run_id, '' AS condition, 'epoch'::date AS observed_on, 'epoch'::timestamptz AS condition_at,
				'' AS void_reason, '' AS voided_by, 'epoch'::timestamptz AS voided_at
			FROM adj
			JOIN adjustment_held ah ON ah.adjustment_id = adj.adjustment_id
			JOIN height held ON held.id = ah.height_id
			JOIN height s ON s.supersedes = held.id
			JOIN mark m ON m.id = held.mark_id
			UNION ALL
			SELECT adj.adjustment_id, 'mark-condition', m.designation,
				0, 0, 0, 0, 'epoch'::timestamptz,
				r.id, c.condition, c.observed_on, c.recorded_at, '', '', 'epoch'::timestamptz
			FROM adj
			JOIN adjustment_run ar ON ar.adjustment_id = adj.adjustment_id
			JOIN run r ON r.id = ar.run_id
			JOIN run_mark rm ON rm.run_id = r.id
			JOIN mark_condition c ON c.mark_id = rm.mark_id
			JOIN mark m ON m.id = rm.mark_id
			WHERE c.condition IN ('disturbed', 'destroyed')
			  AND c.recorded_at > r.recorded_at
			  AND c.observed_on >= coalesce(r.observed_on, (r.recorded_at AT TIME ZONE 'UTC')::date)
			UNION ALL
			SELECT adj.adjustment_id, 'voided-run', '',
				0, 0, 0, 0, 'epoch'::timestamptz,
				e.run_id, '', 'epoch'::date, 'epoch'::timestamptz, e.reason, e.recorded_by, e.recorded_at
			FROM adj
			JOIN adjustment_run ar ON ar.adjustment_id = adj.adjustment_id
			JOIN run_event e ON e.run_id = ar.run_id AND e.kind = 'voided'
		)
		SELECT cur.id, cur.adjustment_id, c.kind, c.designation, c.held_id, c.held_version, c.successor_id, c.successor_version,
			c.successor_at, c.run_id, c.condition, c.observed_on, c.condition_at, c.void_reason, c.voided_by, c.voided_at
		FROM cur JOIN cause c ON c.adjustment_id = cur.adjustment_id
		ORDER BY 1, 3, 4, 10, 13`, args...)
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

// StaleScope chooses the current heights from adjustments that stale
// looks at: those of DatumID, if set, and of the marks MarkIDs, if not
// nil (an area: MarkIDsWithin).
type StaleScope struct {
	DatumID *int64
	MarkIDs []int64
}

// HeightCurrentAdjustedIDs returns the ids of the current heights from an
// adjustment within scope: by the marks' keys (height_as_of) for an area,
// else every height of the datum.
func HeightCurrentAdjustedIDs(ctx context.Context, db DBTX, scope StaleScope) ([]int64, error) {
	q := `SELECT h.id FROM height h LEFT JOIN register_commit rc ON rc.xid = h.created_xid
		WHERE h.adjustment_id IS NOT NULL AND ($1::bigint IS NULL OR h.datum_id = $1) AND ` + heightCurrent + ` ORDER BY h.id`
	args := []any{scope.DatumID}
	if scope.MarkIDs != nil {
		q = `SELECT h.id FROM unnest($2::bigint[]) AS u (mark_id) JOIN height h ON h.mark_id = u.mark_id
			LEFT JOIN register_commit rc ON rc.xid = h.created_xid
			WHERE h.adjustment_id IS NOT NULL AND ($1::bigint IS NULL OR h.datum_id = $1) AND ` + heightCurrent + ` ORDER BY h.id`
		args = append(args, scope.MarkIDs)
	}
	rows, err := db.Query(ctx, q, args...)
	if err != nil {
		return nil, translate(err)
	}
	return collect(rows, func(r pgx.Row) (int64, error) {
		var id int64
		return id, translate(r.Scan(&id))
	})
}
