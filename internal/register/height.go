package register

import (
	"context"
	"errors"
	"fmt"
	"regexp"
	"strings"
	"sync"
	"time"

	"github.com/jackc/pgx/v5"

	"cairn/internal/standards"
	"cairn/internal/store"
	"cairn/internal/units"
)

// Source kinds of a height version.
const (
	KindAuthority   = "authority"    // published by an outside authority; cites it
	KindAdjustment  = "adjustment"   // published from an adjustment of level runs
	KindDatumChange = "datum-change" // moved to another realisation of the datum
	KindCorrection  = "correction"   // a mistake in an earlier version put right
	KindWithdrawal  = "withdrawal"   // no height in force any more
)

// MaxDecimals is the most decimals a published height may carry.
const MaxDecimals = 6

var decimalPattern = sync.OnceValue(func() *regexp.Regexp { return regexp.MustCompile(`^[+-]?[0-9]+(\.[0-9]+)?$`) })

// HeightSetParams are the fields of a new version of a mark's height.
type HeightSetParams struct {
	Designation string
	Datum       string // datum code
	// Value is the height exactly as published, in decimal (e.g. "769.83").
	// Empty for a withdrawal.
	Value string
	Unit  string // m, ft or usft
	// Decimals is the number of decimals published; nil means as many as
	// Value is written with. Value may not carry more.
	Decimals *int
	Class    string // accuracy class, e.g. "second-I" (standards.ParseClass)
	// Kind is the source kind (KindAuthority unless set).
	Kind string
	// Source cites the publication (required for KindAuthority).
	Source       string
	AdjustmentID *int64 // required for KindAdjustment
	Reason       string // why this version (required)
	RecordedBy   string // who (required)
	// InForceFrom is when the version came in force, as its source gives
	// it: the date the authority published it, or took effect. Required
	// for every kind but KindAdjustment, which comes in force at its
	// commit and must leave it nil; not after now.
	InForceFrom *time.Time
}

// HeightSetResult is the version written and the one it superseded.
type HeightSetResult struct {
	Version  store.Height
	Previous *store.Height
}

// HeightSet records a new version of a mark's height on a datum,
// superseding the current one. Writers of one mark take turns: the mark's
// row is locked for the length of the transaction.
func (r *Register) HeightSet(ctx context.Context, p HeightSetParams) (HeightSetResult, error) {
	ins, err := checkHeight(&p)
	if err != nil {
		return HeightSetResult{}, err
	}
	var res HeightSetResult
	var xid uint64
	err = r.withTx(ctx, pgx.TxOptions{}, func(tx pgx.Tx) error {
		m, err := r.mark(ctx, tx, "designation", p.Designation, true)
		if err != nil {
			return err
		}
		d, err := r.datum(ctx, tx, "datum", p.Datum)
		if err != nil {
			return err
		}
		ins.MarkID, ins.DatumID = m.ID, d.ID
		prev, err := store.HeightLatest(ctx, tx, store.HeightLatestParams{MarkID: m.ID, DatumID: d.ID})
		switch {
		case err == nil:
			ins.Supersedes, res.Previous = &prev.ID, &prev
		case !errors.Is(err, store.ErrNotFound):
			return err
		}
		if m.Retired != nil && p.Kind != KindWithdrawal && p.Kind != KindCorrection {
			return inputErr("designation", "mark %s: a retired mark gets no new height (only a correction of its record, or a withdrawal)", retiredText(m))
		}
		if p.Kind == KindWithdrawal && (res.Previous == nil || res.Previous.Value == nil) {
			return inputErr("datum", "mark %s has no height on %s to withdraw", m.Designation, d.Code)
		}
		if res.Version, err = store.HeightInsert(ctx, tx, ins); err != nil {
			return asConflict(err)
		}
		xid, err = store.TxID(ctx, tx)
		return err
	})
	if err == nil {
		res.Version.CommittedAt, err = store.CommitTime(ctx, r.pool, xid)
		if res.Version.InForceGiven == nil {
			res.Version.InForceFrom = res.Version.CommittedAt
		}
	}
	if err != nil {
		return HeightSetResult{}, fmt.Errorf("set height of %s: %w", p.Designation, err)
	}
	return res, nil
}

// checkHeight checks and normalises p, returning the insert without mark
// and datum.
func checkHeight(p *HeightSetParams) (store.HeightInsertParams, error) {
	if p.Kind == "" {
		p.Kind = KindAuthority
	}
	class := strings.TrimSpace(p.Class)
	if class != "" {
		c, err := standards.ParseClass(class)
		if err != nil {
			return store.HeightInsertParams{}, inputErr("class", "%v", err)
		}
		class = c.String()
	}
	ins := store.HeightInsertParams{Class: class, SourceKind: p.Kind,
		Source: strings.TrimSpace(p.Source), AdjustmentID: p.AdjustmentID,
		Reason: strings.TrimSpace(p.Reason), RecordedBy: strings.TrimSpace(p.RecordedBy), InForceFrom: p.InForceFrom}
	switch p.Kind {
	case KindAuthority, KindDatumChange, KindCorrection, KindAdjustment:
		value := strings.TrimPrefix(strings.TrimSpace(p.Value), "+")
		if err := units.CheckDigits(value); err != nil {
			return ins, inputErr("value", "%v", err)
		}
		if !decimalPattern().MatchString(value) {
			return ins, inputErr("value", "%q is not a height: write a decimal number such as 769.83", p.Value)
		}
		u, err := units.Parse(p.Unit)
		if err != nil {
			return ins, inputErr("unit", "%v", err)
		}
		if err := checkValueRange(value, u); err != nil {
			return ins, inputErr("value", "%s %s: %v", value, u, err)
		}
		written := 0
		if i := strings.IndexByte(value, '.'); i >= 0 {
			written = len(value) - i - 1
		}
		dec := written
		if p.Decimals != nil {
			dec = *p.Decimals
		}
		if dec < 0 || dec > MaxDecimals {
			return ins, inputErr("decimals", "%d is outside 0 to %d", dec, MaxDecimals)
		}
		if written > dec {
			return ins, inputErr("decimals", "value %s has %d decimals, more than the %d published", value, written, dec)
		}
		if dec > written {
			if written == 0 {
				value += "."
			}
			value += strings.Repeat("0", dec-written)
		}
		unit := u.String()
		ins.Value, ins.Unit, ins.Decimals = &value, &unit, &dec
	case KindWithdrawal:
		if strings.TrimSpace(p.Value) != "" {
			return ins, inputErr("value", "a withdrawal has no value")
		}
	default:
		return ins, inputErr("kind", "unknown source kind %q", p.Kind)
	}
	if p.Kind == KindAuthority && ins.Source == "" {
		return ins, inputErr("source", "cite the publication the height comes from")
	}
	if p.Kind == KindAdjustment && p.AdjustmentID == nil {
		return ins, inputErr("adjustment", "a height from an adjustment names the adjustment")
	}
	switch {
	case p.Kind == KindAdjustment && p.InForceFrom != nil:
		return ins, inputErr("in-force-from", "a height from an adjustment comes in force when it is published; give no in-force date")
	case p.Kind != KindAdjustment && p.InForceFrom == nil:
		return ins, inputErr("in-force-from", "give the date the height came in force, as its source gives it (the date the %s took effect)", kindNoun(p.Kind))
	case p.InForceFrom != nil && p.InForceFrom.After(time.Now()):
		return ins, inputErr("in-force-from", "%s is in the future: the register records heights in force already", p.InForceFrom.Format(time.RFC3339))
	}
	if ins.Reason == "" {
		return ins, inputErr("reason", "say why this height is being recorded")
	}
	if ins.RecordedBy == "" {
		return ins, inputErr("by", "say who is recording the height")
	}
	return ins, nil
}

// kindNoun names what a version of kind k records, for messages.
func kindNoun(k string) string {
	switch k {
	case KindWithdrawal:
		return "withdrawal"
	case KindCorrection:
		return "correction"
	case KindDatumChange:
		return "change of datum"
	}
	return "publication"
}

// checkValueRange refuses a decimal value in unit u outside the plausible
// range of heights (units.CheckHeightM), converted exactly.
func checkValueRange(value string, u units.Unit) error {
	r, err := units.ParseRat(value)
	if err != nil {
		return err
	}
	m, _ := r.Mul(r, u.Rat()).Float64()
	return units.CheckHeightM(m)
}

// HeightShowParams ask for a mark's heights.
type HeightShowParams struct {
	Designation string
	Datum       string     // "" for every datum
	AsOf        *time.Time // the instant asked about; nil for now, or KnownAt when that is given
	// KnownAt is the instant of the register's knowledge: the versions it
	// had learned of (committed) by then; nil for all it knows now.
	KnownAt *time.Time
}

// HeightShow returns the mark (with its latest condition) and, for each
// datum, the version in force at AsOf as the register knew it at KnownAt
// (store.HeightAsOf has the rule). KnownAt alone asks what the register
// said then was in force then. A datum whose version in force is a
// withdrawal is listed with no value; a datum with no version yet at that
// time is left out.
func (r *Register) HeightShow(ctx context.Context, p HeightShowParams) (MarkView, error) {
	var v MarkView
	err := r.withTx(ctx, readTx, func(tx pgx.Tx) error {
		var err error
		if v.Mark, err = r.mark(ctx, tx, "designation", p.Designation, false); err != nil {
			return err
		}
		q := store.HeightAsOfParams{MarkID: v.Mark.ID, AsOf: AsOfOrKnown(p.AsOf, p.KnownAt), KnownAt: p.KnownAt}
		if p.Datum != "" {
			d, err := r.datum(ctx, tx, "datum", p.Datum)
			if err != nil {
				return err
			}
			q.DatumID = d.ID
		}
		if v.Heights, err = store.HeightAsOf(ctx, tx, q); err != nil {
			return err
		}
		ds, err := doubtsOf(ctx, tx, []store.Mark{v.Mark}, v.Heights)
		v.Doubts = ds[v.Mark.ID]
		return err
	})
	return v, err
}

// CurrentHeight is a current version with the doubts that concern it
// (its mark's and its own).
type CurrentHeight struct {
	store.Height
	Doubts Doubts
	// Position is the mark's current position, nil if it has none.
	Position *store.LatLon
}

// HeightsCurrent returns the current version of every mark on datum (""
// for every datum), by designation and datum code, each with its doubts.
func (r *Register) HeightsCurrent(ctx context.Context, datum string) ([]CurrentHeight, error) {
	return r.HeightsAsOf(ctx, datum, nil, nil)
}

// AsOfOrKnown is the instant asked about: asOf, or knownAt when asOf is
// not given (what the register said then was in force then).
func AsOfOrKnown(asOf, knownAt *time.Time) *time.Time {
	if asOf == nil {
		return knownAt
	}
	return asOf
}

// HeightsAsOf returns the version of every mark on datum ("" for every
// datum) in force at asOf as the register knew it at knownAt (each nil:
// now; knownAt alone: in force then as known then), by the rule of
// store.HeightAsOf, each with its doubts and its mark's current position
// (not the position as of then). A version listed may be a withdrawal.
func (r *Register) HeightsAsOf(ctx context.Context, datum string, asOf, knownAt *time.Time) ([]CurrentHeight, error) {
	var out []CurrentHeight
	err := r.HeightsAsOfEach(ctx, datum, asOf, knownAt, func(page []CurrentHeight) error {
		out = append(out, page...)
		return nil
	})
	return out, err
}

// HeightsAsOfEach is HeightsAsOf a page at a time: page is called with
// the heights of each ListPageSize marks by designation (a page may be
// empty), all read in one snapshot, so that a listing of the whole
// register holds one page.
func (r *Register) HeightsAsOfEach(ctx context.Context, datum string, asOf, knownAt *time.Time, page func([]CurrentHeight) error) error {
	return r.withTx(ctx, readTx, func(tx pgx.Tx) error {
		var id int64
		if datum != "" {
			d, err := r.datum(ctx, tx, "datum", datum)
			if err != nil {
				return err
			}
			id = d.ID
		}
		q := store.HeightAsOfAllParams{DatumID: id, AsOf: AsOfOrKnown(asOf, knownAt), KnownAt: knownAt}
		after := ""
		for {
			markIDs, last, err := store.MarkIDPage(ctx, tx, after, ListPageSize)
			if err != nil {
				return err
			}
			if len(markIDs) == 0 {
				return nil
			}
			hs, err := store.HeightAsOfMarks(ctx, tx, q, markIDs)
			if err != nil {
				return err
			}
			out, err := currentHeights(ctx, tx, hs)
			if err != nil {
				return err
			}
			if err := page(out); err != nil {
				return err
			}
			if len(markIDs) < ListPageSize {
				return nil
			}
			after = last
		}
	})
}

// currentHeights gives the versions hs their doubts and their marks'
// positions.
func currentHeights(ctx context.Context, tx pgx.Tx, hs []store.Height) ([]CurrentHeight, error) {
	var ids []int64
	for _, h := range hs {
		if len(ids) == 0 || ids[len(ids)-1] != h.MarkID {
			ids = append(ids, h.MarkID)
		}
	}
	latest, err := store.ConditionLatestMany(ctx, tx, ids)
	if err != nil {
		return nil, err
	}
	marks := make([]store.Mark, 0, len(latest))
	for _, h := range hs {
		if c, ok := latest[h.MarkID]; ok {
			marks = append(marks, store.Mark{ID: h.MarkID, Designation: h.Designation, Latest: &c})
			delete(latest, h.MarkID)
		}
	}
	ds, err := doubtsOf(ctx, tx, marks, hs)
	if err != nil {
		return nil, err
	}
	pos, err := store.MarkPositions(ctx, tx, ids)
	if err != nil {
		return nil, err
	}
	out := make([]CurrentHeight, len(hs))
	for i, h := range hs {
		out[i] = CurrentHeight{Height: h, Doubts: ds[h.MarkID].Of(h.DatumCode, h.Version)}
		if p, ok := pos[h.MarkID]; ok {
			out[i].Position = &p
		}
	}
	return out, nil
}

// HistoryEntry is one version with its change from the version before.
type HistoryEntry struct {
	store.Height
	// Change is this value minus the previous version's, in this version's
	// unit and decimals (the previous one converted exactly if its unit
	// differs); nil for a first version and when either has no value.
	Change *string
	// Accepted is, for a version from an adjustment published with failed
	// checks accepted, that acceptance; nil otherwise.
	Accepted *Acceptance
	// Doubts concern this version: its mark's and its own.
	Doubts Doubts
}

// HistoryView is a mark's history: the mark, its doubts (its own and its
// versions') and every version.
type HistoryView struct {
	Mark     store.Mark
	Doubts   Doubts
	Versions []HistoryEntry
}

// History returns every version of a mark's heights, newest first within
// each datum (datums by code), each with its change from the one before,
// and the doubts about the mark and its versions.
func (r *Register) History(ctx context.Context, designation, datum string) (HistoryView, error) {
	var v HistoryView
	var hs []store.Height
	var accepted map[int64]*Acceptance
	err := r.withTx(ctx, readTx, func(tx pgx.Tx) error {
		var err error
		if v.Mark, err = r.mark(ctx, tx, "designation", designation, false); err != nil {
			return err
		}
		q := store.HeightHistoryParams{MarkID: v.Mark.ID}
		if datum != "" {
			d, err := r.datum(ctx, tx, "datum", datum)
			if err != nil {
				return err
			}
			q.DatumID = d.ID
		}
		if hs, err = store.HeightHistory(ctx, tx, q); err != nil {
			return err
		}
		if accepted, err = acceptances(ctx, tx, hs); err != nil {
			return err
		}
		ds, err := doubtsOf(ctx, tx, []store.Mark{v.Mark}, hs)
		v.Doubts = ds[v.Mark.ID]
		return err
	})
	if err != nil {
		return v, err
	}
	v.Versions = make([]HistoryEntry, len(hs))
	for i, h := range hs {
		e := &v.Versions[i]
		e.Height = h
		e.Doubts = v.Doubts.Of(h.DatumCode, h.Version)
		if h.AdjustmentID != nil {
			e.Accepted = accepted[*h.AdjustmentID]
		}
		if i+1 < len(hs) && hs[i+1].DatumID == h.DatumID {
			c, err := change(h, hs[i+1])
			if err != nil {
				return v, err
			}
			e.Change = c
		}
	}
	return v, nil
}

// acceptances returns, by adjustment, the acceptances of failed checks of
// the adjustments the versions hs came from (those that accepted any).
func acceptances(ctx context.Context, db store.DBTX, hs []store.Height) (map[int64]*Acceptance, error) {
	out := map[int64]*Acceptance{}
	seen := map[int64]bool{}
	for _, h := range hs {
		if h.AdjustmentID == nil || seen[*h.AdjustmentID] {
			continue
		}
		seen[*h.AdjustmentID] = true
		a, err := store.AdjustmentGet(ctx, db, store.AdjustmentGetParams{ID: *h.AdjustmentID})
		if err != nil {
			return nil, fmt.Errorf("look up adjustment %d of %s version %d: %w", *h.AdjustmentID, h.Designation, h.Version, err)
		}
		acc, err := AcceptanceOf(a)
		if err != nil {
			return nil, err
		}
		if acc != nil {
			out[a.ID] = acc
		}
	}
	return out, nil
}

// change returns cur − prev in cur's unit, with exact arithmetic (prev
// converted exactly when its unit differs), rounded half away from zero to
// cur's decimals, with its sign.
func change(cur, prev store.Height) (*string, error) {
	if cur.Value == nil || prev.Value == nil {
		return nil, nil
	}
	cu, err := units.Parse(*cur.Unit)
	if err != nil {
		return nil, err
	}
	pu, err := units.Parse(*prev.Unit)
	if err != nil {
		return nil, err
	}
	a, err := units.ParseRat(*cur.Value)
	if err != nil {
		return nil, err
	}
	b, err := units.ParseRat(*prev.Value)
	if err != nil {
		return nil, err
	}
	b.Mul(b, pu.Rat()).Quo(b, cu.Rat())
	s := units.RoundRat(a.Sub(a, b), *cur.Decimals)
	if !strings.HasPrefix(s, "-") {
		s = "+" + s
	}
	return &s, nil
}
