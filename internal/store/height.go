package store

import (
	"context"
	"fmt"
	"time"

	"github.com/jackc/pgx/v5"
)

// Height is one version of a mark's published height on one datum.
type Height struct {
	ID           int64
	MarkID       int64
	Designation  string
	DatumID      int64
	DatumCode    string
	Version      int
	Supersedes   *int64
	Value        *string // exactly as published; nil for a withdrawal
	Unit         *string
	Decimals     *int
	Class        string
	SourceKind   string
	Source       string
	AdjustmentID *int64
	Reason       string
	RecordedBy   string
	// RecordedRole is the database login role (session_user) that wrote
	// the version; nil for versions written before schema v12.
	RecordedRole *string
	// RecordedAt is the time of the writing transaction's writes, as the
	// hash covers it.
	RecordedAt time.Time
	// InForceFrom is when the version came in force: the commit of its
	// transaction (register_commit), or RecordedAt for a version written
	// before schema v12.
	InForceFrom time.Time
	Hash        []byte
	// Current is true when no version supersedes this one.
	Current bool
}

const heightColumns = `h.id, h.mark_id, m.designation, h.datum_id, d.code, h.version, h.supersedes,
	h.value::text, h.unit, h.decimals, h.class, h.source_kind, h.source, h.adjustment_id,
	h.reason, h.recorded_by, h.recorded_role, h.recorded_at, ` + heightInForce + `, h.hash,
	NOT EXISTS (SELECT 1 FROM height s WHERE s.supersedes = h.id)`

// heightInForce is when version h came in force: its transaction's commit,
// or, for a version written before schema v12 (no created_xid), its
// recorded_at.
const heightInForce = "coalesce(rc.committed_at, h.recorded_at)"

const heightFrom = " FROM height h JOIN mark m ON m.id = h.mark_id JOIN datum d ON d.id = h.datum_id" +
	" LEFT JOIN register_commit rc ON rc.xid = h.created_xid"

func scanHeight(row pgx.Row) (Height, error) {
	var h Height
	var dec *int16
	err := row.Scan(&h.ID, &h.MarkID, &h.Designation, &h.DatumID, &h.DatumCode, &h.Version, &h.Supersedes,
		&h.Value, &h.Unit, &dec, &h.Class, &h.SourceKind, &h.Source, &h.AdjustmentID,
		&h.Reason, &h.RecordedBy, &h.RecordedRole, &h.RecordedAt, &h.InForceFrom, &h.Hash, &h.Current)
	if dec != nil {
		d := int(*dec)
		h.Decimals = &d
	}
	return h, translate(err)
}

func heightQuery(ctx context.Context, db DBTX, sql string, args ...any) ([]Height, error) {
	rows, err := db.Query(ctx, sql, args...)
	if err != nil {
		return nil, translate(err)
	}
	return collect(rows, scanHeight)
}

// HeightInsertParams are the fields of a new version. The database sets
// version, recorded_at and hash.
type HeightInsertParams struct {
	MarkID, DatumID int64
	// Supersedes is the version being replaced: the latest one, or nil for
	// the first. If another writer added a version meanwhile, the insert
	// fails with ErrConflict.
	Supersedes   *int64
	Value        *string // decimal text with exactly Decimals places; nil to withdraw
	Unit         *string
	Decimals     *int
	Class        string
	SourceKind   string
	Source       string
	AdjustmentID *int64
	Reason       string
	RecordedBy   string
}

// HeightInsert appends a version and returns it as stored.
func HeightInsert(ctx context.Context, db DBTX, p HeightInsertParams) (Height, error) {
	var id int64
	err := db.QueryRow(ctx, `INSERT INTO height (mark_id, datum_id, supersedes, value, unit, decimals, class,
			source_kind, source, adjustment_id, reason, recorded_by)
		VALUES ($1, $2, $3, $4::numeric, $5, $6, $7, $8, $9, $10, $11, $12) RETURNING id`,
		p.MarkID, p.DatumID, p.Supersedes, p.Value, p.Unit, p.Decimals, p.Class,
		p.SourceKind, p.Source, p.AdjustmentID, p.Reason, p.RecordedBy).Scan(&id)
	if err != nil {
		return Height{}, fmt.Errorf("insert height version: %w", translate(err))
	}
	return HeightGet(ctx, db, id)
}

// HeightGet returns a version by id.
func HeightGet(ctx context.Context, db DBTX, id int64) (Height, error) {
	return scanHeight(db.QueryRow(ctx, "SELECT "+heightColumns+heightFrom+" WHERE h.id = $1", id))
}

// HeightLatestParams names one chain of versions.
type HeightLatestParams struct{ MarkID, DatumID int64 }

// HeightLatest returns the current version of a mark on a datum;
// ErrNotFound if it has none.
func HeightLatest(ctx context.Context, db DBTX, p HeightLatestParams) (Height, error) {
	return scanHeight(db.QueryRow(ctx, "SELECT "+heightColumns+heightFrom+
		" WHERE h.mark_id = $1 AND h.datum_id = $2 ORDER BY h.version DESC LIMIT 1", p.MarkID, p.DatumID))
}

// HeightAsOfParams asks for the versions in force at an instant.
type HeightAsOfParams struct {
	MarkID int64
	// DatumID 0 means every datum of the mark.
	DatumID int64
	// AsOf nil means now (the current versions).
	AsOf *time.Time
}

// HeightAsOf returns, for each datum, the version of the mark in force at
// AsOf (a withdrawal included), by datum code: the latest version whose
// writing transaction had committed by AsOf (InForceFrom not after it).
// Versions come in force in version order, so this is the one answer.
func HeightAsOf(ctx context.Context, db DBTX, p HeightAsOfParams) ([]Height, error) {
	return heightQuery(ctx, db, "SELECT * FROM (SELECT DISTINCT ON (h.datum_id) "+heightColumns+heightFrom+
		` WHERE h.mark_id = $1 AND ($2::bigint = 0 OR h.datum_id = $2) AND ($3::timestamptz IS NULL OR `+heightInForce+` <= $3)
		ORDER BY h.datum_id, h.version DESC) v ORDER BY v.code`, p.MarkID, p.DatumID, p.AsOf)
}

// HeightAsOfAllParams ask for the version of every mark in force at an
// instant.
type HeightAsOfAllParams struct {
	// DatumID 0 means every datum.
	DatumID int64
	// AsOf nil means now (the current versions).
	AsOf *time.Time
}

// HeightAsOfAll returns the version of every mark in force at AsOf on the
// datum (a withdrawal included), as HeightAsOf, by designation and datum
// code.
func HeightAsOfAll(ctx context.Context, db DBTX, p HeightAsOfAllParams) ([]Height, error) {
	if p.AsOf == nil {
		return HeightCurrentAll(ctx, db, p.DatumID)
	}
	return heightQuery(ctx, db, "SELECT * FROM (SELECT DISTINCT ON (h.mark_id, h.datum_id) "+heightColumns+heightFrom+
		` WHERE ($1::bigint = 0 OR h.datum_id = $1) AND `+heightInForce+` <= $2
		ORDER BY h.mark_id, h.datum_id, h.version DESC) v ORDER BY v.designation, v.code`, p.DatumID, p.AsOf)
}

// HeightCurrentAll returns the current version of every mark on datumID
// (0: every datum), by designation and datum code.
func HeightCurrentAll(ctx context.Context, db DBTX, datumID int64) ([]Height, error) {
	return heightQuery(ctx, db, "SELECT "+heightColumns+heightFrom+
		` WHERE NOT EXISTS (SELECT 1 FROM height s WHERE s.supersedes = h.id) AND ($1::bigint = 0 OR h.datum_id = $1)
		ORDER BY m.designation, d.code`, datumID)
}

// HeightCurrentByMarks returns the current versions of the marks
// markIDs on every datum, by designation and datum code.
func HeightCurrentByMarks(ctx context.Context, db DBTX, markIDs []int64) ([]Height, error) {
	return heightQuery(ctx, db, "SELECT "+heightColumns+heightFrom+
		` WHERE h.mark_id = ANY($1) AND NOT EXISTS (SELECT 1 FROM height s WHERE s.supersedes = h.id)
		ORDER BY m.designation, d.code`, markIDs)
}

// HeightHistoryParams names the versions to list.
type HeightHistoryParams struct {
	MarkID int64
	// DatumID 0 means every datum.
	DatumID int64
}

// HeightHistory returns every version of a mark, newest first within
// each datum, datums by code.
func HeightHistory(ctx context.Context, db DBTX, p HeightHistoryParams) ([]Height, error) {
	return heightQuery(ctx, db, "SELECT "+heightColumns+heightFrom+
		" WHERE h.mark_id = $1 AND ($2::bigint = 0 OR h.datum_id = $2) ORDER BY d.code, h.version DESC", p.MarkID, p.DatumID)
}

// HeightEach calls fn with every version in the register, chain by chain
// (mark, datum) and in version order within a chain, streaming the rows.
func HeightEach(ctx context.Context, db DBTX, fn func(Height) error) error {
	rows, err := db.Query(ctx, "SELECT "+heightColumns+heightFrom+" ORDER BY h.mark_id, h.datum_id, h.version, h.id")
	if err != nil {
		return translate(err)
	}
	defer rows.Close()
	for rows.Next() {
		h, err := scanHeight(rows)
		if err != nil {
			return err
		}
		if err := fn(h); err != nil {
			return err
		}
	}
	return translate(rows.Err())
}

// HeightLatestManyParams name chains of versions: the given marks on one
// datum.
type HeightLatestManyParams struct {
	MarkIDs []int64
	DatumID int64
}

// HeightLatestMany returns the latest version of each of the marks on the
// datum, by mark identifier; marks without one are absent.
func HeightLatestMany(ctx context.Context, db DBTX, p HeightLatestManyParams) (map[int64]Height, error) {
	hs, err := heightQuery(ctx, db, "SELECT DISTINCT ON (h.mark_id) "+heightColumns+heightFrom+
		" WHERE h.mark_id = ANY($1) AND h.datum_id = $2 ORDER BY h.mark_id, h.version DESC", p.MarkIDs, p.DatumID)
	if err != nil {
		return nil, err
	}
	out := make(map[int64]Height, len(hs))
	for _, h := range hs {
		out[h.MarkID] = h
	}
	return out, nil
}

// HeightSuccessor returns the version that supersedes version id;
// ErrNotFound if it is current.
func HeightSuccessor(ctx context.Context, db DBTX, id int64) (Height, error) {
	return scanHeight(db.QueryRow(ctx, "SELECT "+heightColumns+heightFrom+" WHERE h.supersedes = $1", id))
}

// HeightInsertManyParams are new versions from one adjustment: one per
// mark, all on one datum, with the same source, reason and author.
type HeightInsertManyParams struct {
	DatumID      int64
	AdjustmentID int64
	Source       string
	Reason       string
	RecordedBy   string
	// Results give each version's mark, value, unit, decimals and class,
	// and the version it supersedes (Replaces).
	Results []AdjustmentResult
}

// HeightInsertMany appends the versions in one statement and returns them
// as stored, by designation. If another writer added a version of one of
// the marks meanwhile, it fails with ErrConflict.
func HeightInsertMany(ctx context.Context, db DBTX, p HeightInsertManyParams) ([]Height, error) {
	n := len(p.Results)
	marks, sup, vals, unitsOf, decs, classes := make([]int64, n), make([]*int64, n), make([]*string, n), make([]*string, n), make([]*int16, n), make([]string, n)
	for i, r := range p.Results {
		marks[i], sup[i], vals[i], unitsOf[i], classes[i] = r.MarkID, r.Replaces, r.Value, r.Unit, r.Class
		if r.Decimals != nil {
			d := int16(*r.Decimals)
			decs[i] = &d
		}
	}
	rows, err := db.Query(ctx, `INSERT INTO height (mark_id, datum_id, supersedes, value, unit, decimals, class,
			source_kind, source, adjustment_id, reason, recorded_by)
		SELECT u.mark_id, $1, u.supersedes, u.value, u.unit, u.decimals, u.class, 'adjustment', $2, $3, $4, $5
		FROM unnest($6::bigint[], $7::bigint[], $8::numeric[], $9::text[], $10::smallint[], $11::text[])
			AS u (mark_id, supersedes, value, unit, decimals, class)
		RETURNING id`, p.DatumID, p.Source, p.AdjustmentID, p.Reason, p.RecordedBy, marks, sup, vals, unitsOf, decs, classes)
	if err != nil {
		return nil, fmt.Errorf("insert height versions: %w", translate(err))
	}
	ids, err := collect(rows, func(r pgx.Row) (int64, error) {
		var id int64
		return id, translate(r.Scan(&id))
	})
	if err != nil {
		return nil, fmt.Errorf("insert height versions: %w", err)
	}
	return HeightListByIDs(ctx, db, ids)
}

// HeightListByIDs returns the versions with the given identifiers, by
// designation and datum code.
func HeightListByIDs(ctx context.Context, db DBTX, ids []int64) ([]Height, error) {
	return heightQuery(ctx, db, "SELECT "+heightColumns+heightFrom+" WHERE h.id = ANY($1) ORDER BY m.designation, d.code", ids)
}
