package register

import (
	"context"
	"encoding/hex"
	"errors"
	"fmt"

	"github.com/jackc/pgx/v5"

	"cairn/internal/store"
)

// DefaultExportBatch is how many marks an export reads at a time: the
// marks, their current heights, their last good reports and their doubts
// of one batch are all it holds (docs/performance.md).
const DefaultExportBatch = 1000

// ExportTableParams choose the marks of a one-file export: every mark, or
// those within RadiusM of Near.
type ExportTableParams struct {
	Near    *store.LatLon
	RadiusM float64
	// Batch is how many marks are read at a time (DefaultExportBatch
	// when 0).
	Batch int
}

// ExportTableStart is what an export knows before its first mark: the
// register state it reads and how many marks the register holds (all of
// them are exported unless Near is given).
type ExportTableStart struct {
	State RegisterState
	Marks int64
}

// ExportTable reads every mark (or those near p.Near) with its current
// heights on every datum, its last report that found it in good order
// and its doubts, in one read-only snapshot, by designation, batch by
// batch: start is called once with the register state, then batch with
// each batch's marks as datasheets (Mark, Heights, Doubts, and in
// Conditions the last good report alone; no aliases' details, photos or
// neighbours). Only one batch is held at a time; the stale doubt of a
// batch reads only its heights' own held chains.
func (r *Register) ExportTable(ctx context.Context, p ExportTableParams, start func(ExportTableStart) error, batch func([]Datasheet) error) error {
	if p.Near != nil {
		if p.Near.Lat < -90 || p.Near.Lat > 90 {
			return inputErr("area", "latitude %v is outside -90 to 90 degrees", p.Near.Lat)
		}
		if p.Near.Lon < -180 || p.Near.Lon > 180 {
			return inputErr("area", "longitude %v is outside -180 to 180 degrees", p.Near.Lon)
		}
		if !(p.RadiusM > 0) {
			return inputErr("within", "the radius must be more than zero")
		}
	}
	size := p.Batch
	if size <= 0 {
		size = DefaultExportBatch
	}
	err := r.runTx(ctx, readTx, func(tx pgx.Tx) error {
		var st ExportTableStart
		head, err := store.CommitHead(ctx, tx)
		switch {
		case errors.Is(err, store.ErrNotFound):
		case err != nil:
			return err
		default:
			st.State = RegisterState{Seq: head.Seq, Head: hex.EncodeToString(head.Hash), CommittedAt: head.CommittedAt.UTC()}
		}
		if st.Marks, err = store.MarkCount(ctx, tx); err != nil {
			return err
		}
		if err := start(st); err != nil {
			return err
		}
		after := ""
		for {
			ms, err := store.MarkList(ctx, tx, store.MarkListParams{Near: p.Near, RadiusM: p.RadiusM, After: after, PageSize: size})
			if err != nil {
				return err
			}
			if len(ms) == 0 {
				return nil
			}
			after = ms[len(ms)-1].Designation
			ids := make([]int64, len(ms))
			for i, m := range ms {
				ids[i] = m.ID
			}
			hs, err := store.HeightCurrentByMarks(ctx, tx, ids)
			if err != nil {
				return err
			}
			good, err := store.ConditionLastGoodMany(ctx, tx, ids)
			if err != nil {
				return err
			}
			ds, err := doubtsOf(ctx, tx, ms, hs)
			if err != nil {
				return err
			}
			sheets := make([]Datasheet, len(ms))
			byMark := make(map[int64]int, len(ms))
			for i, m := range ms {
				sheets[i].Mark, sheets[i].Doubts, byMark[m.ID] = m, ds[m.ID], i
				if c, ok := good[m.ID]; ok {
					sheets[i].Conditions = []store.Condition{c}
				}
			}
			for _, h := range hs {
				s := &sheets[byMark[h.MarkID]]
				s.Heights = append(s.Heights, h)
			}
			if err := batch(sheets); err != nil {
				return err
			}
			if len(ms) < size {
				return nil
			}
		}
	})
	if err != nil {
		return fmt.Errorf("export: %w", err)
	}
	return nil
}
