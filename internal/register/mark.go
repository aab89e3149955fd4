package register

import (
	"context"
	"errors"
	"math"
	"regexp"
	"slices"
	"strings"
	"time"

	"github.com/jackc/pgx/v5"

	"cairn/internal/store"
)

var designationPattern = regexp.MustCompile(`^[A-Za-z0-9][A-Za-z0-9._/-]{0,63}$`)

// Conditions are the states a condition report may give, in the order
// help texts list them.
var Conditions = []string{"good", "disturbed", "destroyed", "not-found", "reset"}

// Unverified is the condition of a mark created by recording a book that
// named it (run record --new-marks): no one has reported on it yet.
// Unknown is what the register shows for a mark with no report at all.
const (
	Unverified = "unverified"
	Unknown    = "unknown"
)

// ShownConditions are the conditions the register shows for a mark, every
// one of which a listing can be filtered by: Conditions, Unverified and
// Unknown.
var ShownConditions = append(slices.Clip(Conditions), Unverified, Unknown)

// ParseCondition reads a condition word in any case, with spaces or
// underscores for hyphens ("Not Found", "NOT_FOUND"), as one of allowed;
// ok is false when it is none of them.
func ParseCondition(s string, allowed []string) (string, bool) {
	k := strings.NewReplacer(" ", "-", "_", "-").Replace(strings.ToLower(strings.TrimSpace(s)))
	if slices.Contains(allowed, k) {
		return k, true
	}
	return s, false
}

// MarkAddParams are the fields of a new mark.
type MarkAddParams struct {
	Designation string
	Type        string // e.g. "bronze disk", "brass rod"
	Setting     string // e.g. "concrete post", "bridge abutment"
	Stamping    string // what is stamped on it
	ToReach     string // how to find it, in words
	Lat, Lon    *float64
	CreatedBy   string
}

// MarkAdd adds a mark to the register.
func (r *Register) MarkAdd(ctx context.Context, p MarkAddParams) (store.Mark, error) {
	if err := nameProblem("designation", "designation", p.Designation); err != nil {
		return store.Mark{}, err
	}
	if (p.Lat == nil) != (p.Lon == nil) {
		return store.Mark{}, inputErr("lat", "give both a latitude and a longitude, or neither")
	}
	if p.Lat != nil {
		if math.IsNaN(*p.Lat) || *p.Lat < -90 || *p.Lat > 90 {
			return store.Mark{}, inputErr("lat", "latitude %v is outside -90 to 90 degrees", *p.Lat)
		}
		if math.IsNaN(*p.Lon) || *p.Lon < -180 || *p.Lon > 180 {
			return store.Mark{}, inputErr("lon", "longitude %v is outside -180 to 180 degrees", *p.Lon)
		}
	}
	if strings.TrimSpace(p.CreatedBy) == "" {
		return store.Mark{}, inputErr("by", "say who is adding the mark")
	}
	var m store.Mark
	err := r.withTx(ctx, pgx.TxOptions{}, func(tx pgx.Tx) error {
		// The same name written another way is refused naming the mark
		// that has it; the unique index on the folded form settles a race.
		existing, err := markFolded(ctx, tx, p.Designation)
		if err != nil {
			return err
		}
		if err := sameNameProblem("designation", "mark", p.Designation, existing); err != nil {
			return err
		}
		if !designationPattern.MatchString(p.Designation) {
			return inputErr("designation", "%q is not a designation: use at most 64 letters, digits and . _ / -, starting with a letter or digit", p.Designation)
		}
		_, err = store.MarkInsert(ctx, tx, store.MarkInsertParams{
			Designation: p.Designation, Type: p.Type, Setting: p.Setting, Stamping: p.Stamping,
			ToReach: p.ToReach, Lat: p.Lat, Lon: p.Lon, CreatedBy: p.CreatedBy,
		})
		if errors.Is(err, store.ErrAlreadyExists) {
			return inputErr("designation", "mark %s is already in the register", p.Designation)
		}
		if err != nil {
			return err
		}
		m, err = store.MarkGet(ctx, tx, store.MarkGetParams{Designation: p.Designation})
		return err
	})
	return m, err
}

// MarkView is a mark with its condition reports (latest first) and the
// heights in force (one per datum).
type MarkView struct {
	Mark       store.Mark
	Conditions []store.Condition
	Heights    []store.Height
	// Runs are the recorded runs that touched the mark, oldest first.
	Runs []store.Run
	// Doubts are the mark's doubts and those of the heights shown
	// (doubtsOf).
	Doubts Doubts
}

// MarkShow returns a mark, its condition history and its current heights.
func (r *Register) MarkShow(ctx context.Context, designation string) (MarkView, error) {
	var v MarkView
	err := r.withTx(ctx, readTx, func(tx pgx.Tx) error {
		var err error
		if v.Mark, err = r.mark(ctx, tx, "designation", designation, false); err != nil {
			return err
		}
		if v.Conditions, err = store.ConditionListByMark(ctx, tx, v.Mark.ID); err != nil {
			return err
		}
		if v.Heights, err = store.HeightAsOf(ctx, tx, store.HeightAsOfParams{MarkID: v.Mark.ID}); err != nil {
			return err
		}
		if v.Runs, err = store.RunList(ctx, tx, store.RunListParams{MarkID: &v.Mark.ID}); err != nil {
			return err
		}
		ds, err := doubtsOf(ctx, tx, []store.Mark{v.Mark}, v.Heights)
		v.Doubts = ds[v.Mark.ID]
		return err
	})
	return v, err
}

// MarkListParams filter a listing of marks.
type MarkListParams struct {
	Near    *store.LatLon // with RadiusM: marks within that distance, nearest first
	RadiusM float64
	// Conditions keeps marks whose latest report is one of these, in any
	// case (ShownConditions: "unknown" for no report yet).
	Conditions []string
}

// ListedMark is a mark in a listing, with its doubts and those of its
// current heights.
type ListedMark struct {
	store.Mark
	Doubts Doubts
}

// MarkList lists marks with their latest condition and their doubts.
func (r *Register) MarkList(ctx context.Context, p MarkListParams) ([]ListedMark, error) {
	if p.Near != nil {
		if p.Near.Lat < -90 || p.Near.Lat > 90 {
			return nil, inputErr("near", "latitude %v is outside -90 to 90 degrees", p.Near.Lat)
		}
		if p.Near.Lon < -180 || p.Near.Lon > 180 {
			return nil, inputErr("near", "longitude %v is outside -180 to 180 degrees", p.Near.Lon)
		}
		if !(p.RadiusM > 0) {
			return nil, inputErr("within", "the search radius must be more than zero")
		}
	}
	var conds []string
	for _, c := range p.Conditions {
		k, ok := ParseCondition(c, ShownConditions)
		if !ok {
			return nil, inputErr("condition", "unknown condition %q (want one of %s)", c, strings.Join(ShownConditions, ", "))
		}
		conds = append(conds, k)
	}
	var out []ListedMark
	err := r.withTx(ctx, readTx, func(tx pgx.Tx) error {
		ms, err := store.MarkList(ctx, tx, store.MarkListParams{Near: p.Near, RadiusM: p.RadiusM, Conditions: conds})
		if err != nil {
			return err
		}
		ds, err := markDoubtsCurrent(ctx, tx, ms)
		if err != nil {
			return err
		}
		out = make([]ListedMark, len(ms))
		for i, m := range ms {
			out[i] = ListedMark{Mark: m, Doubts: ds[m.ID]}
		}
		return nil
	})
	return out, err
}

// MarkConditionParams are the fields of a condition report.
type MarkConditionParams struct {
	Designation string
	Condition   string // one of Conditions, in any case
	Note        string
	ObservedOn  time.Time // the date the mark was seen (or searched for)
	RecordedBy  string
	// Today is the reporter's calendar date; ObservedOn may not be after it.
	Today time.Time
}

// MarkCondition appends a condition report on a mark.
func (r *Register) MarkCondition(ctx context.Context, p MarkConditionParams) (store.Condition, error) {
	cond, ok := ParseCondition(p.Condition, Conditions)
	if !ok {
		return store.Condition{}, inputErr("condition", "unknown condition %q (want %s)", p.Condition, strings.Join(Conditions, ", "))
	}
	p.Condition = cond
	if p.Today.IsZero() {
		p.Today = Today()
	}
	if p.ObservedOn.After(p.Today) {
		return store.Condition{}, inputErr("on", "%s is after today (%s): a condition report is dated the day the mark was seen; nothing was written",
			p.ObservedOn.Format(time.DateOnly), p.Today.Format(time.DateOnly))
	}
	if strings.TrimSpace(p.RecordedBy) == "" {
		return store.Condition{}, inputErr("by", "say who made the report")
	}
	var c store.Condition
	err := r.withTx(ctx, pgx.TxOptions{}, func(tx pgx.Tx) error {
		m, err := r.mark(ctx, tx, "designation", p.Designation, false)
		if err != nil {
			return err
		}
		c, err = store.ConditionInsert(ctx, tx, store.ConditionInsertParams{
			MarkID: m.ID, Condition: p.Condition, Note: p.Note, ObservedOn: p.ObservedOn, RecordedBy: p.RecordedBy,
		})
		return err
	})
	return c, err
}

// Warning returns the loud warning for a mark whose latest condition report
// says it is disturbed, destroyed or not found, or "" if there is none.
func Warning(m store.Mark) string {
	d, ok := conditionDoubt(m)
	if !ok {
		return ""
	}
	return d.Warning()
}
