package store

import (
	"context"
	"fmt"

	"github.com/jackc/pgx/v5"
	"github.com/jackc/pgx/v5/pgtype"
)

// RunHeld is a mark a run was reduced from at a known height (schema v6).
type RunHeld struct {
	RunID       int64
	MarkID      int64
	Designation string // filled when read
	// HeightID is the published version held; nil when the height was
	// typed.
	HeightID *int64
	// Value is the held height in the run's unit as the reduction used
	// it, as decimal text.
	Value string
	// ConditionReason says why a mark in doubt was held ("" when it was
	// not in doubt).
	ConditionReason string

	// Filled when read, from the version held (nil when typed): its
	// number, datum, and value and unit as published.
	Version        *int
	DatumCode      *string
	PublishedValue *string
	PublishedUnit  *string
}

// RunHeldCopyParams are the marks a run was reduced from.
type RunHeldCopyParams struct {
	RunID int64
	Held  []RunHeld
}

// RunHeldCopy stores the marks a run was reduced from with COPY.
func RunHeldCopy(ctx context.Context, db Copier, p RunHeldCopyParams) (int64, error) {
	values := make([]pgtype.Numeric, len(p.Held))
	for i, h := range p.Held {
		if err := values[i].Scan(h.Value); err != nil {
			return 0, fmt.Errorf("held height of %s: %q is not a number: %w", h.Designation, h.Value, err)
		}
	}
	i := 0
	return copyRows(ctx, db, "run_held", []string{"run_id", "mark_id", "height_id", "value_in_book_unit", "condition_reason"}, p.Held, "held heights of run",
		func(h *RunHeld) []any {
			var reason *string
			if h.ConditionReason != "" {
				reason = &h.ConditionReason
			}
			i++
			return []any{p.RunID, h.MarkID, h.HeightID, values[i-1], reason}
		})
}

// RunHeldListByRun returns the marks a run was reduced from, by
// designation, with the versions held.
func RunHeldListByRun(ctx context.Context, db DBTX, runID int64) ([]RunHeld, error) {
	rows, err := db.Query(ctx, `SELECT rh.run_id, rh.mark_id, `+markDesignation("rh.mark_id")+` AS designation, rh.height_id, rh.value_in_book_unit::text,
		coalesce(rh.condition_reason, ''), h.version, d.code, h.value::text, h.unit
		FROM run_held rh
		LEFT JOIN height h ON h.id = rh.height_id LEFT JOIN datum d ON d.id = h.datum_id
		WHERE rh.run_id = $1 ORDER BY designation`, runID)
	if err != nil {
		return nil, translate(err)
	}
	return collect(rows, func(r pgx.Row) (RunHeld, error) {
		var h RunHeld
		err := r.Scan(&h.RunID, &h.MarkID, &h.Designation, &h.HeightID, &h.Value, &h.ConditionReason,
			&h.Version, &h.DatumCode, &h.PublishedValue, &h.PublishedUnit)
		return h, translate(err)
	})
}
