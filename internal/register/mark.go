package register

import (
	"bytes"
	"context"
	"errors"
	"image"
	_ "image/jpeg" // image.DecodeConfig reads JPEG
	_ "image/png"  // and PNG
	"math"
	"regexp"
	"slices"
	"strings"
	"sync"
	"time"

	"github.com/jackc/pgx/v5"

	"cairn/internal/names"
	"cairn/internal/store"
)

var designationPattern = sync.OnceValue(func() *regexp.Regexp { return regexp.MustCompile(`^[A-Za-z0-9][A-Za-z0-9._/-]{0,63}$`) })

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
	Directions  string // how to find it, in words
	Lat, Lon    *float64
	CreatedBy   string
}

// MarkAdd adds a mark to the register.
func (r *Register) MarkAdd(ctx context.Context, p MarkAddParams) (store.Mark, error) {
	if err := p.check(); err != nil {
		return store.Mark{}, err
	}
	var m store.Mark
	err := r.withTx(ctx, pgx.TxOptions{}, func(tx pgx.Tx) error {
		var err error
		m, err = addMark(ctx, tx, p)
		return err
	})
	return m, err
}

// check refuses, before the database is asked, a new mark's fields that
// can never be right.
func (p MarkAddParams) check() error {
	if err := nameProblem("designation", "designation", p.Designation); err != nil {
		return err
	}
	if err := positionProblem(p.Lat, p.Lon); err != nil {
		return err
	}
	if strings.TrimSpace(p.CreatedBy) == "" {
		return inputErr("by", "say who is adding the mark")
	}
	return nil
}

// positionProblem refuses half a position or one off the globe.
func positionProblem(lat, lon *float64) error {
	if (lat == nil) != (lon == nil) {
		return inputErr("lat", "give both a latitude and a longitude, or neither")
	}
	if lat != nil {
		if math.IsNaN(*lat) || *lat < -90 || *lat > 90 {
			return inputErr("lat", "latitude %v is outside -90 to 90 degrees", *lat)
		}
		if math.IsNaN(*lon) || *lon < -180 || *lon > 180 {
			return inputErr("lon", "longitude %v is outside -180 to 180 degrees", *lon)
		}
	}
	return nil
}

// addMark adds the mark p (checked) in tx and returns it.
func addMark(ctx context.Context, tx pgx.Tx, p MarkAddParams) (store.Mark, error) {
	// The same name written another way is refused naming the mark
	// that has it; the unique index on the folded form settles a race.
	existing, err := markFolded(ctx, tx, p.Designation)
	if err != nil {
		return store.Mark{}, err
	}
	if err := sameNameProblem("designation", "mark", p.Designation, existing); err != nil {
		return store.Mark{}, err
	}
	if !designationPattern().MatchString(p.Designation) {
		return store.Mark{}, inputErr("designation", "%q is not a designation: use at most 64 letters, digits and . _ / -, starting with a letter or digit", p.Designation)
	}
	// Nor may it be another mark's alias; the database's trigger
	// (mark_name_free) settles a race.
	if holder, alias, err := store.AliasHolder(ctx, tx, names.Fold(p.Designation)); err == nil {
		return store.Mark{}, inputErr("designation", "%s is an alias of mark %s (%s): a designation is never another mark's alias", p.Designation, holder, alias)
	} else if !errors.Is(err, store.ErrNotFound) {
		return store.Mark{}, err
	}
	_, err = store.MarkInsert(ctx, tx, store.MarkInsertParams{
		Designation: p.Designation, Type: p.Type, Setting: p.Setting, Stamping: p.Stamping,
		Directions: p.Directions, Lat: p.Lat, Lon: p.Lon, CreatedBy: p.CreatedBy,
	})
	switch {
	case errors.Is(err, store.ErrAlreadyExists):
		return store.Mark{}, inputErr("designation", "mark %s is already in the register", p.Designation)
	case errors.Is(err, store.ErrNameTaken):
		return store.Mark{}, inputErr("designation", "%v", err)
	case err != nil:
		return store.Mark{}, err
	}
	return store.MarkGet(ctx, tx, store.MarkGetParams{Designation: p.Designation})
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
	// Versions are the versions of the mark's description, oldest first
	// (the first is the mark as added).
	Versions []store.MarkVersion
	// Aliases are the mark's other names, in the order given.
	Aliases []store.Alias
	// Reset is the mark's reset report recorded last, nil if none.
	Reset *store.Condition
	// Photos are the photographs of its reports, without their bytes.
	Photos []store.Photo
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
		if v.Versions, err = store.MarkVersionList(ctx, tx, v.Mark.ID); err != nil {
			return err
		}
		if v.Aliases, err = store.AliasListByMark(ctx, tx, v.Mark.ID); err != nil {
			return err
		}
		if v.Photos, err = store.PhotoListByMark(ctx, tx, v.Mark.ID); err != nil {
			return err
		}
		resets, err := store.ConditionLatestResetMany(ctx, tx, []int64{v.Mark.ID})
		if err != nil {
			return err
		}
		if c, ok := resets[v.Mark.ID]; ok {
			v.Reset = &c
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
	// Name keeps the mark whose designation or one of whose aliases is
	// this name, in any case and character form (names.Fold).
	Name string
	// Limit, if more than zero, keeps the nearest Limit marks of a near
	// search, read nearest first from the position indexes; a caller asks
	// for one more than it shows to know whether there are more.
	Limit int
}

// ListedMark is a mark in a listing, with its doubts and those of its
// current heights.
type ListedMark struct {
	store.Mark
	Doubts Doubts
}

// MarkList lists marks with their latest condition and their doubts.
// markListCheck refuses a listing's bad parameters and returns its
// conditions in the register's words.
func markListCheck(p MarkListParams) ([]string, error) {
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
	if p.Limit < 0 {
		return nil, inputErr("limit", "the limit must be zero (no limit) or more, not %d", p.Limit)
	}
	if p.Limit > 0 && p.Near == nil {
		return nil, inputErr("limit", "a limit goes with a near search")
	}
	var conds []string
	for _, c := range p.Conditions {
		k, ok := ParseCondition(c, ShownConditions)
		if !ok {
			return nil, inputErr("condition", "unknown condition %q (want one of %s)", c, strings.Join(ShownConditions, ", "))
		}
		conds = append(conds, k)
	}
	return conds, nil
}

func (r *Register) MarkList(ctx context.Context, p MarkListParams) ([]ListedMark, error) {
	conds, err := markListCheck(p)
	if err != nil {
		return nil, err
	}
	var out []ListedMark
	err = r.markListPages(ctx, p, conds, func(page []ListedMark) error {
		out = append(out, page...)
		return nil
	})
	return out, err
}

// ListPageSize is how many marks a listing of the whole register reads at
// a time (MarkListEach, HeightsAsOfEach).
const ListPageSize = 1000

// MarkListEach is MarkList a page at a time: page is called with each
// page of at most ListPageSize marks by designation, all read in one
// snapshot, so that a listing of the whole register holds one page. A
// near search or a name is one page (a near search's --limit bounds it).
func (r *Register) MarkListEach(ctx context.Context, p MarkListParams, page func([]ListedMark) error) error {
	conds, err := markListCheck(p)
	if err != nil {
		return err
	}
	return r.markListPages(ctx, p, conds, page)
}

func (r *Register) markListPages(ctx context.Context, p MarkListParams, conds []string, page func([]ListedMark) error) error {
	return r.withTx(ctx, readTx, func(tx pgx.Tx) error {
		q := store.MarkListParams{Near: p.Near, RadiusM: p.RadiusM, Conditions: conds,
			Name: names.Fold(strings.TrimSpace(p.Name)), Limit: p.Limit}
		whole := p.Near == nil && q.Name == ""
		if whole {
			q.PageSize = ListPageSize
		}
		for {
			ms, err := store.MarkList(ctx, tx, q)
			if err != nil {
				return err
			}
			ds, err := markDoubtsCurrent(ctx, tx, ms)
			if err != nil {
				return err
			}
			out := make([]ListedMark, len(ms))
			for i, m := range ms {
				out[i] = ListedMark{Mark: m, Doubts: ds[m.ID]}
			}
			if len(out) > 0 || q.After == "" {
				if err := page(out); err != nil {
					return err
				}
			}
			if !whole || len(ms) < q.PageSize {
				return nil
			}
			q.After = ms[len(ms)-1].Designation
		}
	})
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
	// Photos are photographs of the mark to keep with the report.
	Photos []PhotoFile
}

// PhotoFile is a photograph given with a condition report: what it shows
// (one of store.PhotoViews), the file's name and its bytes.
type PhotoFile struct {
	View    string
	Name    string
	Content []byte
}

// check refuses a photograph that is not a JPEG or PNG image, or too big,
// naming its file; it returns the media type.
func (f *PhotoFile) check() (string, error) {
	view, ok := ParseCondition(f.View, store.PhotoViews)
	if !ok {
		return "", inputErr("photo", "%s: unknown view %q (want %s)", f.Name, f.View, strings.Join(store.PhotoViews, ", "))
	}
	f.View = view
	switch {
	case len(f.Content) == 0:
		return "", inputErr("photo", "%s: the file is empty", f.Name)
	case len(f.Content) > store.PhotoMaxBytes:
		return "", inputErr("photo", "%s: %d bytes, more than the %d (8 MiB) the register keeps of one photograph", f.Name, len(f.Content), store.PhotoMaxBytes)
	}
	_, format, err := image.DecodeConfig(bytes.NewReader(f.Content))
	if err != nil || (format != "jpeg" && format != "png") {
		return "", inputErr("photo", "%s: not a JPEG or PNG image (the register keeps photographs in those two formats)", f.Name)
	}
	return "image/" + format, nil
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
	types := make([]string, len(p.Photos))
	for i := range p.Photos {
		t, err := p.Photos[i].check()
		if err != nil {
			return store.Condition{}, err
		}
		types[i] = t
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
		if err != nil {
			return err
		}
		for i, f := range p.Photos {
			if _, err := store.PhotoInsert(ctx, tx, store.PhotoInsertParams{ConditionID: c.ID, View: f.View, MediaType: types[i],
				FileName: f.Name, Content: f.Content, RecordedBy: p.RecordedBy}); err != nil {
				return err
			}
		}
		return nil
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

// MarkPhoto returns photograph id of one of the condition reports of the
// mark named designation (or an alias), with its bytes exactly as kept.
func (r *Register) MarkPhoto(ctx context.Context, designation string, id int64) (store.Photo, []byte, error) {
	var p store.Photo
	var content []byte
	err := r.withTx(ctx, readTx, func(tx pgx.Tx) error {
		m, err := r.mark(ctx, tx, "designation", designation, false)
		if err != nil {
			return err
		}
		p, content, err = store.PhotoGet(ctx, tx, m.ID, id)
		if errors.Is(err, store.ErrNotFound) {
			return inputErr("photo", "mark %s has no photograph %d (mark show lists its photographs)", m.Designation, id)
		}
		return err
	})
	return p, content, err
}
