package register

import (
	"context"
	"errors"
	"fmt"
	"maps"
	"slices"
	"strconv"
	"strings"

	"github.com/jackc/pgx/v5"

	"cairn/internal/levelbook"
	"cairn/internal/reduce"
	"cairn/internal/store"
	"cairn/internal/units"
)

// HeldDecimals is the number of decimals a height held from the register
// keeps in the book's unit: the published value converted exactly
// (units.ConvertExact) and rounded to a nanometre-order figure, far below
// any rod reading, so the rounding never shows in a reduction. The
// reduction itself uses the exact value in metres.
const HeldDecimals = 9

// HeldHeight is a mark held at its current published height, as a book is
// reduced from it.
type HeldHeight struct {
	Designation string
	MarkID      int64
	// Version is the published version held (its datum, value and unit).
	Version store.Height
	// Value is the version's value in the book's unit, converted exactly
	// and rounded to HeldDecimals; ValueM is the exact value in metres as
	// the nearest float64, the height the reduction holds.
	Value  string
	Unit   units.Unit
	ValueM float64
	// Condition is the mark's latest condition report (nil if none);
	// InDoubt says it is disturbed, destroyed or not found, and the
	// condition was allowed.
	Condition *store.Condition
	InDoubt   bool
}

// HeldHeightsParams ask for the current heights of marks a book is to be
// reduced from.
type HeldHeightsParams struct {
	// Book is the parsed book: its datum key chooses the datum, its unit
	// the unit of the values, and each mark must be one it can hold
	// (reduce.CheckHold).
	Book *levelbook.Book
	// Marks are the designations to hold.
	Marks []string
	// AllowCondition holds marks whose latest condition report is
	// disturbed, destroyed or not found; ConditionReason, required with
	// it, says why.
	AllowCondition  bool
	ConditionReason string
}

// HeldHeights returns, in the order of p.Marks, each mark's current
// published height on the book's datum, in the book's unit, for reducing
// the book from. Nothing is written.
//
// The datum is the one the book's `datum` key names (by code or name,
// ignoring case, spaces and punctuation); when the book names none, the
// one datum on which every mark has a current height. A mark without a
// current height there, or whose latest condition report puts it in doubt
// (unless p.AllowCondition), is refused, as is a datum the register lacks
// or a choice of datums.
func (r *Register) HeldHeights(ctx context.Context, p HeldHeightsParams) ([]HeldHeight, error) {
	var out []HeldHeight
	err := r.withTx(ctx, readTx, func(tx pgx.Tx) error {
		var err error
		out, err = r.heldHeights(ctx, tx, p)
		return err
	})
	return out, err
}

func (r *Register) heldHeights(ctx context.Context, db store.DBTX, p HeldHeightsParams) ([]HeldHeight, error) {
	if p.AllowCondition && strings.TrimSpace(p.ConditionReason) == "" {
		return nil, inputErr("condition-reason", "say why marks in doubt may be held")
	}
	if !p.AllowCondition && strings.TrimSpace(p.ConditionReason) != "" {
		return nil, inputErr("condition-reason", "a reason goes with allowing the condition of marks in doubt")
	}
	book := p.Book
	var marks []store.Mark
	seen := map[string]bool{}
	for _, name := range p.Marks {
		name = strings.TrimSpace(name)
		if err := reduce.CheckHold(book, name); err != nil {
			return nil, inputErr("hold", "%v", err)
		}
		if seen[name] {
			return nil, inputErr("hold", "%s is held twice", name)
		}
		seen[name] = true
		m, err := r.mark(ctx, db, "hold", name, false)
		if err != nil {
			return nil, err
		}
		if m.FoundBy != "" {
			return nil, inputErr("hold", "%s is an alias of mark %s: a book names its marks by designation; write %s in the book and hold it", name, m.Designation, m.Designation)
		}
		marks = append(marks, m)
	}
	datum, err := r.bookDatum(ctx, db, book, marks)
	if err != nil {
		return nil, err
	}
	out := make([]HeldHeight, 0, len(marks))
	var doubt []string
	for _, m := range marks {
		h, err := store.HeightCurrent(ctx, db, store.HeightLatestParams{MarkID: m.ID, DatumID: datum.ID})
		if errors.Is(err, store.ErrNotFound) {
			return nil, inputErr("hold", "%s has no height on %s to hold: give its height with its value (MARK=HEIGHT)", m.Designation, datum.Code)
		}
		if err != nil {
			return nil, fmt.Errorf("look up the height of %s: %w", m.Designation, err)
		}
		if h.Value == nil {
			return nil, inputErr("hold", "%s has no current height on %s to hold: version %d withdrew it", m.Designation, datum.Code, h.Version)
		}
		if err := heldRefusal(ctx, db, "hold", m, h); err != nil {
			return nil, err
		}
		from, err := units.Parse(*h.Unit)
		if err != nil {
			return nil, fmt.Errorf("height of %s: %w", m.Designation, err)
		}
		value, err := units.ConvertExact(*h.Value, from, book.Meta.Unit, HeldDecimals)
		if err != nil {
			return nil, fmt.Errorf("height of %s: %w", m.Designation, err)
		}
		hm, err := heightMetres(h)
		if err != nil {
			return nil, fmt.Errorf("height of %s: %w", m.Designation, err)
		}
		hh := HeldHeight{Designation: m.Designation, MarkID: m.ID, Version: h, Value: value, Unit: book.Meta.Unit, ValueM: hm, Condition: m.Latest}
		if m.Latest != nil && conditionsInDoubt[m.Latest.Condition] {
			hh.InDoubt = true
			doubt = append(doubt, fmt.Sprintf("%s (%s, reported %s)", m.Designation, m.Latest.Condition, m.Latest.ObservedOn.Format("2006-01-02")))
		}
		out = append(out, hh)
	}
	if len(doubt) > 0 && !p.AllowCondition {
		return nil, inputErr("hold", "the latest condition report of %s puts it in doubt: verify it in the field, or allow the condition and give the reason to hold it anyway",
			strings.Join(doubt, ", "))
	}
	return out, nil
}

// bookDatum resolves the datum of heights held from the register: the one
// the book's datum key names, else the one datum on which every mark has a
// current height.
func (r *Register) bookDatum(ctx context.Context, db store.DBTX, book *levelbook.Book, marks []store.Mark) (store.Datum, error) {
	if named := book.Meta.Datum; looseKey(named) != "" {
		d, ok, err := datumNamed(ctx, db, named)
		if err != nil || ok {
			return d, err
		}
		return store.Datum{}, inputErr("hold", "the book's datum %q (line %d) is not in the register by code or name (see cairn datum list): correct the book's datum key, or give the heights with their values (MARK=HEIGHT)",
			named, book.Meta.Lines["datum"])
	}
	codes, bare, err := commonDatums(ctx, db, marks)
	if err != nil {
		return store.Datum{}, err
	}
	if bare != "" {
		return store.Datum{}, inputErr("hold", "%s has no current height to hold: give its height with its value (MARK=HEIGHT)", bare)
	}
	switch len(codes) {
	case 1:
		return r.datum(ctx, db, "datum", codes[0])
	case 0:
		return store.Datum{}, inputErr("hold", "the held marks have no datum on which all of them have a current height")
	}
	return store.Datum{}, inputErr("hold", "the held marks have current heights on %s and the book names no datum: say which in the book (# datum: ...)",
		strings.Join(codes, " and "))
}

// checkHeldCurrent refuses, as a conflict, held heights that are no
// longer current or whose mark has a newer condition report than when
// they were read.
func checkHeldCurrent(ctx context.Context, tx pgx.Tx, held []HeldHeight, byName map[string]store.Mark) error {
	for _, h := range held {
		cur, err := store.HeightCurrent(ctx, tx, store.HeightLatestParams{MarkID: h.MarkID, DatumID: h.Version.DatumID})
		if err != nil {
			return fmt.Errorf("look up the height of %s: %w", h.Designation, err)
		}
		if cur.ID != h.Version.ID {
			return &ConflictError{Err: fmt.Errorf("the height of %s on %s changed (version %d is current now, %d was held)",
				h.Designation, h.Version.DatumCode, cur.Version, h.Version.Version)}
		}
		m := byName[h.Designation]
		if (m.Latest == nil) != (h.Condition == nil) || m.Latest != nil && m.Latest.ID != h.Condition.ID {
			return &ConflictError{Err: fmt.Errorf("%s has a new condition report", h.Designation)}
		}
	}
	return nil
}

// TypedHoldM converts heights typed for a book (--held-height MARK=HEIGHT,
// in the book's unit u) to metres, in a map with room for extra more,
// refusing one outside the plausible range (units.CheckHeightM) as an
// input error on field "held-height".
func TypedHoldM(u units.Unit, hold map[string]float64, extra int) (map[string]float64, error) {
	out := make(map[string]float64, len(hold)+extra)
	for _, k := range slices.Sorted(maps.Keys(hold)) {
		v := hold[k]
		out[k] = u.ToMetres(v)
		if err := units.CheckHeightM(out[k]); err != nil {
			return nil, inputErr("held-height", "%s=%s %s: %v", k, strconv.FormatFloat(v, 'f', -1, 64), u, err)
		}
	}
	return out, nil
}
