package register

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"slices"
	"time"

	"github.com/jackc/pgx/v5"

	"cairn/internal/store"
)

// TraceParams ask for the derivation of a mark's heights.
type TraceParams struct {
	Designation string
	// Datum is a datum code; "" traces the mark's height on every datum.
	Datum string
	// AsOf picks the versions in force then; nil means now (or KnownAt).
	AsOf *time.Time
	// KnownAt picks them as the register knew them then (committed by
	// then); nil means all it knows now.
	KnownAt *time.Time
}

// Trace is the derivation of the heights of one mark.
type Trace struct {
	Mark    store.Mark
	AsOf    *time.Time
	KnownAt *time.Time
	// Doubts are the doubts about the mark and the versions traced (not
	// those held).
	Doubts Doubts
	// Versions holds one tree per datum.
	Versions []*TraceVersion
}

// TraceVersion is a node of a derivation: one height version and, when it
// came from an adjustment, that adjustment.
type TraceVersion struct {
	store.Height
	// Adjustment is set for a version from an adjustment, unless Repeated.
	Adjustment *TraceAdjustment
	// Import is the import that wrote the version, with its files'
	// SHA-256 (migrations/00019); nil if it was not imported.
	Import *store.ImportEvent
	// Repeated says the version's derivation is shown earlier in the same
	// trace.
	Repeated bool
	// Doubts are the doubts about this version: its mark's and its own.
	Doubts Doubts
}

// TraceAdjustment is the adjustment a version came from: its runs (with
// their books' SHA-256), the derivations of the versions it held, its
// settings (Parameters.HeldAs says how each was held) and the failed
// checks its publication accepted (nil for none).
type TraceAdjustment struct {
	store.Adjustment
	Parameters Parameters
	Runs       []store.Run
	Held       []*TraceVersion
	Accepted   *Acceptance
}

// Trace returns the derivation of a mark's heights as trees: each version
// leads to its adjustment, the adjustment to its runs and to the versions it
// held, and those to their own derivations, down to outside sources.
func (r *Register) Trace(ctx context.Context, p TraceParams) (*Trace, error) {
	var t *Trace
	err := r.withTx(ctx, readTx, func(tx pgx.Tx) error {
		m, err := r.mark(ctx, tx, "designation", p.Designation, false)
		if err != nil {
			return err
		}
		t, err = r.trace(ctx, tx, m, p)
		return err
	})
	if err != nil {
		return nil, fmt.Errorf("trace %s: %w", p.Designation, err)
	}
	return t, nil
}

// trace is Trace of mark m in tx.
func (r *Register) trace(ctx context.Context, tx pgx.Tx, m store.Mark, p TraceParams) (*Trace, error) {
	t := &Trace{Mark: m, AsOf: AsOfOrKnown(p.AsOf, p.KnownAt), KnownAt: p.KnownAt}
	err := func() error {
		q := store.HeightAsOfParams{MarkID: t.Mark.ID, AsOf: t.AsOf, KnownAt: p.KnownAt}
		if p.Datum != "" {
			d, err := r.datum(ctx, tx, "datum", p.Datum)
			if err != nil {
				return err
			}
			q.DatumID = d.ID
		}
		hs, err := store.HeightAsOf(ctx, tx, q)
		if err != nil {
			return err
		}
		if len(hs) == 0 {
			when := "now"
			if t.AsOf != nil {
				when = "as of " + t.AsOf.UTC().Format(time.RFC3339)
			}
			if p.KnownAt != nil {
				when += " as known at " + p.KnownAt.UTC().Format(time.RFC3339)
			}
			return inputErr("designation", "%s has no height %s", t.Mark.Designation, when)
		}
		seen := map[int64]bool{}
		for _, h := range hs {
			n, err := traceVersion(ctx, tx, h, seen)
			if err != nil {
				return err
			}
			t.Versions = append(t.Versions, n)
		}
		return traceDoubts(ctx, tx, t)
	}()
	return t, err
}

// traceVersion builds the derivation of h. Held versions are always older
// than the adjustment that held them, so the recursion ends; seen stops a
// version held by several adjustments being expanded more than once.
func traceVersion(ctx context.Context, db store.DBTX, h store.Height, seen map[int64]bool) (*TraceVersion, error) {
	n := &TraceVersion{Height: h}
	if h.AdjustmentID == nil {
		e, err := store.ImportEventOfHeight(ctx, db, h.ID)
		switch {
		case err == nil:
			n.Import = &e
		case !errors.Is(err, store.ErrNotFound):
			return nil, err
		}
		return n, nil
	}
	if seen[h.ID] {
		n.Repeated = true
		return n, nil
	}
	seen[h.ID] = true
	a, err := store.AdjustmentGet(ctx, db, store.AdjustmentGetParams{ID: *h.AdjustmentID})
	if errors.Is(err, store.ErrNotFound) {
		return nil, fmt.Errorf("version %d of %s cites adjustment %d, which is missing", h.Version, h.Designation, *h.AdjustmentID)
	}
	if err != nil {
		return nil, err
	}
	ta := &TraceAdjustment{Adjustment: a}
	if err := json.Unmarshal(a.Parameters, &ta.Parameters); err != nil {
		return nil, fmt.Errorf("decode parameters of adjustment %d: %w", a.ID, err)
	}
	if ta.Accepted, err = AcceptanceOf(a); err != nil {
		return nil, err
	}
	if ta.Runs, err = store.AdjustmentRunList(ctx, db, a.ID); err != nil {
		return nil, err
	}
	held, err := store.AdjustmentHeldList(ctx, db, a.ID)
	if err != nil {
		return nil, err
	}
	for _, hv := range held {
		c, err := traceVersion(ctx, db, hv.Height, seen)
		if err != nil {
			return nil, err
		}
		ta.Held = append(ta.Held, c)
	}
	n.Adjustment = ta
	return n, nil
}

// traceDoubts finds the doubts of every version in the trace, held ones
// included, each with its mark's condition.
func traceDoubts(ctx context.Context, db store.DBTX, t *Trace) error {
	var nodes []*TraceVersion
	var walk func(n *TraceVersion)
	walk = func(n *TraceVersion) {
		nodes = append(nodes, n)
		if n.Adjustment != nil {
			for _, c := range n.Adjustment.Held {
				walk(c)
			}
		}
	}
	for _, n := range t.Versions {
		walk(n)
	}
	var designations []string
	hs := make([]store.Height, len(nodes))
	for i, n := range nodes {
		hs[i] = n.Height
		if !slices.Contains(designations, n.Designation) {
			designations = append(designations, n.Designation)
		}
	}
	marks, err := store.MarkListByDesignations(ctx, db, designations)
	if err != nil {
		return err
	}
	ds, err := doubtsOf(ctx, db, marks, hs)
	if err != nil {
		return err
	}
	for _, n := range nodes {
		n.Doubts = ds[n.MarkID].Of(n.DatumCode, n.Version)
	}
	t.Doubts = nil
	for _, n := range t.Versions {
		for _, d := range n.Doubts {
			if !slices.Contains(t.Doubts, d) {
				t.Doubts = append(t.Doubts, d)
			}
		}
	}
	return nil
}
