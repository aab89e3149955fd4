package register

import (
	"context"
	"encoding/hex"
	"errors"
	"fmt"
	"strings"
	"time"

	"github.com/jackc/pgx/v5"

	"cairn/internal/names"
	"cairn/internal/store"
)

// The read use cases of the public site (cairn serve): each one
// read-only transaction over one snapshot, with the register state it
// was read from, so that a page and its ETag describe the same state.

// WritePrivileges returns the connected role and the register's tables
// it may write to ("table PRIVILEGE"): none for a role that can only
// read.
func (r *Register) WritePrivileges(ctx context.Context) (role string, privileges []string, err error) {
	err = r.withTx(ctx, readTx, func(tx pgx.Tx) error {
		var err error
		if role, _, err = store.CurrentRoles(ctx, tx); err != nil {
			return err
		}
		privileges, err = store.WritePrivileges(ctx, tx)
		return err
	})
	return role, privileges, err
}

// registerState reads the head of the evidence chain in tx (the zero
// state for a chain with no entry).
func registerState(ctx context.Context, tx pgx.Tx) (RegisterState, error) {
	head, err := store.CommitHead(ctx, tx)
	switch {
	case errors.Is(err, store.ErrNotFound):
		return RegisterState{}, nil
	case err != nil:
		return RegisterState{}, fmt.Errorf("read the head of the evidence chain: %w", err)
	}
	return RegisterState{Seq: head.Seq, Head: hex.EncodeToString(head.Hash), CommittedAt: head.CommittedAt.UTC()}, nil
}

// State is the register state now: the head of its evidence chain.
func (r *Register) State(ctx context.Context) (RegisterState, error) {
	var st RegisterState
	err := r.withTx(ctx, readTx, func(tx pgx.Tx) error {
		var err error
		st, err = registerState(ctx, tx)
		return err
	})
	return st, err
}

// MarkNotFoundError says no mark has the designation or alias asked for.
type MarkNotFoundError struct{ Name string }

func (e *MarkNotFoundError) Error() string { return fmt.Sprintf("no mark %q in the register", e.Name) }

// publicMark finds a mark by designation, else by alias (FoundBy set),
// as r.mark does but without its suggestions, whose look-up reads many
// designations: a public site answers an unknown name cheaply.
func publicMark(ctx context.Context, tx pgx.Tx, name string) (store.Mark, error) {
	name = strings.TrimSpace(name)
	if name == "" {
		return store.Mark{}, &MarkNotFoundError{Name: name}
	}
	m, err := store.MarkGet(ctx, tx, store.MarkGetParams{Designation: name})
	if errors.Is(err, store.ErrNotFound) {
		m, err = store.MarkGetByAlias(ctx, tx, names.Fold(name), false)
	}
	if errors.Is(err, store.ErrNotFound) {
		return store.Mark{}, &MarkNotFoundError{Name: name}
	}
	if err != nil {
		return store.Mark{}, fmt.Errorf("look up mark %s: %w", name, err)
	}
	return m, nil
}

// TracePage reads a mark's trace (as Trace, the heights in force at asOf,
// nil for now, on every datum) and the register state in one snapshot.
// The name may be an alias (Mark.FoundBy says so).
func (r *Register) TracePage(ctx context.Context, name string, asOf *time.Time) (RegisterState, *Trace, error) {
	var st RegisterState
	var t *Trace
	err := r.withTx(ctx, readTx, func(tx pgx.Tx) error {
		var err error
		if st, err = registerState(ctx, tx); err != nil {
			return err
		}
		m, err := publicMark(ctx, tx, name)
		if err != nil {
			return err
		}
		t, err = r.trace(ctx, tx, m, TraceParams{Designation: m.Designation, AsOf: asOf})
		var ie *InputError
		if errors.As(err, &ie) && ie.Field == "designation" {
			// No height in force then: a page that says so, not an error.
			t, err = &Trace{Mark: m, AsOf: asOf}, nil
		}
		return err
	})
	return st, t, err
}

// MarkPageView is a mark's page: its datasheet at an instant and every
// version of its heights, from one snapshot.
type MarkPageView struct {
	State   RegisterState
	Sheet   Datasheet
	History []HistoryEntry
}

// MarkPage reads a mark's datasheet (as Datasheets, heights in force at
// asOf, nil for now) and the history of its heights (as History: every
// version the register holds now, newest first within each datum) in one
// snapshot. The name may be an alias (Sheet.Mark.FoundBy says so).
func (r *Register) MarkPage(ctx context.Context, name string, asOf *time.Time) (MarkPageView, error) {
	var v MarkPageView
	var hs []store.Height
	var accepted map[int64]*Acceptance
	var doubts Doubts
	err := r.withTx(ctx, readTx, func(tx pgx.Tx) error {
		var err error
		if v.State, err = registerState(ctx, tx); err != nil {
			return err
		}
		m, err := publicMark(ctx, tx, name)
		if err != nil {
			return err
		}
		if v.Sheet, err = datasheet(ctx, tx, m, asOf, nil, DefaultNeighbourRadiusM); err != nil {
			return err
		}
		if hs, err = store.HeightHistory(ctx, tx, store.HeightHistoryParams{MarkID: m.ID}); err != nil {
			return err
		}
		if accepted, err = acceptances(ctx, tx, hs); err != nil {
			return err
		}
		ds, err := doubtsOf(ctx, tx, []store.Mark{m}, hs)
		doubts = ds[m.ID]
		return err
	})
	if err != nil {
		return v, err
	}
	v.History = make([]HistoryEntry, len(hs))
	for i, h := range hs {
		e := &v.History[i]
		e.Height = h
		e.Doubts = doubts.Of(h.DatumCode, h.Version)
		if h.AdjustmentID != nil {
			e.Accepted = accepted[*h.AdjustmentID]
		}
		if i+1 < len(hs) && hs[i+1].DatumID == h.DatumID {
			if e.Change, err = change(h, hs[i+1]); err != nil {
				return v, err
			}
		}
	}
	return v, nil
}

// MaxFeaturesPage is the most marks one page of Features or Search
// gives.
const MaxFeaturesPage = 10000

// FeaturesParams ask for one page of marks: in a box, after a
// designation, with their heights in force at an instant.
type FeaturesParams struct {
	BBox  *store.BBox
	After string
	Limit int // 1 to MaxFeaturesPage
	AsOf  *time.Time
}

// Feature is a mark with the versions of its heights in force at the
// instant asked (one per datum, a withdrawal included) and its doubts
// and theirs.
type Feature struct {
	store.Mark
	Heights []store.Height
	Doubts  Doubts
}

// FeaturePage is one page of marks and the register state it was read
// from; More says whether marks follow its last.
type FeaturePage struct {
	State    RegisterState
	Features []Feature
	More     bool
}

// Features reads one page of marks by designation (keyset paging: the
// next page starts after the last designation of this one).
func (r *Register) Features(ctx context.Context, p FeaturesParams) (FeaturePage, error) {
	var out FeaturePage
	if p.Limit < 1 || p.Limit > MaxFeaturesPage {
		return out, inputErr("limit", "%d marks: give 1 to %d", p.Limit, MaxFeaturesPage)
	}
	if b := p.BBox; b != nil {
		if err := checkBBox(*b); err != nil {
			return out, err
		}
	}
	err := r.withTx(ctx, readTx, func(tx pgx.Tx) error {
		var err error
		if out.State, err = registerState(ctx, tx); err != nil {
			return err
		}
		ms, err := store.MarkPage(ctx, tx, store.MarkPageParams{BBox: p.BBox, After: p.After, Limit: p.Limit + 1})
		if err != nil {
			return err
		}
		if len(ms) > p.Limit {
			ms, out.More = ms[:p.Limit], true
		}
		out.Features, err = features(ctx, tx, ms, p.AsOf)
		return err
	})
	return out, err
}

// checkBBox refuses a box outside the globe or upside down.
func checkBBox(b store.BBox) error {
	switch {
	case b.South < -90 || b.North > 90:
		return inputErr("bbox", "latitudes %v and %v: each must be -90 to 90 degrees", b.South, b.North)
	case b.West < -180 || b.West > 180 || b.East < -180 || b.East > 180:
		return inputErr("bbox", "longitudes %v and %v: each must be -180 to 180 degrees", b.West, b.East)
	case b.South > b.North:
		return inputErr("bbox", "the south edge %v is north of the north edge %v", b.South, b.North)
	}
	return nil
}

// features gives each mark its heights in force at asOf and the doubts.
func features(ctx context.Context, tx pgx.Tx, ms []store.Mark, asOf *time.Time) ([]Feature, error) {
	ids := make([]int64, len(ms))
	for i, m := range ms {
		ids[i] = m.ID
	}
	hs, err := store.HeightAsOfMarks(ctx, tx, store.HeightAsOfAllParams{AsOf: asOf}, ids)
	if err != nil {
		return nil, err
	}
	ds, err := doubtsOf(ctx, tx, ms, hs)
	if err != nil {
		return nil, err
	}
	byMark := map[int64][]store.Height{}
	for _, h := range hs {
		byMark[h.MarkID] = append(byMark[h.MarkID], h)
	}
	out := make([]Feature, len(ms))
	for i, m := range ms {
		out[i] = Feature{Mark: m, Heights: byMark[m.ID], Doubts: ds[m.ID]}
	}
	return out, nil
}

// FeatureOne reads one mark (by designation or alias) as a Feature at
// asOf, with the register state.
func (r *Register) FeatureOne(ctx context.Context, name string, asOf *time.Time) (RegisterState, Feature, error) {
	var st RegisterState
	var f Feature
	err := r.withTx(ctx, readTx, func(tx pgx.Tx) error {
		var err error
		if st, err = registerState(ctx, tx); err != nil {
			return err
		}
		m, err := publicMark(ctx, tx, name)
		if err != nil {
			return err
		}
		fs, err := features(ctx, tx, []store.Mark{m}, asOf)
		if err == nil {
			f = fs[0]
		}
		return err
	})
	return st, f, err
}

// MaxSearchRadiusM is the widest point-and-radius search (100 km).
const MaxSearchRadiusM = 100000

// SearchParams ask for marks by a name (designation or alias, in any
// case and character form), or within RadiusM of Near, with their
// heights in force at AsOf.
type SearchParams struct {
	Name    string
	Near    *store.LatLon
	RadiusM float64
	AsOf    *time.Time
	// Limit is the most marks given (1 to MaxFeaturesPage).
	Limit int
}

// SearchResult is the marks found, nearest first for a near search, and
// whether more were found than given.
type SearchResult struct {
	State    RegisterState
	Features []Feature
	More     bool
}

// Search finds marks by name or by a point and radius, in one snapshot.
func (r *Register) Search(ctx context.Context, p SearchParams) (SearchResult, error) {
	var out SearchResult
	name := names.Fold(strings.TrimSpace(p.Name))
	switch {
	case name == "" && p.Near == nil:
		return out, inputErr("q", "give a designation or alias, or a latitude, longitude and radius")
	case p.Limit < 1 || p.Limit > MaxFeaturesPage:
		return out, inputErr("limit", "%d marks: give 1 to %d", p.Limit, MaxFeaturesPage)
	}
	if p.Near != nil {
		switch {
		case p.Near.Lat < -90 || p.Near.Lat > 90:
			return out, inputErr("lat", "latitude %v is outside -90 to 90 degrees", p.Near.Lat)
		case p.Near.Lon < -180 || p.Near.Lon > 180:
			return out, inputErr("lon", "longitude %v is outside -180 to 180 degrees", p.Near.Lon)
		case !(p.RadiusM > 0) || p.RadiusM > MaxSearchRadiusM:
			return out, inputErr("radius_m", "the radius must be more than 0 and at most %d m", MaxSearchRadiusM)
		}
	}
	err := r.withTx(ctx, readTx, func(tx pgx.Tx) error {
		var err error
		if out.State, err = registerState(ctx, tx); err != nil {
			return err
		}
		ms, err := store.MarkList(ctx, tx, store.MarkListParams{Near: p.Near, RadiusM: p.RadiusM, Name: name, Limit: p.Limit + 1})
		if err != nil {
			return err
		}
		if len(ms) > p.Limit {
			ms, out.More = ms[:p.Limit], true
		}
		out.Features, err = features(ctx, tx, ms, p.AsOf)
		return err
	})
	return out, err
}

// StatementOfThisRegister checks that the commit a statement names is in
// this register's evidence chain with the statement's head: one look-up,
// so that a site never shows another register's statement as its own.
// (The whole proof, the chain recomputed up to it, is cairn audit verify
// --against.)
func (r *Register) StatementOfThisRegister(ctx context.Context, s Statement) error {
	return r.withTx(ctx, readTx, func(tx pgx.Tx) error {
		cs, err := store.EvidenceCommitPage(ctx, tx, s.Seq-1, 1)
		if err != nil {
			return err
		}
		if len(cs) == 0 || cs[0].Seq != s.Seq {
			return inputErr("statement", "the statement is of commit %d, which this register's chain does not have", s.Seq)
		}
		if got := hex.EncodeToString(cs[0].Hash); !strings.EqualFold(got, s.Head) {
			return inputErr("statement", "the statement says commit %d has head %s; this register's has %s: it is another register's, or the chain was changed (cairn audit verify --against)", s.Seq, s.Head, got)
		}
		return nil
	})
}
