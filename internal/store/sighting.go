package store

import (
	"context"
	"fmt"

	"github.com/jackc/pgx/v5"
)

// Sighting is one row of a run's book: a rod reading on a point.
type Sighting struct {
	// Seq numbers the sightings of a run in field order from 1; Line is the
	// row's line in the book.
	Seq  int
	Line int
	// Point is the point sighted; Sight is BS, IS or FS.
	Point        string
	Sight        string
	TurningPoint bool
	// Spot says the point is a spot height, not a mark (schema v6; false
	// for rows recorded before).
	Spot bool
	// Upper and Lower are the stadia wires (nil when not booked), Middle
	// the middle wire, Distance the sight length (nil when the book gives
	// none), all in the run's unit; DistanceFrom is none, stadia or
	// measured.
	Upper, Lower *float64
	Middle       float64
	Distance     *float64
	DistanceFrom string
	Note         string
}

var sightingColumns = []string{"run_id", "seq", "line", "point", "sight", "turning_point", "spot", "upper", "middle", "lower", "distance", "distance_from", "note"}

// SightingCopyParams are a run's sightings to store.
type SightingCopyParams struct {
	RunID     int64
	Sightings []Sighting
}

// SightingCopy stores sightings with COPY and returns how many.
func SightingCopy(ctx context.Context, db Copier, p SightingCopyParams) (int64, error) {
	return copyRows(ctx, db, "sighting", sightingColumns, p.Sightings, "sightings", func(s *Sighting) []any {
		return []any{p.RunID, s.Seq, s.Line, s.Point, s.Sight, s.TurningPoint, s.Spot, s.Upper, s.Middle, s.Lower, s.Distance, s.DistanceFrom, s.Note}
	})
}

// SightingCopyFunc stores with COPY the sightings next gives, one at a
// time until it gives nil, and returns how many: a run's sightings are
// stored without being held at once. next's sighting is read before it is
// called again.
func SightingCopyFunc(ctx context.Context, db Copier, runID int64, next func() (*Sighting, error)) (int64, error) {
	// pgx encodes a row before it asks for the next: one slice serves.
	row := make([]any, len(sightingColumns))
	n, err := db.CopyFrom(ctx, pgx.Identifier{"sighting"}, sightingColumns, pgx.CopyFromFunc(func() ([]any, error) {
		s, err := next()
		if s == nil || err != nil {
			return nil, err
		}
		row[0], row[1], row[2], row[3], row[4], row[5], row[6] = runID, s.Seq, s.Line, s.Point, s.Sight, s.TurningPoint, s.Spot
		row[7], row[8], row[9], row[10], row[11], row[12] = s.Upper, s.Middle, s.Lower, s.Distance, s.DistanceFrom, s.Note
		return row, nil
	}))
	if err != nil {
		return n, fmt.Errorf("copy sightings: %w", translate(err))
	}
	return n, nil
}

// SightingListByRun returns a run's sightings in field order.
func SightingListByRun(ctx context.Context, db DBTX, runID int64) ([]Sighting, error) {
	rows, err := db.Query(ctx, `SELECT seq, line, point, sight, turning_point, spot, upper, middle, lower, distance, distance_from, note
		FROM sighting WHERE run_id = $1 ORDER BY seq`, runID)
	if err != nil {
		return nil, translate(err)
	}
	return collect(rows, func(r pgx.Row) (Sighting, error) {
		var s Sighting
		err := r.Scan(&s.Seq, &s.Line, &s.Point, &s.Sight, &s.TurningPoint, &s.Spot, &s.Upper, &s.Middle, &s.Lower, &s.Distance, &s.DistanceFrom, &s.Note)
		return s, translate(err)
	})
}
