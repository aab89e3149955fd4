package store

import (
	"context"
	"fmt"
	"time"

	"github.com/jackc/pgx/v5"
)

// Condition is one report on the state of a mark in the ground.
type Condition struct {
	ID         int64
	MarkID     int64
	Condition  string // good, disturbed, destroyed, not-found
	Note       string
	ObservedOn time.Time // a date
	RecordedAt time.Time
	RecordedBy string
}

// ConditionInsertParams are the fields of a new condition report.
type ConditionInsertParams struct {
	MarkID     int64
	Condition  string
	Note       string
	ObservedOn time.Time
	RecordedBy string
}

// ConditionInsert appends a condition report.
func ConditionInsert(ctx context.Context, db DBTX, p ConditionInsertParams) (Condition, error) {
	var c Condition
	err := db.QueryRow(ctx, `INSERT INTO mark_condition (mark_id, condition, note, observed_on, recorded_by)
		VALUES ($1, $2, $3, $4, $5) RETURNING id, mark_id, condition, note, observed_on, recorded_at, recorded_by`,
		p.MarkID, p.Condition, p.Note, pgDate(p.ObservedOn), p.RecordedBy).
		Scan(&c.ID, &c.MarkID, &c.Condition, &c.Note, &c.ObservedOn, &c.RecordedAt, &c.RecordedBy)
	if err != nil {
		return Condition{}, fmt.Errorf("insert condition report: %w", translate(err))
	}
	return c, nil
}

// ConditionInsertManyParams are one condition report, the same for each
// of several marks.
type ConditionInsertManyParams struct {
	MarkIDs    []int64
	Condition  string
	Note       string
	ObservedOn time.Time
	RecordedBy string
}

// ConditionInsertMany appends the report on each mark in one statement and
// returns the reports by mark.
func ConditionInsertMany(ctx context.Context, db DBTX, p ConditionInsertManyParams) (map[int64]Condition, error) {
	rows, err := db.Query(ctx, `INSERT INTO mark_condition (mark_id, condition, note, observed_on, recorded_by)
		SELECT u.mark_id, $2, $3, $4, $5 FROM unnest($1::bigint[]) WITH ORDINALITY AS u (mark_id, ord) ORDER BY u.ord
		RETURNING id, mark_id, condition, note, observed_on, recorded_at, recorded_by`,
		p.MarkIDs, p.Condition, p.Note, pgDate(p.ObservedOn), p.RecordedBy)
	if err != nil {
		return nil, fmt.Errorf("insert condition reports: %w", translate(err))
	}
	cs, err := collect(rows, func(r pgx.Row) (Condition, error) {
		var c Condition
		err := r.Scan(&c.ID, &c.MarkID, &c.Condition, &c.Note, &c.ObservedOn, &c.RecordedAt, &c.RecordedBy)
		return c, translate(err)
	})
	if err != nil {
		return nil, fmt.Errorf("insert condition reports: %w", err)
	}
	out := make(map[int64]Condition, len(cs))
	for _, c := range cs {
		out[c.MarkID] = c
	}
	return out, nil
}

// ConditionListByMark returns a mark's condition reports, latest first.
func ConditionListByMark(ctx context.Context, db DBTX, markID int64) ([]Condition, error) {
	rows, err := db.Query(ctx, `SELECT id, mark_id, condition, note, observed_on, recorded_at, recorded_by
		FROM mark_condition WHERE mark_id = $1 ORDER BY observed_on DESC, id DESC`, markID)
	if err != nil {
		return nil, translate(err)
	}
	return collect(rows, func(r pgx.Row) (Condition, error) {
		var c Condition
		err := r.Scan(&c.ID, &c.MarkID, &c.Condition, &c.Note, &c.ObservedOn, &c.RecordedAt, &c.RecordedBy)
		return c, translate(err)
	})
}

// pgDate passes the calendar date of t as text, so no time zone shifts it.
func pgDate(t time.Time) string { return t.Format("2006-01-02") }

// ConditionLatestMany returns the latest condition report (by date
// observed) of each of the marks that has one, by mark id.
func ConditionLatestMany(ctx context.Context, db DBTX, markIDs []int64) (map[int64]Condition, error) {
	// One probe of mark_condition_latest a mark (see HeightLatestMany).
	rows, err := db.Query(ctx, `SELECT c.id, c.mark_id, c.condition, c.note, c.observed_on, c.recorded_at, c.recorded_by
		FROM unnest($1::bigint[]) AS u (mark_id)
		CROSS JOIN LATERAL (SELECT * FROM mark_condition mc WHERE mc.mark_id = u.mark_id
			ORDER BY mc.observed_on DESC, mc.id DESC LIMIT 1) c`, markIDs)
	if err != nil {
		return nil, translate(err)
	}
	list, err := collect(rows, func(r pgx.Row) (Condition, error) {
		var c Condition
		err := r.Scan(&c.ID, &c.MarkID, &c.Condition, &c.Note, &c.ObservedOn, &c.RecordedAt, &c.RecordedBy)
		return c, translate(err)
	})
	if err != nil {
		return nil, err
	}
	out := make(map[int64]Condition, len(list))
	for _, c := range list {
		out[c.MarkID] = c
	}
	return out, nil
}

// ConditionLastGoodMany returns, for each of the marks that has one, its
// latest report (by date observed) that found it in good order: good or
// reset.
func ConditionLastGoodMany(ctx context.Context, db DBTX, markIDs []int64) (map[int64]Condition, error) {
	rows, err := db.Query(ctx, `SELECT DISTINCT ON (mark_id) id, mark_id, condition, note, observed_on, recorded_at, recorded_by
		FROM mark_condition WHERE mark_id = ANY($1) AND condition IN ('good', 'reset') ORDER BY mark_id, observed_on DESC, id DESC`, markIDs)
	if err != nil {
		return nil, translate(err)
	}
	list, err := collect(rows, func(r pgx.Row) (Condition, error) {
		var c Condition
		err := r.Scan(&c.ID, &c.MarkID, &c.Condition, &c.Note, &c.ObservedOn, &c.RecordedAt, &c.RecordedBy)
		return c, translate(err)
	})
	if err != nil {
		return nil, err
	}
	out := make(map[int64]Condition, len(list))
	for _, c := range list {
		out[c.MarkID] = c
	}
	return out, nil
}

// ConditionLatestResetMany returns, for each of the marks that has one, its
// reset report recorded last (condition "reset", the greatest recorded_at):
// the report from which on the heights recorded before it are of the mark
// as it was.
func ConditionLatestResetMany(ctx context.Context, db DBTX, markIDs []int64) (map[int64]Condition, error) {
	rows, err := db.Query(ctx, `SELECT c.id, c.mark_id, c.condition, c.note, c.observed_on, c.recorded_at, c.recorded_by
		FROM unnest($1::bigint[]) AS u (mark_id)
		CROSS JOIN LATERAL (SELECT * FROM mark_condition mc WHERE mc.mark_id = u.mark_id AND mc.condition = 'reset'
			ORDER BY mc.recorded_at DESC, mc.id DESC LIMIT 1) c`, markIDs)
	if err != nil {
		return nil, translate(err)
	}
	list, err := collect(rows, func(r pgx.Row) (Condition, error) {
		var c Condition
		return c, translate(r.Scan(&c.ID, &c.MarkID, &c.Condition, &c.Note, &c.ObservedOn, &c.RecordedAt, &c.RecordedBy))
	})
	if err != nil {
		return nil, err
	}
	out := make(map[int64]Condition, len(list))
	for _, c := range list {
		out[c.MarkID] = c
	}
	return out, nil
}
