package register

import (
	"context"
	"errors"
	"fmt"
	"slices"
	"sort"
	"strings"

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

// StaleParams choose the heights stale looks at: all of them when zero.
type StaleParams struct {
	// Datum, if set, keeps the heights on that datum (its code).
	Datum string
	// Near, with RadiusM, keeps the heights of the marks whose current
	// position is within RadiusM metres of it (an area).
	Near    *store.LatLon
	RadiusM float64
	// Limit, if more than zero, keeps the first Limit heights (by mark and
	// datum); StaleList.More says whether there were more.
	Limit int
}

// StaleList is what Stale found.
type StaleList struct {
	Heights []StaleHeight
	// More: Limit left out some stale heights.
	More bool
}

// Stale returns every current height from an adjustment that held a
// version since superseded, or used a run that touched a mark later reported
// disturbed or destroyed, or used a run since voided, and, following those, every current height whose
// adjustment held such a stale height, within p's datum and area. These
// are the heights to adjust again; publishing a new adjustment of them
// clears them. A height in the area is stale too when a height it held,
// outside the area, is: the held links are followed wherever they lead.
func (r *Register) Stale(ctx context.Context, p StaleParams) (StaleList, error) {
	var out StaleList
	if p.Near != nil {
		if p.Near.Lat < -90 || p.Near.Lat > 90 {
			return out, inputErr("area", "latitude %v is outside -90 to 90 degrees", p.Near.Lat)
		}
		if p.Near.Lon < -180 || p.Near.Lon > 180 {
			return out, inputErr("area", "longitude %v is outside -180 to 180 degrees", p.Near.Lon)
		}
		if !(p.RadiusM > 0) {
			return out, inputErr("within", "the radius of the area must be more than zero")
		}
	}
	if p.Limit < 0 {
		return out, inputErr("limit", "the limit must be zero (no limit) or more, not %d", p.Limit)
	}
	err := r.withTx(ctx, readTx, func(tx pgx.Tx) error {
		var scope store.StaleScope
		if strings.TrimSpace(p.Datum) != "" {
			d, err := r.datum(ctx, tx, "datum", p.Datum)
			if err != nil {
				return err
			}
			scope.DatumID = &d.ID
		}
		var seeds []int64
		if p.Near != nil || scope.DatumID != nil {
			if p.Near != nil {
				ids, err := store.MarkIDsWithin(ctx, tx, *p.Near, p.RadiusM)
				if err != nil {
					return err
				}
				scope.MarkIDs = append([]int64{}, ids...) // none is an empty area, not the register
			}
			var err error
			if seeds, err = store.HeightCurrentAdjustedIDs(ctx, tx, scope); err != nil {
				return err
			}
		}
		hs, err := staleHeights(ctx, tx, seeds, p.Near != nil || scope.DatumID != nil)
		if err != nil {
			return err
		}
		if p.Limit > 0 && len(hs) > p.Limit {
			hs, out.More = hs[:p.Limit], true
		}
		out.Heights = hs
		return nil
	})
	var ie *InputError
	if errors.As(err, &ie) {
		return StaleList{}, err
	}
	if err != nil {
		return StaleList{}, fmt.Errorf("find stale heights: %w", err)
	}
	return out, nil
}

// staleHeights finds the stale heights (see Stale) in the transaction db:
// of the whole register, or, if scoped, those among seeds (current heights
// from adjustments), found from seeds and the heights their adjustments
// held, and those held, and so on, one query a step.
func staleHeights(ctx context.Context, db store.DBTX, seeds []int64, scoped bool) ([]StaleHeight, error) {
	var causes []store.StaleCause
	var links []store.HeldLink
	var err error
	if !scoped {
		if causes, err = store.StaleCauseList(ctx, db, nil); err != nil {
			return nil, err
		}
		if links, err = store.HeldLinkList(ctx, db, nil); err != nil {
			return nil, err
		}
	} else {
		if len(seeds) == 0 {
			return nil, nil
		}
		reached := map[int64]bool{}
		all := []int64{}
		for _, id := range seeds {
			if !reached[id] {
				reached[id] = true
				all = append(all, id)
			}
		}
		for frontier := all; len(frontier) > 0; {
			ls, err := store.HeldLinkList(ctx, db, frontier)
			if err != nil {
				return nil, err
			}
			links = append(links, ls...)
			frontier = nil
			for _, l := range ls {
				if !reached[l.HeldID] {
					reached[l.HeldID] = true
					frontier = append(frontier, l.HeldID)
					all = append(all, l.HeldID)
				}
			}
		}
		if causes, err = store.StaleCauseList(ctx, db, all); err != nil {
			return nil, err
		}
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
	if scoped {
		// The heights held from outside the scope were needed to decide;
		// only the seeds are asked about.
		inSeeds := make(map[int64]bool, len(seeds))
		for _, id := range seeds {
			inSeeds[id] = true
		}
		hs = slices.DeleteFunc(hs, func(h store.Height) bool { return !inSeeds[h.ID] })
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
