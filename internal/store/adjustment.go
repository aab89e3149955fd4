package store

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"strings"
	"time"

	"github.com/jackc/pgx/v5"
)

// Statuses of an adjustment.
const (
	StatusDraft     = "draft"
	StatusPublished = "published"
	StatusDiscarded = "discarded"
)

// Adjustment is an adjustment as made, with its status.
type Adjustment struct {
	ID        int64
	Method    string
	DatumID   int64
	DatumCode string
	// Parameters and Statistics are the method's settings and report, as
	// JSON.
	Parameters json.RawMessage
	Statistics json.RawMessage
	// ConditionReason says why marks in doubt were held ("" when none was).
	ConditionReason string
	CreatedBy       string
	CreatedAt       time.Time
	// Status is draft, published or discarded; StatusReason, StatusBy and
	// StatusAt tell of the change (empty and nil for a draft).
	Status       string
	StatusReason string
	StatusBy     string
	StatusAt     *time.Time
	// AcceptedReason says why a publication accepted failed checks ("" when
	// none was accepted); AcceptedChecks are those checks as a JSON array
	// (nil when none). StatusBy accepted them.
	AcceptedReason string
	AcceptedChecks json.RawMessage
	// RunIDs are the runs used, in order; Results counts the marks reached.
	RunIDs  []int64
	Results int
}

const adjustmentColumns = `a.id, a.method, a.datum_id, d.code, a.parameters, a.statistics, coalesce(a.condition_reason, ''),
	a.created_by, a.created_at, coalesce(e.status, 'draft'), coalesce(e.reason, ''), coalesce(e.recorded_by, ''), e.recorded_at,
	coalesce(e.accepted_reason, ''), e.accepted_checks,
	coalesce((SELECT array_agg(ar.run_id ORDER BY ar.run_id) FROM adjustment_run ar WHERE ar.adjustment_id = a.id), '{}'),
	(SELECT count(*) FROM adjustment_result r WHERE r.adjustment_id = a.id)`

const adjustmentFrom = ` FROM adjustment a JOIN datum d ON d.id = a.datum_id
	LEFT JOIN adjustment_event e ON e.adjustment_id = a.id`

func scanAdjustment(row pgx.Row) (Adjustment, error) {
	var a Adjustment
	err := row.Scan(&a.ID, &a.Method, &a.DatumID, &a.DatumCode, &a.Parameters, &a.Statistics, &a.ConditionReason,
		&a.CreatedBy, &a.CreatedAt, &a.Status, &a.StatusReason, &a.StatusBy, &a.StatusAt,
		&a.AcceptedReason, &a.AcceptedChecks, &a.RunIDs, &a.Results)
	return a, translate(err)
}

// AdjustmentInsertParams are the fields of a new adjustment.
type AdjustmentInsertParams struct {
	Method          string
	DatumID         int64
	Parameters      json.RawMessage
	Statistics      json.RawMessage
	ConditionReason string // "" for none
	CreatedBy       string
}

// AdjustmentInsert adds an adjustment (a draft) and returns its identifier.
func AdjustmentInsert(ctx context.Context, db DBTX, p AdjustmentInsertParams) (int64, error) {
	var reason *string
	if p.ConditionReason != "" {
		reason = &p.ConditionReason
	}
	var id int64
	err := db.QueryRow(ctx, `INSERT INTO adjustment (method, datum_id, parameters, statistics, condition_reason, created_by)
		VALUES ($1, $2, $3, $4, $5, $6) RETURNING id`,
		p.Method, p.DatumID, string(orEmpty(p.Parameters)), string(orEmpty(p.Statistics)), reason, p.CreatedBy).Scan(&id)
	if err != nil {
		return 0, fmt.Errorf("insert adjustment: %w", translate(err))
	}
	return id, nil
}

func orEmpty(j json.RawMessage) json.RawMessage {
	if len(j) == 0 {
		return json.RawMessage("{}")
	}
	return j
}

// AdjustmentGetParams name an adjustment.
type AdjustmentGetParams struct {
	ID int64
	// ForUpdate locks the adjustment's row until the transaction ends, so
	// a publication and a discard of one draft take turns.
	ForUpdate bool
}

// AdjustmentGet returns an adjustment; ErrNotFound if none.
func AdjustmentGet(ctx context.Context, db DBTX, p AdjustmentGetParams) (Adjustment, error) {
	if p.ForUpdate {
		if _, err := db.Exec(ctx, "SELECT 1 FROM adjustment WHERE id = $1 FOR UPDATE", p.ID); err != nil {
			return Adjustment{}, translateAs(err, RolePublisher)
		}
	}
	return scanAdjustment(db.QueryRow(ctx, "SELECT "+adjustmentColumns+adjustmentFrom+" WHERE a.id = $1", p.ID))
}

// AdjustmentListParams filter a listing; the zero value lists every
// adjustment.
type AdjustmentListParams struct {
	// Status keeps the adjustments with this status ("" for all).
	Status string
}

// AdjustmentList lists adjustments, oldest first.
func AdjustmentList(ctx context.Context, db DBTX, p AdjustmentListParams) ([]Adjustment, error) {
	rows, err := db.Query(ctx, "SELECT "+adjustmentColumns+adjustmentFrom+
		" WHERE $1 = '' OR coalesce(e.status, 'draft') = $1 ORDER BY a.id", p.Status)
	if err != nil {
		return nil, translate(err)
	}
	return collect(rows, scanAdjustment)
}

// AdjustmentListByIDs returns the adjustments of ids that exist, by
// identifier.
func AdjustmentListByIDs(ctx context.Context, db DBTX, ids []int64) ([]Adjustment, error) {
	rows, err := db.Query(ctx, "SELECT "+adjustmentColumns+strings.Replace(adjustmentFrom, " FROM adjustment a ",
		" FROM (SELECT DISTINCT unnest($1::bigint[]) AS id) AS u JOIN adjustment a ON a.id = u.id ", 1)+" ORDER BY a.id", ids)
	if err != nil {
		return nil, translate(err)
	}
	return collect(rows, scanAdjustment)
}

// AdjustmentRunInsertParams are the runs an adjustment used.
type AdjustmentRunInsertParams struct {
	AdjustmentID int64
	RunIDs       []int64
}

// AdjustmentRunInsert records the runs an adjustment used.
func AdjustmentRunInsert(ctx context.Context, db DBTX, p AdjustmentRunInsertParams) error {
	_, err := db.Exec(ctx, `INSERT INTO adjustment_run (adjustment_id, run_id) SELECT $1, unnest($2::bigint[])`, p.AdjustmentID, p.RunIDs)
	if err != nil {
		return fmt.Errorf("insert runs of adjustment: %w", translate(err))
	}
	return nil
}

// AdjustmentRunList returns the runs an adjustment used, by identifier.
func AdjustmentRunList(ctx context.Context, db DBTX, adjustmentID int64) ([]Run, error) {
	rows, err := db.Query(ctx, "SELECT "+runColumns+" FROM run r"+runJoins+` JOIN adjustment_run ar ON ar.run_id = r.id
		WHERE ar.adjustment_id = $1 ORDER BY r.id`, adjustmentID)
	if err != nil {
		return nil, translate(err)
	}
	return collect(rows, scanRun)
}

// Held is a version an adjustment held fixed, with the mark's latest
// condition report when the adjustment was made.
type Held struct {
	Height
	ConditionID *int64
}

// AdjustmentHeldInsertParams are the versions an adjustment held.
type AdjustmentHeldInsertParams struct {
	AdjustmentID int64
	Held         []Held // Height.ID, Height.MarkID and ConditionID are used
}

// AdjustmentHeldInsert records the versions an adjustment held.
func AdjustmentHeldInsert(ctx context.Context, db DBTX, p AdjustmentHeldInsertParams) error {
	hs, ms, cs := make([]int64, len(p.Held)), make([]int64, len(p.Held)), make([]*int64, len(p.Held))
	for i, h := range p.Held {
		hs[i], ms[i], cs[i] = h.ID, h.MarkID, h.ConditionID
	}
	_, err := db.Exec(ctx, `INSERT INTO adjustment_held (adjustment_id, height_id, mark_id, condition_id)
		SELECT $1, * FROM unnest($2::bigint[], $3::bigint[], $4::bigint[])`, p.AdjustmentID, hs, ms, cs)
	if err != nil {
		return fmt.Errorf("insert held versions of adjustment: %w", translate(err))
	}
	return nil
}

// AdjustmentHeldList returns the versions an adjustment held, by
// designation.
func AdjustmentHeldList(ctx context.Context, db DBTX, adjustmentID int64) ([]Held, error) {
	rows, err := db.Query(ctx, "SELECT "+heightColumns+", ah.condition_id"+heightFrom+
		" JOIN adjustment_held ah ON ah.height_id = h.id WHERE ah.adjustment_id = $1 ORDER BY m.designation", adjustmentID)
	if err != nil {
		return nil, translate(err)
	}
	return collect(rows, func(r pgx.Row) (Held, error) {
		var h Held
		var err error
		h.Height, err = scanHeight(extraScan{r, []any{&h.ConditionID}})
		return h, err
	})
}

// extraScan appends destinations to a row's scan, for queries that select
// a table's usual columns and a few more.
type extraScan struct {
	row   pgx.Row
	extra []any
}

func (e extraScan) Scan(dest ...any) error { return e.row.Scan(append(dest, e.extra...)...) }

// AdjustmentResult is an adjustment's result for one mark.
type AdjustmentResult struct {
	MarkID      int64
	Designation string // filled when read
	Seq         int
	Held        bool
	// ComputedM, CorrectionM and SigmaM are nil when the method does not
	// give them; AdjustedM is unrounded, in metres.
	ComputedM   *float64
	CorrectionM *float64
	AdjustedM   float64
	SigmaM      *float64
	// Value, Unit and Decimals are the height to publish; nil for a held
	// mark.
	Value    *string
	Unit     *string
	Decimals *int
	Class    string
	// Replaces is the version current when the adjustment was made (nil if
	// none); ReplacesVersion its number (filled when read).
	Replaces        *int64
	ReplacesVersion *int
}

var adjustmentResultColumns = []string{"adjustment_id", "mark_id", "seq", "held", "computed_m", "correction_m",
	"adjusted_m", "sigma_m", "value", "unit", "decimals", "class", "replaces"}

// AdjustmentResultCopyParams are an adjustment's results to store.
type AdjustmentResultCopyParams struct {
	AdjustmentID int64
	Results      []AdjustmentResult
}

// AdjustmentResultCopy stores an adjustment's results with COPY.
func AdjustmentResultCopy(ctx context.Context, db Copier, p AdjustmentResultCopyParams) (int64, error) {
	return copyRows(ctx, db, "adjustment_result", adjustmentResultColumns, p.Results, "results of adjustment", func(r *AdjustmentResult) []any {
		var dec *int16
		if r.Decimals != nil {
			d := int16(*r.Decimals)
			dec = &d
		}
		return []any{p.AdjustmentID, r.MarkID, r.Seq, r.Held, r.ComputedM, r.CorrectionM,
			r.AdjustedM, r.SigmaM, r.Value, r.Unit, dec, r.Class, r.Replaces}
	})
}

// AdjustmentResultList returns an adjustment's results in report order.
func AdjustmentResultList(ctx context.Context, db DBTX, adjustmentID int64) ([]AdjustmentResult, error) {
	rows, err := db.Query(ctx, `SELECT r.mark_id, m.designation, r.seq, r.held, r.computed_m, r.correction_m,
		r.adjusted_m, r.sigma_m, r.value::text, r.unit, r.decimals, r.class, r.replaces, p.version
		FROM adjustment_result r JOIN mark m ON m.id = r.mark_id LEFT JOIN height p ON p.id = r.replaces
		WHERE r.adjustment_id = $1 ORDER BY r.seq`, adjustmentID)
	if err != nil {
		return nil, translate(err)
	}
	return collect(rows, func(row pgx.Row) (AdjustmentResult, error) {
		var r AdjustmentResult
		var dec *int16
		err := row.Scan(&r.MarkID, &r.Designation, &r.Seq, &r.Held, &r.ComputedM, &r.CorrectionM,
			&r.AdjustedM, &r.SigmaM, &r.Value, &r.Unit, &dec, &r.Class, &r.Replaces, &r.ReplacesVersion)
		if dec != nil {
			d := int(*dec)
			r.Decimals = &d
		}
		return r, translate(err)
	})
}

// AdjustmentEventInsertParams are a change of an adjustment's status.
type AdjustmentEventInsertParams struct {
	AdjustmentID int64
	Status       string // published or discarded
	Reason       string
	RecordedBy   string
	// AcceptedReason and AcceptedChecks (a JSON array) are a publication's
	// acceptance of failed checks: both set, or both empty for none.
	AcceptedReason string
	AcceptedChecks json.RawMessage
}

// AdjustmentEventInsert records a change of status; ErrConflict if the
// adjustment's status has already changed.
func AdjustmentEventInsert(ctx context.Context, db DBTX, p AdjustmentEventInsertParams) error {
	var reason, checks *string
	if p.AcceptedReason != "" || len(p.AcceptedChecks) > 0 {
		r, c := p.AcceptedReason, string(p.AcceptedChecks)
		reason, checks = &r, &c
	}
	_, err := db.Exec(ctx, `INSERT INTO adjustment_event (adjustment_id, status, reason, recorded_by, accepted_reason, accepted_checks)
		VALUES ($1, $2, $3, $4, $5, $6::jsonb)`,
		p.AdjustmentID, p.Status, p.Reason, p.RecordedBy, reason, checks)
	if err != nil {
		err = translate(err)
		if errors.Is(err, ErrAlreadyExists) {
			err = fmt.Errorf("%w: adjustment %d is no longer a draft", ErrConflict, p.AdjustmentID)
		}
		return fmt.Errorf("record %s adjustment: %w", p.Status, err)
	}
	return nil
}

// HeldLink says that current version HeightID comes from an adjustment
// that held version HeldID, itself still current.
type HeldLink struct{ HeightID, HeldID int64 }

// HeldLinkList returns, for every current height from an adjustment, the
// held versions of its adjustment that are still current: the links along
// which staleness spreads. If heightIDs is not nil, only the links from
// those heights.
func HeldLinkList(ctx context.Context, db DBTX, heightIDs []int64) ([]HeldLink, error) {
	from := "height h"
	var args []any
	if heightIDs != nil {
		from = "unnest($1::bigint[]) AS u (id) JOIN height h ON h.id = u.id"
		args = append(args, heightIDs)
	}
	rows, err := db.Query(ctx, `SELECT h.id, ah.height_id FROM `+from+` LEFT JOIN register_commit rc ON rc.xid = h.created_xid
		JOIN adjustment_held ah ON ah.adjustment_id = h.adjustment_id
		WHERE `+heightCurrent+`
		  AND NOT EXISTS (SELECT 1 FROM height y WHERE y.supersedes = ah.height_id)
		ORDER BY 1, 2`, args...)
	if err != nil {
		return nil, translate(err)
	}
	return collect(rows, func(r pgx.Row) (HeldLink, error) {
		var l HeldLink
		return l, translate(r.Scan(&l.HeightID, &l.HeldID))
	})
}
