package store

import (
	"context"
	"fmt"
	"strings"
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
	// CommittedAt is when the register learned of the version (its
	// "recorded" time): the commit of its transaction (register_commit),
	// or RecordedAt for a version written before schema v12.
	CommittedAt time.Time
	// InForceGiven is the time the version came in force as its source
	// gives it (schema v17, hashed with layout 3); nil for a version in
	// force from its own commit: one from an adjustment, or one written
	// before schema v17.
	InForceGiven *time.Time
	// InForceFrom is when the version came in force: InForceGiven, or else
	// CommittedAt.
	InForceFrom time.Time
	Hash        []byte
	// Current is true when the version is the one in force now, by all
	// the register knows: of the versions of its mark and datum, the one
	// in force from the latest time, the later recorded of two in force
	// from the same time. It is the latest version of its chain unless a
	// version recorded later came in force earlier (a correction of the
	// past).
	Current bool
}

const heightColumns = heightFields + heightCurrent

// heightLatestColumns are heightColumns of versions each the latest of its
// chain (heightCurrentOfLatest).
const heightLatestColumns = heightFields + heightCurrentOfLatest

// heightFields are the columns of a Height but Current.
const heightFields = `h.id, h.mark_id, m.designation, h.datum_id, d.code, h.version, h.supersedes,
	h.value::text, h.unit, h.decimals, h.class, h.source_kind, h.source, h.adjustment_id,
	h.reason, h.recorded_by, h.recorded_role, h.recorded_at, ` + heightKnown + `, h.in_force_from, ` + heightInForce + `, h.hash,
	`

// heightKnown is when the register learned of version h: its
// transaction's commit, or, for a version written before schema v12 (no
// created_xid), its recorded_at.
const heightKnown = "coalesce(rc.committed_at, h.recorded_at)"

// heightInForce is when version h came in force: the time its source
// gives (schema v17), or else when the register learned of it.
const heightInForce = "coalesce(h.in_force_from, rc.committed_at, h.recorded_at)"

// heightCurrent is true when version h is the one in force now: no
// version of its chain is in force from a later time, or from the same
// time and recorded later (a greater version number). See HeightAsOf for
// the rule. Two cases are settled by the chain alone, without comparing
// times: a version superseded by one in force from its own commit is not
// current (that commit is after h was recorded, and h was in force by
// then), and a version in force from its own commit that nothing
// supersedes is (every earlier version came in force before it was
// recorded, before this commit). The database holds both premises: a
// version's in-force time is never after its write time (schema v17), and
// a chain's versions are committed in version order.
//
// The two look-ups of h's successor end in OFFSET 0 so that each stays a
// probe of the unique index on supersedes: without it PostgreSQL may
// plan the EXISTS as a hashed subplan, which reads the whole height table
// to build its hash for every statement (sections 9.23.1 and 7.6 of the
// PostgreSQL 15 documentation, EXISTS and OFFSET; that an OFFSET keeps a
// subquery from being flattened or rewritten is common practice). At
// 100,000 versions that scan was 28 ms of every page of marks; at
// 5,000,000, seconds (docs/performance.md).
const heightCurrent = `CASE
		WHEN EXISTS (SELECT 1 FROM height x WHERE x.supersedes = h.id AND x.in_force_from IS NULL OFFSET 0) THEN false
		WHEN h.in_force_from IS NULL AND NOT EXISTS (SELECT 1 FROM height x WHERE x.supersedes = h.id OFFSET 0) THEN true
		ELSE NOT EXISTS (SELECT 1 FROM height s
			WHERE s.mark_id = h.mark_id AND s.datum_id = h.datum_id AND s.id <> h.id
			  AND (` + heightInForceOfS + `, s.version) > (` + heightInForce + `, h.version))
	END`

// heightInForceOfS is heightInForce of version s, its commit looked up
// only when s gives no in-force time of its own: COALESCE evaluates its
// arguments left to right and stops at the first not null, and a scalar
// subquery is evaluated only when reached (PostgreSQL 15 documentation,
// 9.18.2 and 4.2.11), where a join probes register_commit for every
// version of the chain. Imported and authority versions give their
// in-force time, so their chains are compared without a probe.
const heightInForceOfS = "coalesce(s.in_force_from, (SELECT sc.committed_at FROM register_commit sc WHERE sc.xid = s.created_xid), s.recorded_at)"

// heightCurrentOfLatest is heightCurrent of a version h known to be the
// latest of its chain (no version supersedes it), derived from that once
// for the set rather than probed for each row: a latest version in force
// from its own commit is current (the second case of heightCurrent); one
// whose source gives its in-force time is current unless an earlier
// version is in force from a later time (every other version has a
// smaller version number, so the tie of heightCurrent's rule cannot
// favour it).
const heightCurrentOfLatest = `(h.in_force_from IS NULL OR NOT EXISTS (SELECT 1 FROM height s
			WHERE s.mark_id = h.mark_id AND s.datum_id = h.datum_id AND s.id <> h.id
			  AND ` + heightInForceOfS + ` > h.in_force_from))`

const heightFrom = " FROM height h JOIN mark m ON m.id = h.mark_id JOIN datum d ON d.id = h.datum_id" +
	" LEFT JOIN register_commit rc ON rc.xid = h.created_xid"

func scanHeight(row pgx.Row) (Height, error) {
	var h Height
	var dec *int16
	err := row.Scan(&h.ID, &h.MarkID, &h.Designation, &h.DatumID, &h.DatumCode, &h.Version, &h.Supersedes,
		&h.Value, &h.Unit, &dec, &h.Class, &h.SourceKind, &h.Source, &h.AdjustmentID,
		&h.Reason, &h.RecordedBy, &h.RecordedRole, &h.RecordedAt, &h.CommittedAt, &h.InForceGiven, &h.InForceFrom, &h.Hash, &h.Current)
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
	// InForceFrom is when the version came in force, as its source gives
	// it; required for every source kind but adjustment, for which it is
	// nil (in force from its commit). Not after the transaction's time.
	InForceFrom *time.Time
}

// HeightInsert appends a version and returns it as stored.
func HeightInsert(ctx context.Context, db DBTX, p HeightInsertParams) (Height, error) {
	var id int64
	err := db.QueryRow(ctx, `INSERT INTO height (mark_id, datum_id, supersedes, value, unit, decimals, class,
			source_kind, source, adjustment_id, reason, recorded_by, in_force_from)
		VALUES ($1, $2, $3, $4::numeric, $5, $6, $7, $8, $9, $10, $11, $12, $13) RETURNING id`,
		p.MarkID, p.DatumID, p.Supersedes, p.Value, p.Unit, p.Decimals, p.Class,
		p.SourceKind, p.Source, p.AdjustmentID, p.Reason, p.RecordedBy, p.InForceFrom).Scan(&id)
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

// HeightLatest returns the latest version of a mark on a datum, the one
// a new version supersedes (the chain is in recorded order); ErrNotFound
// if it has none. The version in force now is HeightCurrent's.
func HeightLatest(ctx context.Context, db DBTX, p HeightLatestParams) (Height, error) {
	return scanHeight(db.QueryRow(ctx, "SELECT "+heightColumns+heightFrom+
		" WHERE h.mark_id = $1 AND h.datum_id = $2 ORDER BY h.version DESC LIMIT 1", p.MarkID, p.DatumID))
}

// HeightCurrent returns the version of a mark on a datum in force now, by
// all the register knows (a withdrawal included); ErrNotFound if it has
// none.
func HeightCurrent(ctx context.Context, db DBTX, p HeightLatestParams) (Height, error) {
	return scanHeight(db.QueryRow(ctx, "SELECT "+heightColumns+heightFrom+
		" WHERE h.mark_id = $1 AND h.datum_id = $2 ORDER BY "+heightInForce+" DESC, h.version DESC LIMIT 1", p.MarkID, p.DatumID))
}

// HeightAsOfParams ask for the versions in force at an instant, as the
// register knew them at another.
type HeightAsOfParams struct {
	MarkID int64
	// DatumID 0 means every datum of the mark.
	DatumID int64
	// AsOf is the instant asked about: the versions in force then. Nil
	// means now.
	AsOf *time.Time
	// KnownAt is the instant of the register's knowledge: only the
	// versions it had learned of by then (committed by KnownAt) count.
	// Nil means all it knows now.
	KnownAt *time.Time
}

// heightAsOfWhere keeps the versions in force at $AsOf and known at
// $KnownAt (each nil: no bound).
func heightAsOfWhere(asOf, knownAt int) string {
	return fmt.Sprintf(" AND ($%d::timestamptz IS NULL OR %s <= $%d) AND ($%d::timestamptz IS NULL OR %s <= $%d)",
		asOf, heightInForce, asOf, knownAt, heightKnown, knownAt)
}

// heightAsOfOrder orders each chain's versions so that the first is the
// answer: in force from the latest time, then recorded latest.
const heightAsOfOrder = heightInForce + " DESC, h.version DESC"

// HeightAsOf returns, for each datum, the version of the mark in force at
// AsOf as the register knew it at KnownAt (a withdrawal included), by
// datum code. The rule, the one answer to each question:
//
//	of the versions the register had learned of by KnownAt (committed by then)
//	and in force from a time not after AsOf,
//	the one in force from the latest time;
//	of two in force from the same time, the one recorded later.
//
// A chain's versions are recorded at increasing times, one per
// transaction, in version order (the database holds it), so the answer is
// one version or none.
func HeightAsOf(ctx context.Context, db DBTX, p HeightAsOfParams) ([]Height, error) {
	return heightQuery(ctx, db, "SELECT * FROM (SELECT DISTINCT ON (h.datum_id) "+heightColumns+heightFrom+
		` WHERE h.mark_id = $1 AND ($2::bigint = 0 OR h.datum_id = $2)`+heightAsOfWhere(3, 4)+`
		ORDER BY h.datum_id, `+heightAsOfOrder+`) v ORDER BY v.code`, p.MarkID, p.DatumID, p.AsOf, p.KnownAt)
}

// HeightAsOfAllParams ask for the version of every mark in force at an
// instant, as the register knew them at another.
type HeightAsOfAllParams struct {
	// DatumID 0 means every datum.
	DatumID int64
	// AsOf nil means now; KnownAt nil means all the register knows now.
	AsOf, KnownAt *time.Time
}

// HeightAsOfAll returns the version of every mark in force at AsOf as
// known at KnownAt on the datum (a withdrawal included), by the rule of
// HeightAsOf, by designation and datum code.
func HeightAsOfAll(ctx context.Context, db DBTX, p HeightAsOfAllParams) ([]Height, error) {
	if p.AsOf == nil && p.KnownAt == nil {
		return HeightCurrentAll(ctx, db, p.DatumID)
	}
	return heightQuery(ctx, db, "SELECT * FROM (SELECT DISTINCT ON (h.mark_id, h.datum_id) "+heightColumns+heightFrom+
		` WHERE ($1::bigint = 0 OR h.datum_id = $1)`+heightAsOfWhere(2, 3)+`
		ORDER BY h.mark_id, h.datum_id, `+heightAsOfOrder+`) v ORDER BY v.designation, v.code`, p.DatumID, p.AsOf, p.KnownAt)
}

// HeightCurrentAll returns the version in force now of every mark on
// datumID (0: every datum), by designation and datum code.
func HeightCurrentAll(ctx context.Context, db DBTX, datumID int64) ([]Height, error) {
	return heightQuery(ctx, db, "SELECT "+heightColumns+heightFrom+
		` WHERE `+heightCurrent+` AND ($1::bigint = 0 OR h.datum_id = $1)
		ORDER BY m.designation, d.code`, datumID)
}

// HeightCurrentByMarks returns the versions in force now of the marks
// markIDs on every datum, by designation and datum code.
//
// Each chain's version in force is found as HeightAsOf finds the version
// in force at a time (heightAsOfOrder: in force from the latest time,
// then recorded latest), one ordered read of the chain, rather than by
// heightCurrent's probes for every version of it (five versions a mark:
// 20-48 ms a page of 1,000 marks at 1,000,000 marks, against 5.7 ms;
// docs/performance.md). The two agree on every chain the database can
// hold: with its premises (heightCurrent), the first version in that
// order is the one heightCurrent calls current, and no other is
// (TestHeightCurrentByMarksAsTheRule checks it against heightCurrent
// version by version).
func HeightCurrentByMarks(ctx context.Context, db DBTX, markIDs []int64) ([]Height, error) {
	// Each mark's chains by their key, not "mark_id = ANY($1)" (see
	// HeightLatestMany).
	return heightQuery(ctx, db, "SELECT "+heightFields+`true FROM (SELECT DISTINCT ON (h.mark_id, h.datum_id) h.id
			FROM (SELECT DISTINCT unnest($1::bigint[]) AS mark_id) AS u
			JOIN height h ON h.mark_id = u.mark_id LEFT JOIN register_commit rc ON rc.xid = h.created_xid
			ORDER BY h.mark_id, h.datum_id, `+heightAsOfOrder+`) cur
		JOIN height h ON h.id = cur.id JOIN mark m ON m.id = h.mark_id JOIN datum d ON d.id = h.datum_id
		LEFT JOIN register_commit rc ON rc.xid = h.created_xid
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
// datum, by mark identifier; marks without one are absent. Each says
// whether it is the one in force now (Current).
func HeightLatestMany(ctx context.Context, db DBTX, p HeightLatestManyParams) (map[int64]Height, error) {
	// One probe of the chain's key (mark_id, datum_id, version) a mark,
	// newest first: for 50,000 marks 0.22 s, where "mark_id = ANY($1)"
	// with DISTINCT ON became parallel sequential scans and sorts spilling
	// to disk (2–5.5 s; issue 15).
	// The latest version is read whole in its one probe (not its id, then
	// the row by id again), and in no order: the answer is a map (a sort
	// of 50,000 rows spilled to disk).
	hs, err := heightQuery(ctx, db, "SELECT "+heightLatestColumns+` FROM unnest($1::bigint[]) AS u (mark_id)
		CROSS JOIN LATERAL (SELECT x.* FROM height x WHERE x.mark_id = u.mark_id AND x.datum_id = $2
			ORDER BY x.version DESC LIMIT 1) h
		JOIN mark m ON m.id = h.mark_id JOIN datum d ON d.id = h.datum_id
		LEFT JOIN register_commit rc ON rc.xid = h.created_xid`, p.MarkIDs, p.DatumID)
	if err != nil {
		return nil, err
	}
	out := make(map[int64]Height, len(hs))
	for _, h := range hs {
		out[h.MarkID] = h
	}
	return out, nil
}

// HeightKey names a version: its id and its number in its chain.
type HeightKey struct {
	ID      int64
	Version int
}

// HeightLatestKeys returns the id and number of the latest version of each
// of the marks on the datum, by mark identifier; marks without one are
// absent: one probe of the chain's key a mark, what a draft records of the
// versions publishing would replace, without the columns and the in-force
// test HeightLatestMany computes (5.2 of a draft's 20.8 s of statements
// at 50,000 marks).
func HeightLatestKeys(ctx context.Context, db DBTX, p HeightLatestManyParams) (map[int64]HeightKey, error) {
	rows, err := db.Query(ctx, `SELECT u.mark_id, latest.id, latest.version FROM unnest($1::bigint[]) AS u (mark_id)
		CROSS JOIN LATERAL (SELECT x.id, x.version FROM height x WHERE x.mark_id = u.mark_id AND x.datum_id = $2
			ORDER BY x.version DESC LIMIT 1) latest`, p.MarkIDs, p.DatumID)
	if err != nil {
		return nil, translate(err)
	}
	defer rows.Close()
	out := make(map[int64]HeightKey, len(p.MarkIDs))
	for rows.Next() {
		var mark int64
		var k HeightKey
		if err := rows.Scan(&mark, &k.ID, &k.Version); err != nil {
			return nil, translate(err)
		}
		out[mark] = k
	}
	return out, translate(rows.Err())
}

// HeightSuccessor returns the version that supersedes version id;
// ErrNotFound if it is current.
func HeightSuccessor(ctx context.Context, db DBTX, id int64) (Height, error) {
	return scanHeight(db.QueryRow(ctx, "SELECT "+heightColumns+heightFrom+" WHERE h.supersedes = $1", id))
}

// HeightInsertManyParams are new versions from one adjustment: one per
// mark, all on one datum, with the same source, reason and author.
type HeightInsertManyParams struct {
	DatumID int64
	// DatumCode is the datum's code, as the versions returned carry it.
	DatumCode    string
	AdjustmentID int64
	Source       string
	Reason       string
	RecordedBy   string
	// Results give each version's mark (MarkID, and its Designation, as
	// the versions returned carry it), value, unit, decimals and class,
	// and the version it supersedes (Replaces).
	Results []AdjustmentResult
}

// heightReturning are the columns of a version the insert returns, in
// the order scanInserted reads them.
const heightReturning = `id, mark_id, datum_id, version, supersedes, value::text, unit, decimals, class, source_kind, source,
	adjustment_id, reason, recorded_by, recorded_role, recorded_at, in_force_from, hash`

// HeightInsertMany appends the versions in one statement and returns them
// as stored, by designation. If another writer added a version of one of
// the marks meanwhile, it fails with ErrConflict.
//
// The versions come back from the insert itself (RETURNING), not read
// again: the columns the table's triggers set (version, recorded_at,
// recorded_role, hash) with the rest; the designation and the datum's code
// are the caller's (an adjustment's results as read, with their marks),
// put to the mark and datum each row names; each is the
// latest of its chain and in force from its own commit, so current
// (heightCurrentOfLatest), and until that commit its commit time is its
// recorded time (heightKnown). Reading the 50,000 rows of a publication
// again with their joins took 1.9 s of its 10.4 s of statements (issue 15).
func HeightInsertMany(ctx context.Context, db DBTX, p HeightInsertManyParams) ([]Height, error) {
	n := len(p.Results)
	marks, sup, vals, unitsOf, decs, classes := make([]int64, n), make([]*int64, n), make([]*string, n), make([]*string, n), make([]*int16, n), make([]string, n)
	names := make(map[int64]string, n)
	desig := make([]string, n)
	for i, r := range p.Results {
		marks[i], sup[i], vals[i], unitsOf[i], classes[i] = r.MarkID, r.Replaces, r.Value, r.Unit, r.Class
		if r.Decimals != nil {
			d := int16(*r.Decimals)
			decs[i] = &d
		}
		if r.Designation == "" {
			return nil, fmt.Errorf("insert height versions: the result for mark %d has no designation", r.MarkID)
		}
		names[r.MarkID], desig[i] = r.Designation, r.Designation
	}
	if p.DatumCode == "" {
		return nil, fmt.Errorf("insert height versions: no datum code given for datum %d", p.DatumID)
	}
	rows, err := db.Query(ctx, `INSERT INTO height (mark_id, datum_id, supersedes, value, unit, decimals, class,
			source_kind, source, adjustment_id, reason, recorded_by)
		SELECT u.mark_id, $1, u.supersedes, u.value, u.unit, u.decimals, u.class, 'adjustment', $2, $3, $4, $5
		FROM unnest($6::bigint[], $7::bigint[], $8::numeric[], $9::text[], $10::smallint[], $11::text[])
			AS u (mark_id, supersedes, value, unit, decimals, class)
		RETURNING `+heightReturning, p.DatumID, p.Source, p.AdjustmentID, p.Reason, p.RecordedBy, marks, sup, vals, unitsOf, decs, classes)
	if err != nil {
		return nil, fmt.Errorf("insert height versions: %w", translate(err))
	}
	hs, err := collect(rows, scanInserted)
	if err != nil {
		return nil, fmt.Errorf("insert height versions: %w", err)
	}
	if len(hs) != n {
		return nil, fmt.Errorf("insert height versions: %d rows written, %d asked", len(hs), n)
	}
	for i := range hs {
		h := &hs[i]
		if h.DatumID != p.DatumID || names[h.MarkID] == "" {
			return nil, fmt.Errorf("insert height versions: version %d is of mark %d on datum %d, not one asked", h.ID, h.MarkID, h.DatumID)
		}
		h.Designation, h.DatumCode = names[h.MarkID], p.DatumCode
		h.CommittedAt, h.InForceFrom = h.RecordedAt, h.RecordedAt
		if h.InForceGiven != nil {
			// Not from an adjustment (the trigger refuses a time given to
			// one): its in-force test is the chain's.
			return nil, fmt.Errorf("insert height versions: version %d of %s gives its in-force time", h.ID, h.Designation)
		}
		h.Current = true
	}
	// By designation and datum code, in the database's collation, as
	// every list of versions (one datum here): the server orders the
	// names sent, without reading a table.
	var order []int32
	if err := db.QueryRow(ctx, `SELECT coalesce(array_agg(u.i - 1 ORDER BY u.d, u.i), '{}') FROM unnest($1::text[]) WITH ORDINALITY AS u (d, i)`,
		desig).Scan(&order); err != nil {
		return nil, fmt.Errorf("insert height versions: order by designation: %w", translate(err))
	}
	byMark := make(map[int64]int, n)
	for i, h := range hs {
		byMark[h.MarkID] = i
	}
	out := make([]Height, 0, n)
	for _, i := range order {
		out = append(out, hs[byMark[marks[i]]])
	}
	if len(out) != n {
		return nil, fmt.Errorf("insert height versions: %d ordered, %d written", len(out), n)
	}
	return out, nil
}

// scanInserted reads a version as the insert returns it (heightReturning).
func scanInserted(row pgx.Row) (Height, error) {
	var h Height
	var dec *int16
	err := row.Scan(&h.ID, &h.MarkID, &h.DatumID, &h.Version, &h.Supersedes, &h.Value, &h.Unit, &dec, &h.Class,
		&h.SourceKind, &h.Source, &h.AdjustmentID, &h.Reason, &h.RecordedBy, &h.RecordedRole, &h.RecordedAt, &h.InForceGiven, &h.Hash)
	if dec != nil {
		d := int(*dec)
		h.Decimals = &d
	}
	return h, translate(err)
}

// HeightListByIDs returns the versions with the given identifiers, by
// designation and datum code.
func HeightListByIDs(ctx context.Context, db DBTX, ids []int64) ([]Height, error) {
	// By key, one probe an id (see HeightLatestMany).
	return heightQuery(ctx, db, "SELECT "+heightColumns+strings.Replace(heightFrom, " FROM height h ",
		" FROM (SELECT DISTINCT unnest($1::bigint[]) AS id) AS u JOIN height h ON h.id = u.id ", 1)+" ORDER BY m.designation, d.code", ids)
}

// HeightChainSpan is the first and last mark id of the register's marks
// (0, 0 for none): the span audit workers divide.
func HeightChainSpan(ctx context.Context, db DBTX) (lo, hi int64, err error) {
	err = db.QueryRow(ctx, "SELECT coalesce(min(id), 0), coalesce(max(id), 0) FROM mark").Scan(&lo, &hi)
	return lo, hi, translate(err)
}

// SnapshotExport names the snapshot of tx (a REPEATABLE READ
// transaction) for others to share while tx is open.
func SnapshotExport(ctx context.Context, tx pgx.Tx) (string, error) {
	var id string
	err := tx.QueryRow(ctx, "SELECT pg_export_snapshot()").Scan(&id)
	return id, translate(err)
}

// SnapshotUse makes tx, a REPEATABLE READ transaction that has run no
// query yet, see the snapshot id that SnapshotExport named.
func SnapshotUse(ctx context.Context, tx pgx.Tx, id string) error {
	_, err := tx.Exec(ctx, "SET TRANSACTION SNAPSHOT "+quoteLiteral(id))
	return translate(err)
}

// MarkIDPage returns the ids of at most n marks whose designation comes
// after after, by designation (the unique index on it answers), and the
// last designation of the page ("" for none): a listing of the whole
// register a page at a time.
func MarkIDPage(ctx context.Context, db DBTX, after string, n int) ([]int64, string, error) {
	rows, err := db.Query(ctx, "SELECT id, designation FROM mark WHERE designation > $1 ORDER BY designation LIMIT $2", after, n)
	if err != nil {
		return nil, "", translate(err)
	}
	defer rows.Close()
	var ids []int64
	last := ""
	for rows.Next() {
		var id int64
		if err := rows.Scan(&id, &last); err != nil {
			return nil, "", translate(err)
		}
		ids = append(ids, id)
	}
	return ids, last, translate(rows.Err())
}

// HeightAsOfMarks is HeightAsOfAll for the marks markIDs only.
func HeightAsOfMarks(ctx context.Context, db DBTX, p HeightAsOfAllParams, markIDs []int64) ([]Height, error) {
	if p.AsOf == nil && p.KnownAt == nil {
		hs, err := HeightCurrentByMarks(ctx, db, markIDs)
		if err != nil || p.DatumID == 0 {
			return hs, err
		}
		out := hs[:0]
		for _, h := range hs {
			if h.DatumID == p.DatumID {
				out = append(out, h)
			}
		}
		return out, nil
	}
	return heightQuery(ctx, db, "SELECT * FROM (SELECT DISTINCT ON (h.mark_id, h.datum_id) "+heightColumns+
		` FROM (SELECT DISTINCT unnest($4::bigint[]) AS mark_id) AS u JOIN height h ON h.mark_id = u.mark_id
		JOIN mark m ON m.id = h.mark_id JOIN datum d ON d.id = h.datum_id LEFT JOIN register_commit rc ON rc.xid = h.created_xid
		WHERE ($1::bigint = 0 OR h.datum_id = $1)`+heightAsOfWhere(2, 3)+`
		ORDER BY h.mark_id, h.datum_id, `+heightAsOfOrder+`) v ORDER BY v.designation, v.code`, p.DatumID, p.AsOf, p.KnownAt, markIDs)
}
