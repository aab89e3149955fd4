package register

import (
	"context"
	"fmt"
	"sort"

	"github.com/jackc/pgx/v5"

	"cairn/internal/store"
)

// StaleHeight is a current height that no longer stands on current
// control, with every reason.
type StaleHeight struct {
	store.Height
	Reasons []StaleReason
}

// StaleReason says why a height is stale.
type StaleReason struct {
	// Kind is store.CauseHeldSuperseded, store.CauseMarkCondition,
	// store.CauseVoidedRun, or CauseHeldStale.
	Kind string
	// Mark is the mark the reason concerns ("" for a voided run).
	Mark string
	// Run is the voided run, for store.CauseVoidedRun (else 0).
	Run int64
	// Text says it in words.
	Text string
}

// CauseHeldStale: the adjustment held a version that is current but itself
// stale.
const CauseHeldStale = "held-stale"

// Stale returns every current height from an adjustment that held a
// version since superseded, or used a run that touched a mark later reported
// disturbed or destroyed, or used a run since voided, and, following those, every current height whose
// adjustment held such a stale height. These are the heights to adjust
// again; publishing a new adjustment of them clears them.
func (r *Register) Stale(ctx context.Context) ([]StaleHeight, error) {
	var out []StaleHeight
	err := r.withTx(ctx, readTx, func(tx pgx.Tx) error {
		var err error
		out, err = staleHeights(ctx, tx)
		return err
	})
	if err != nil {
		return nil, fmt.Errorf("find stale heights: %w", err)
	}
	return out, nil
}

// staleHeights finds the stale heights (see Stale) in the transaction db.
func staleHeights(ctx context.Context, db store.DBTX) ([]StaleHeight, error) {
	causes, err := store.StaleCauseList(ctx, db)
	if err != nil {
		return nil, err
	}
	links, err := store.HeldLinkList(ctx, db)
	if err != nil {
		return nil, err
	}
	reasons := map[int64][]StaleReason{}
	for _, c := range causes {
		reasons[c.HeightID] = append(reasons[c.HeightID], reasonOf(c))
	}
	// The stale set: the heights with a cause, and every current
	// height whose adjustment held one of them, and so on.
	holders, heldOf := map[int64][]int64{}, map[int64][]int64{}
	for _, l := range links {
		holders[l.HeldID] = append(holders[l.HeldID], l.HeightID)
		heldOf[l.HeightID] = append(heldOf[l.HeightID], l.HeldID)
	}
	stale := map[int64]bool{}
	var queue []int64
	for id := range reasons {
		stale[id] = true
		queue = append(queue, id)
	}
	for len(queue) > 0 {
		id := queue[0]
		queue = queue[1:]
		for _, h := range holders[id] {
			if !stale[h] {
				stale[h] = true
				queue = append(queue, h)
			}
		}
	}
	ids := make([]int64, 0, len(stale))
	for id := range stale {
		ids = append(ids, id)
	}
	hs, err := store.HeightListByIDs(ctx, db, ids)
	if err != nil {
		return nil, err
	}
	byID := map[int64]store.Height{}
	for _, h := range hs {
		byID[h.ID] = h
	}
	for _, h := range hs {
		var via []store.Height
		for _, held := range heldOf[h.ID] {
			if stale[held] {
				via = append(via, byID[held])
			}
		}
		sort.Slice(via, func(i, j int) bool { return via[i].Designation < via[j].Designation })
		for _, v := range via {
			reasons[h.ID] = append(reasons[h.ID], StaleReason{Kind: CauseHeldStale, Mark: v.Designation,
				Text: fmt.Sprintf("adjustment %d held %s version %d, which is itself stale", *h.AdjustmentID, v.Designation, v.Version)})
		}
	}
	out := make([]StaleHeight, len(hs))
	for i, h := range hs {
		out[i] = StaleHeight{Height: h, Reasons: reasons[h.ID]}
	}
	return out, nil
}

func reasonOf(c store.StaleCause) StaleReason {
	switch c.Kind {
	case store.CauseHeldSuperseded:
		return StaleReason{Kind: c.Kind, Mark: c.Mark, Text: fmt.Sprintf("adjustment %d held %s version %d, superseded by version %d on %s",
			c.AdjustmentID, c.Mark, c.HeldVersion, c.SuccessorVersion, c.SuccessorAt.UTC().Format("2006-01-02 15:04:05Z"))}
	case store.CauseVoidedRun:
		return StaleReason{Kind: c.Kind, Run: c.RunID, Text: fmt.Sprintf("run %d of adjustment %d was voided %s by %s: %s",
			c.RunID, c.AdjustmentID, c.VoidedAt.UTC().Format("2006-01-02 15:04:05Z"), c.VoidedBy, c.VoidReason)}
	default:
		return StaleReason{Kind: c.Kind, Mark: c.Mark, Text: fmt.Sprintf("run %d of adjustment %d touched %s, reported %s on %s, after the run",
			c.RunID, c.AdjustmentID, c.Mark, c.Condition, c.ObservedOn.Format("2006-01-02"))}
	}
}
