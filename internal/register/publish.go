package register

import (
	"context"
	"fmt"
	"sort"
	"strings"

	"github.com/jackc/pgx/v5"

	"cairn/internal/store"
)

// PublishParams ask for a draft adjustment to be published.
type PublishParams struct {
	AdjustmentID int64
	// Reason is kept with the publication and with every new version.
	Reason string
	By     string
}

// Published is a publication: the adjustment as it now stands and the
// versions it wrote, by designation.
type Published struct {
	Adjustment store.Adjustment
	Versions   []store.Height
}

// Publish turns a draft adjustment into new height versions, in one
// transaction. It locks every mark involved (in order of identifier), then
// checks that every held version and every version to be replaced is still
// current; if any is not, someone published in between and it returns a
// ConflictError naming the mark, having written nothing.
func (r *Register) Publish(ctx context.Context, p PublishParams) (*Published, error) {
	p.Reason, p.By = strings.TrimSpace(p.Reason), strings.TrimSpace(p.By)
	if p.Reason == "" {
		return nil, inputErr("reason", "say why these heights are published")
	}
	if p.By == "" {
		return nil, inputErr("by", "say who publishes")
	}
	out := &Published{}
	err := r.withTx(ctx, pgx.TxOptions{}, func(tx pgx.Tx) error {
		a, err := r.lockDraft(ctx, tx, p.AdjustmentID)
		if err != nil {
			return err
		}
		held, err := store.AdjustmentHeldList(ctx, tx, a.ID)
		if err != nil {
			return err
		}
		results, err := store.AdjustmentResultList(ctx, tx, a.ID)
		if err != nil {
			return err
		}
		var ids []int64
		for _, h := range held {
			ids = append(ids, h.MarkID)
		}
		for _, res := range results {
			ids = append(ids, res.MarkID)
		}
		sort.Slice(ids, func(i, j int) bool { return ids[i] < ids[j] })
		if err := store.MarkLock(ctx, tx, ids); err != nil {
			return fmt.Errorf("lock marks: %w", err)
		}
		latest, err := store.HeightLatestMany(ctx, tx, store.HeightLatestManyParams{MarkIDs: ids, DatumID: a.DatumID})
		if err != nil {
			return err
		}
		for _, h := range held {
			if cur := latest[h.MarkID]; cur.ID != h.ID {
				return changed(a, h.Designation, "held", &h.Height, cur)
			}
		}
		for _, res := range results {
			if res.Held {
				continue
			}
			cur, ok := latest[res.MarkID]
			switch {
			case res.Replaces == nil && ok:
				return changed(a, res.Designation, "to be replaced", nil, cur)
			case res.Replaces != nil && cur.ID != *res.Replaces:
				return changed(a, res.Designation, "to be replaced", &store.Height{ID: *res.Replaces, Version: *res.ReplacesVersion}, cur)
			}
		}
		if err := store.AdjustmentEventInsert(ctx, tx, store.AdjustmentEventInsertParams{AdjustmentID: a.ID,
			Status: store.StatusPublished, Reason: p.Reason, RecordedBy: p.By}); err != nil {
			return asConflict(err)
		}
		var publish []store.AdjustmentResult
		for _, res := range results {
			if !res.Held {
				publish = append(publish, res)
			}
		}
		out.Versions, err = store.HeightInsertMany(ctx, tx, store.HeightInsertManyParams{DatumID: a.DatumID, AdjustmentID: a.ID,
			Source: fmt.Sprintf("adjustment %d (%s, run %s)", a.ID, a.Method, joinIDs(a.RunIDs)),
			Reason: p.Reason, RecordedBy: p.By, Results: publish})
		if err != nil {
			return asConflict(err)
		}
		out.Adjustment, err = store.AdjustmentGet(ctx, tx, store.AdjustmentGetParams{ID: a.ID})
		return err
	})
	if err != nil {
		return nil, fmt.Errorf("publish adjustment %d: %w", p.AdjustmentID, err)
	}
	return out, nil
}

// changed is the conflict of a version that is no longer current.
func changed(a store.Adjustment, designation, role string, was *store.Height, now store.Height) error {
	wasText := "no height"
	if was != nil {
		wasText = fmt.Sprintf("version %d", was.Version)
	}
	nowText := fmt.Sprintf("version %d, recorded %s by %s", now.Version, now.RecordedAt.UTC().Format("2006-01-02 15:04:05Z"), now.RecordedBy)
	return &ConflictError{Err: fmt.Errorf("%s on %s changed since adjustment %d was made: the %s height was %s, now it is %s; adjust again against the current heights",
		designation, a.DatumCode, a.ID, role, wasText, nowText)}
}

// stillDraft refuses an adjustment that has been published or discarded.
func stillDraft(a store.Adjustment) error {
	if a.Status == store.StatusDraft {
		return nil
	}
	return &ConflictError{Err: fmt.Errorf("adjustment %d was %s %s by %s (%s)", a.ID, a.Status,
		a.StatusAt.UTC().Format("2006-01-02 15:04:05Z"), a.StatusBy, a.StatusReason)}
}

// lockDraft locks adjustment id in tx for its publication or discard, and
// refuses one that is no longer a draft.
func (r *Register) lockDraft(ctx context.Context, tx pgx.Tx, id int64) (store.Adjustment, error) {
	a, err := r.adjustment(ctx, tx, id, true)
	if err != nil {
		return a, err
	}
	return a, stillDraft(a)
}

// DiscardParams ask for a draft adjustment to be set aside.
type DiscardParams struct {
	AdjustmentID int64
	Reason       string
	By           string
}

// Discard sets a draft adjustment aside for good; it stays in the register
// with the reason.
func (r *Register) Discard(ctx context.Context, p DiscardParams) (store.Adjustment, error) {
	p.Reason, p.By = strings.TrimSpace(p.Reason), strings.TrimSpace(p.By)
	if p.Reason == "" {
		return store.Adjustment{}, inputErr("reason", "say why the adjustment is discarded")
	}
	if p.By == "" {
		return store.Adjustment{}, inputErr("by", "say who discards it")
	}
	var out store.Adjustment
	err := r.withTx(ctx, pgx.TxOptions{}, func(tx pgx.Tx) error {
		a, err := r.lockDraft(ctx, tx, p.AdjustmentID)
		if err != nil {
			return err
		}
		if err := store.AdjustmentEventInsert(ctx, tx, store.AdjustmentEventInsertParams{AdjustmentID: a.ID,
			Status: store.StatusDiscarded, Reason: p.Reason, RecordedBy: p.By}); err != nil {
			return asConflict(err)
		}
		out, err = store.AdjustmentGet(ctx, tx, store.AdjustmentGetParams{ID: a.ID})
		return err
	})
	if err != nil {
		return store.Adjustment{}, fmt.Errorf("discard adjustment %d: %w", p.AdjustmentID, err)
	}
	return out, nil
}
