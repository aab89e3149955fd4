package store

import (
	"context"
	"fmt"
	"time"

	"github.com/jackc/pgx/v5"
)

// MarkVersion is one version of a mark's description: version 1 is the
// mark's own row, 2 and on rows of mark_version (migrations/00018).
type MarkVersion struct {
	Version        int
	Type           string
	Setting        string
	Stamping       string
	Directions     string
	Description    string
	Lat, Lon       *float64
	PositionSource string
	// Reason is why the version was written ("" for version 1, the
	// mark as added).
	Reason     string
	RecordedBy string
	RecordedAt time.Time
}

// MarkVersionInsertParams are the fields of a new version of a mark's
// description, whole (every field, changed or not).
type MarkVersionInsertParams struct {
	MarkID                                                      int64
	Type, Setting, Stamping, Directions, Description, PosSource string
	Lat, Lon                                                    *float64
	Reason, RecordedBy                                          string
}

// MarkVersionInsert appends a version of a mark's description and returns
// its number (set by the database: one after the latest). ErrConflict if
// another writer added one first.
func MarkVersionInsert(ctx context.Context, db DBTX, p MarkVersionInsertParams) (int, error) {
	var v int
	err := db.QueryRow(ctx, `INSERT INTO mark_version (mark_id, mark_type, setting, stamping, directions, description,
		lat, lon, position_source, reason, recorded_by) VALUES ($1, $2, $3, $4, $5, $6, $7, $8, $9, $10, $11) RETURNING version`,
		p.MarkID, p.Type, p.Setting, p.Stamping, p.Directions, p.Description, p.Lat, p.Lon, p.PosSource, p.Reason, p.RecordedBy).Scan(&v)
	if err != nil {
		return 0, fmt.Errorf("insert a version of the mark's description: %w", translate(err))
	}
	return v, nil
}

// MarkVersionList returns every version of a mark's description, the
// mark's own row first (version 1), oldest first.
func MarkVersionList(ctx context.Context, db DBTX, markID int64) ([]MarkVersion, error) {
	rows, err := db.Query(ctx, `SELECT 1, mark_type, setting, stamping, to_reach, '', lat, lon, '', '', created_by, created_at
		FROM mark WHERE id = $1
		UNION ALL
		SELECT version, mark_type, setting, stamping, directions, description, lat, lon, position_source, reason, recorded_by, recorded_at
		FROM mark_version WHERE mark_id = $1
		ORDER BY 1`, markID)
	if err != nil {
		return nil, translate(err)
	}
	return collect(rows, func(r pgx.Row) (MarkVersion, error) {
		var v MarkVersion
		err := r.Scan(&v.Version, &v.Type, &v.Setting, &v.Stamping, &v.Directions, &v.Description, &v.Lat, &v.Lon,
			&v.PositionSource, &v.Reason, &v.RecordedBy, &v.RecordedAt)
		return v, translate(err)
	})
}
