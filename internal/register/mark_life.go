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

	"cairn/internal/names"
	"cairn/internal/store"
)

// MarkEditParams are the fields of a new version of a mark's description.
// A nil field keeps the current value; at least one must change.
type MarkEditParams struct {
	Designation                                                      string
	Type, Setting, Stamping, Directions, Description, PositionSource *string
	// Lat and Lon go together: both, or neither.
	Lat, Lon *float64
	Reason   string
	By       string
}

// MarkEdited is a mark after an edit, and the number of its new version.
type MarkEdited struct {
	Mark    store.Mark
	Version int
}

// MarkEdit writes a new version of a mark's description: the current one
// with the fields given changed, whole, with its reason. Nothing is changed
// in place (the database refuses it, migrations/00018); every version stays
// and mark show --history lists them.
func (r *Register) MarkEdit(ctx context.Context, p MarkEditParams) (MarkEdited, error) {
	if err := positionProblem(p.Lat, p.Lon); err != nil {
		return MarkEdited{}, err
	}
	if strings.TrimSpace(p.Reason) == "" {
		return MarkEdited{}, inputErr("reason", "say why the description changes")
	}
	if strings.TrimSpace(p.By) == "" {
		return MarkEdited{}, inputErr("by", "say who changes the description")
	}
	var out MarkEdited
	err := r.withTx(ctx, pgx.TxOptions{}, func(tx pgx.Tx) error {
		m, err := r.mark(ctx, tx, "designation", p.Designation, false)
		if err != nil {
			return err
		}
		v := store.MarkVersionInsertParams{MarkID: m.ID, Type: m.Type, Setting: m.Setting, Stamping: m.Stamping,
			Directions: m.Directions, Description: m.Description, PosSource: m.PositionSource, Lat: m.Lat, Lon: m.Lon,
			Reason: p.Reason, RecordedBy: p.By}
		changed := false
		set := func(dst *string, src *string) {
			if src != nil && *src != *dst {
				*dst, changed = *src, true
			}
		}
		set(&v.Type, p.Type)
		set(&v.Setting, p.Setting)
		set(&v.Stamping, p.Stamping)
		set(&v.Directions, p.Directions)
		set(&v.Description, p.Description)
		set(&v.PosSource, p.PositionSource)
		if p.Lat != nil && (m.Lat == nil || *m.Lat != *p.Lat || *m.Lon != *p.Lon) {
			v.Lat, v.Lon, changed = p.Lat, p.Lon, true
		}
		if !changed {
			return inputErr("designation", "nothing to change: every field given is as %s's version %d has it", m.Designation, m.Version)
		}
		if out.Version, err = store.MarkVersionInsert(ctx, tx, v); err != nil {
			return asConflict(err)
		}
		out.Mark, err = store.MarkGet(ctx, tx, store.MarkGetParams{Designation: m.Designation})
		return err
	})
	return out, err
}

// AliasKinds are the kinds of alias a mark may be given, in the order
// help texts list them: another agency's number, a former designation,
// what is stamped on it.
var AliasKinds = []string{store.AliasAgency, store.AliasFormer, store.AliasStamped}

// aliasPattern is the form of an alias (the CHECK of mark_alias.alias):
// letters, digits, single spaces and . _ / # -, at most 64.
var aliasPattern = sync.OnceValue(func() *regexp.Regexp { return regexp.MustCompile(`^[A-Za-z0-9][A-Za-z0-9 ._/#-]{0,63}$`) })

// MarkAliasParams are the fields of a new alias.
type MarkAliasParams struct {
	Designation string
	Alias       string
	Kind        string // one of AliasKinds
	Agency      string // whose number, for kind agency
	Note        string
	By          string
}

// MarkAliasAdd gives a mark another name. Every look-up of a mark finds
// it by the alias too (Register.mark), so an alias is unique once folded
// (names.Fold) and is never any mark's designation: both are refused here
// naming the mark that has the name, and by the database (mark_alias_folded,
// mark_name_free) whatever the writer.
func (r *Register) MarkAliasAdd(ctx context.Context, p MarkAliasParams) (store.Mark, error) {
	kind, ok := ParseCondition(p.Kind, AliasKinds)
	if !ok {
		return store.Mark{}, inputErr("kind", "unknown kind of alias %q (want %s)", p.Kind, strings.Join(AliasKinds, ", "))
	}
	p.Kind = kind
	if err := nameProblem("alias", "alias", p.Alias); err != nil {
		return store.Mark{}, err
	}
	if names.Normal(p.Alias) != p.Alias {
		return store.Mark{}, inputErr("alias", "%q is written with compatibility characters (fullwidth or other forms, NFKC): write it as %s", p.Alias, names.Normal(p.Alias))
	}
	if !aliasPattern().MatchString(p.Alias) || strings.Contains(p.Alias, "  ") || strings.HasSuffix(p.Alias, " ") {
		return store.Mark{}, inputErr("alias", "%q is not an alias: use at most 64 letters, digits, single spaces and . _ / # -, starting with a letter or digit", p.Alias)
	}
	switch {
	case p.Kind == store.AliasAgency && strings.TrimSpace(p.Agency) == "":
		return store.Mark{}, inputErr("agency", "name the agency whose number %s is", p.Alias)
	case p.Kind != store.AliasAgency && strings.TrimSpace(p.Agency) != "":
		return store.Mark{}, inputErr("agency", "an agency goes with an alias of kind agency (this one is %s)", p.Kind)
	}
	if strings.TrimSpace(p.By) == "" {
		return store.Mark{}, inputErr("by", "say who gives the alias")
	}
	var m store.Mark
	err := r.withTx(ctx, pgx.TxOptions{}, func(tx pgx.Tx) error {
		var err error
		if m, err = r.mark(ctx, tx, "designation", p.Designation, false); err != nil {
			return err
		}
		folded := names.Fold(p.Alias)
		if d, err := markFolded(ctx, tx, p.Alias); err != nil {
			return err
		} else if d != "" {
			return inputErr("alias", "%s is the designation of mark %s: an alias is never a mark's designation", p.Alias, d)
		}
		if holder, alias, err := store.AliasHolder(ctx, tx, folded); err == nil {
			return inputErr("alias", "%s is already an alias of mark %s (as %s)", p.Alias, holder, alias)
		} else if !errors.Is(err, store.ErrNotFound) {
			return err
		}
		err = store.AliasInsert(ctx, tx, store.AliasInsertParams{MarkID: m.ID, Alias: p.Alias, Kind: p.Kind,
			Agency: strings.TrimSpace(p.Agency), Note: p.Note, By: p.By})
		switch {
		case errors.Is(err, store.ErrAlreadyExists), errors.Is(err, store.ErrNameTaken):
			return inputErr("alias", "%v", err)
		case err != nil:
			return err
		}
		m, err = store.MarkGet(ctx, tx, store.MarkGetParams{Designation: m.Designation})
		return err
	})
	return m, err
}

// MarkRetireParams retire a mark for good, replaced by a new mark or not.
type MarkRetireParams struct {
	Designation string
	// Replacement, if set, is the new mark that replaces it, added in the
	// same transaction.
	Replacement *MarkAddParams
	On          time.Time // the date the mark went out of use
	Today       time.Time // the caller's date; On may not be after it
	Reason      string
	By          string
}

// MarkRetired is a retired mark and its replacement (nil if none).
type MarkRetired struct {
	Mark        store.Mark
	Replacement *store.Mark
}

// MarkRetire retires a mark: it keeps its designation, which is never
// reused, its record and its heights, shown as of a retired mark, and is
// never held as control again (heldRefusal). With a replacement, the new
// mark is added and linked to it, and mark show of either names the other.
func (r *Register) MarkRetire(ctx context.Context, p MarkRetireParams) (MarkRetired, error) {
	if strings.TrimSpace(p.Reason) == "" {
		return MarkRetired{}, inputErr("reason", "say why the mark is retired")
	}
	if strings.TrimSpace(p.By) == "" {
		return MarkRetired{}, inputErr("by", "say who retires the mark")
	}
	if p.Today.IsZero() {
		p.Today = Today()
	}
	if p.On.IsZero() {
		p.On = p.Today
	}
	if p.On.After(p.Today) {
		return MarkRetired{}, inputErr("on", "%s is after today (%s): a mark is retired on a day that has come; nothing was written",
			p.On.Format(time.DateOnly), p.Today.Format(time.DateOnly))
	}
	if p.Replacement != nil {
		if err := p.Replacement.check(); err != nil {
			return MarkRetired{}, err
		}
	}
	var out MarkRetired
	err := r.withTx(ctx, pgx.TxOptions{}, func(tx pgx.Tx) error {
		m, err := r.mark(ctx, tx, "designation", p.Designation, false)
		if err != nil {
			return err
		}
		if m.Retired != nil {
			return inputErr("designation", "mark %s was retired already, on %s (%s)", m.Designation, m.Retired.On.Format(time.DateOnly), m.Retired.Reason)
		}
		ins := store.RetirementInsertParams{MarkID: m.ID, On: p.On, Reason: p.Reason, By: p.By}
		if p.Replacement != nil {
			n, err := addMark(ctx, tx, *p.Replacement)
			if err != nil {
				return err
			}
			ins.ReplacedBy, out.Replacement = &n.ID, &n
		}
		if err := store.RetirementInsert(ctx, tx, ins); err != nil {
			if errors.Is(err, store.ErrAlreadyExists) || errors.Is(err, store.ErrNameTaken) {
				return inputErr("designation", "%v", err)
			}
			return err
		}
		if out.Mark, err = store.MarkGet(ctx, tx, store.MarkGetParams{Designation: m.Designation}); err != nil {
			return err
		}
		if out.Replacement != nil {
			n, err := store.MarkGet(ctx, tx, store.MarkGetParams{Designation: out.Replacement.Designation})
			out.Replacement = &n
			return err
		}
		return nil
	})
	return out, err
}

// retiredText says of a retired mark when and why, and what replaced it.
func retiredText(m store.Mark) string {
	s := fmt.Sprintf("%s was RETIRED on %s (%s)", m.Designation, m.Retired.On.Format(time.DateOnly), m.Retired.Reason)
	if m.Retired.ReplacedBy != "" {
		s += ", replaced by " + m.Retired.ReplacedBy
	}
	return s
}

// beforeReset reports whether version h of a mark is a height of the mark
// as it was before its reset report reset (nil: no reset): recorded before
// the register learned the mark had been set again, or in force from
// before the day the mark was found reset (an office's old height imported
// with the reset report in one import, or a correction of the past
// recorded later). A version written in the transaction of the report
// (publish --report-condition), in force from its commit, is not before it.
func beforeReset(h store.Height, reset *store.Condition) bool {
	return reset != nil && h.Value != nil && (h.RecordedAt.Before(reset.RecordedAt) || h.InForceFrom.Before(reset.ObservedOn))
}

// resetText says when a mark was reset and who said so.
func resetText(c store.Condition) string {
	s := fmt.Sprintf("reported reset on %s (observed %s) by %s", c.RecordedAt.UTC().Format(time.DateOnly), c.ObservedOn.Format(time.DateOnly), c.RecordedBy)
	if c.Note != "" {
		s += ": " + c.Note
	}
	return s
}

// heldRefusal refuses version h of mark m as held control, whatever is
// allowed of conditions: a retired mark, and a height recorded before the
// mark's latest reset (read in db), are never held. field names the input
// that held it.
func heldRefusal(ctx context.Context, db store.DBTX, field string, m store.Mark, h store.Height) error {
	if m.Retired != nil {
		advice := "hold another mark"
		if m.Retired.ReplacedBy != "" {
			advice = "hold " + m.Retired.ReplacedBy + " once it has a height of its own"
		}
		return inputErr(field, "mark %s: a retired mark is never held as control; %s", retiredText(m), advice)
	}
	resets, err := store.ConditionLatestResetMany(ctx, db, []int64{m.ID})
	if err != nil {
		return fmt.Errorf("look up the resets of %s: %w", m.Designation, err)
	}
	if c, ok := resets[m.ID]; ok && beforeReset(h, &c) {
		return inputErr(field, "%s on %s, version %d, was recorded on %s, BEFORE the mark was reset (%s): a height from before a reset is never held as control; level %s again from other control and publish its new height, then hold that",
			m.Designation, h.DatumCode, h.Version, h.RecordedAt.UTC().Format(time.DateOnly), resetText(c), m.Designation)
	}
	return nil
}
