package register

import (
	"context"
	"encoding/hex"
	"errors"
	"slices"
	"strings"
	"time"

	"cairn/internal/store"

	"github.com/jackc/pgx/v5"
)

// DatasheetParams choose the marks of datasheets: by designation (or
// alias), or every mark within RadiusM of Near (a job pack), and the
// instant their heights are of.
type DatasheetParams struct {
	Designations []string
	Near         *store.LatLon
	RadiusM      float64
	// Limit, if more than zero, keeps the nearest Limit marks of Near,
	// read nearest first from the position indexes; a caller asks for
	// one more than it packs to know whether there are more.
	Limit int
	// AsOf is the instant asked about: the versions in force then (as the
	// register knows them now); nil for now.
	AsOf *time.Time
	// KnownAt is the instant of the register's knowledge: only the height
	// versions committed and the condition reports recorded by then, and
	// only the marks added by then; with AsOf nil the heights are those in
	// force at KnownAt (AsOfOrKnown). Nil for all the register knows.
	KnownAt *time.Time
	// Progress, unless nil, is called after each sheet is read with the
	// number read and the number of marks in all, for a progress bar.
	Progress func(done, total int)
	// NeighbourRadiusM is how far the sketch looks for other marks
	// (DefaultNeighbourRadiusM when 0).
	NeighbourRadiusM float64
}

// DefaultNeighbourRadiusM is how far a datasheet's sketch looks for other
// marks, and MaxNeighbours how many it draws, nearest first.
const (
	DefaultNeighbourRadiusM = 1000
	MaxNeighbours           = 8
)

// Datasheet is one mark's view for its sheet, with the marks near it.
type Datasheet struct {
	MarkView
	// Neighbours are the marks with a position within the sketch's radius,
	// nearest first, the mark itself left out.
	Neighbours []store.Mark
	// PhotoContent is each photograph's bytes, by its identifier.
	PhotoContent map[int64][]byte
}

// RegisterState is the register state a set of sheets was read from: the
// head of the evidence chain in the same snapshot.
type RegisterState struct {
	Seq         int64
	Head        string // hex, as `cairn audit head` states it
	CommittedAt time.Time
}

// DatasheetSet is the sheets of one request, read in one snapshot.
type DatasheetSet struct {
	State  RegisterState
	Sheets []Datasheet
}

// Datasheets reads, in one read-only transaction, each mark asked for
// with its condition history, its heights in force at p.AsOf, its doubts,
// aliases, photographs and neighbours, and the head of the evidence
// chain, so that every sheet describes the same register state. Marks
// named twice are given once, in the order first named; a pack's marks
// are by distance from Near.
func (r *Register) Datasheets(ctx context.Context, p DatasheetParams) (DatasheetSet, error) {
	var out DatasheetSet
	if len(p.Designations) == 0 && p.Near == nil {
		return out, inputErr("designation", "name at least one mark")
	}
	if p.Near != nil {
		if p.Near.Lat < -90 || p.Near.Lat > 90 {
			return out, inputErr("near", "latitude %v is outside -90 to 90 degrees", p.Near.Lat)
		}
		if p.Near.Lon < -180 || p.Near.Lon > 180 {
			return out, inputErr("near", "longitude %v is outside -180 to 180 degrees", p.Near.Lon)
		}
		if !(p.RadiusM > 0) {
			return out, inputErr("within", "the search radius must be more than zero")
		}
	}
	nr := p.NeighbourRadiusM
	if nr <= 0 {
		nr = DefaultNeighbourRadiusM
	}
	err := r.withTx(ctx, readTx, func(tx pgx.Tx) error {
		head, err := store.CommitHead(ctx, tx)
		switch {
		case errors.Is(err, store.ErrNotFound):
		case err != nil:
			return err
		default:
			out.State = RegisterState{Seq: head.Seq, Head: hex.EncodeToString(head.Hash), CommittedAt: head.CommittedAt.UTC()}
		}
		var marks []store.Mark
		seen := map[int64]bool{}
		for _, d := range p.Designations {
			m, err := r.mark(ctx, tx, "designation", d, false)
			if err != nil {
				return err
			}
			if !seen[m.ID] {
				marks, seen[m.ID] = append(marks, m), true
			}
		}
		if p.Near != nil {
			ms, err := store.MarkList(ctx, tx, store.MarkListParams{Near: p.Near, RadiusM: p.RadiusM, Limit: p.Limit})
			if err != nil {
				return err
			}
			for _, m := range ms {
				if p.KnownAt != nil && m.CreatedAt.After(*p.KnownAt) {
					continue // the register did not know the mark yet
				}
				if !seen[m.ID] {
					marks, seen[m.ID] = append(marks, m), true
				}
			}
		}
		for i, m := range marks {
			s, err := datasheet(ctx, tx, m, AsOfOrKnown(p.AsOf, p.KnownAt), p.KnownAt, nr)
			if err != nil {
				return err
			}
			out.Sheets = append(out.Sheets, s)
			if p.Progress != nil {
				p.Progress(i+1, len(marks))
			}
		}
		return nil
	})
	return out, err
}

// datasheet reads one mark's sheet in tx: heights in force at asOf as
// known at knownAt, the reports observed by asOf and recorded by knownAt
// (each nil: no limit).
func datasheet(ctx context.Context, tx pgx.Tx, m store.Mark, asOf, knownAt *time.Time, neighbourM float64) (Datasheet, error) {
	s := Datasheet{MarkView: MarkView{Mark: m}}
	v := &s.MarkView
	var err error
	if v.Conditions, err = store.ConditionListByMark(ctx, tx, m.ID); err != nil {
		return s, err
	}
	if asOf != nil {
		// The reports observed by then, as a crew would have had them.
		v.Conditions = slices.DeleteFunc(v.Conditions, func(c store.Condition) bool { return c.ObservedOn.After(*asOf) })
	}
	if knownAt != nil {
		// The reports the register had been given by then.
		v.Conditions = slices.DeleteFunc(v.Conditions, func(c store.Condition) bool { return c.RecordedAt.After(*knownAt) })
	}
	if v.Heights, err = store.HeightAsOf(ctx, tx, store.HeightAsOfParams{MarkID: m.ID, AsOf: asOf, KnownAt: knownAt}); err != nil {
		return s, err
	}
	if v.Aliases, err = store.AliasListByMark(ctx, tx, m.ID); err != nil {
		return s, err
	}
	if v.Photos, err = store.PhotoListByMark(ctx, tx, m.ID); err != nil {
		return s, err
	}
	// Photographs of the reports kept (those observed by asOf).
	v.Photos = slices.DeleteFunc(v.Photos, func(ph store.Photo) bool {
		return !slices.ContainsFunc(v.Conditions, func(c store.Condition) bool { return c.ID == ph.ConditionID })
	})
	s.PhotoContent = map[int64][]byte{}
	for _, ph := range v.Photos {
		_, b, err := store.PhotoGet(ctx, tx, m.ID, ph.ID)
		if err != nil {
			return s, err
		}
		s.PhotoContent[ph.ID] = b
	}
	ds, err := doubtsOf(ctx, tx, []store.Mark{m}, v.Heights)
	if err != nil {
		return s, err
	}
	v.Doubts = ds[m.ID]
	if m.Lat != nil && m.Lon != nil {
		ns, err := store.MarkList(ctx, tx, store.MarkListParams{Near: &store.LatLon{Lat: *m.Lat, Lon: *m.Lon}, RadiusM: neighbourM,
			Limit: MaxNeighbours + 1}) // the mark itself is among them
		if err != nil {
			return s, err
		}
		for _, n := range ns {
			if n.ID != m.ID && n.Lat != nil && n.Lon != nil && len(s.Neighbours) < MaxNeighbours {
				s.Neighbours = append(s.Neighbours, n)
			}
		}
	}
	return s, nil
}

// PhotoReportDates maps each photograph to the date of the report it
// belongs to, from the sheet's condition reports.
func (s Datasheet) PhotoReportDates() map[int64]time.Time {
	out := map[int64]time.Time{}
	for _, p := range s.Photos {
		for _, c := range s.Conditions {
			if c.ID == p.ConditionID {
				out[p.ID] = c.ObservedOn
			}
		}
	}
	return out
}

// LastRecovered is the latest date of a report that found the mark in
// good order (good or reset), nil if none.
func (s Datasheet) LastRecovered() *time.Time {
	for _, c := range s.Conditions { // latest first
		if strings.EqualFold(c.Condition, "good") || strings.EqualFold(c.Condition, "reset") {
			t := c.ObservedOn
			return &t
		}
	}
	return nil
}
