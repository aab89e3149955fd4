package store

import (
	"context"
	"fmt"
	"time"
)

// RetirementInsertParams are the fields of a mark's retirement.
type RetirementInsertParams struct {
	MarkID int64
	// ReplacedBy is the mark that replaces it, or nil.
	ReplacedBy *int64
	On         time.Time
	Reason, By string
}

// RetirementInsert retires a mark for good: ErrAlreadyExists if it is
// retired already (or the replacement replaces another), ErrNameTaken if
// the replacement is itself retired.
func RetirementInsert(ctx context.Context, db DBTX, p RetirementInsertParams) error {
	_, err := db.Exec(ctx, `INSERT INTO mark_retirement (mark_id, replaced_by, retired_on, reason, recorded_by) VALUES ($1, $2, $3, $4, $5)`,
		p.MarkID, p.ReplacedBy, pgDate(p.On), p.Reason, p.By)
	if err != nil {
		return fmt.Errorf("retire mark: %w", translateAs(err, RolePublisher))
	}
	return nil
}
