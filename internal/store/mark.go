package store

import (
	"context"
	"fmt"
	"math"
	"strconv"
	"strings"
	"time"

	"github.com/jackc/pgx/v5"
)

// Mark is a benchmark in the register, with its current description (the
// latest version, migrations/00018), its latest condition report and, if
// it is retired, its retirement.
type Mark struct {
	ID          int64
	Designation string
	Type        string
	Setting     string
	Stamping    string
	// Directions say in words how to find the mark (the column to_reach
	// of its first version, directions of the later ones).
	Directions     string
	Description    string
	Lat, Lon       *float64 // approximate position, decimal degrees
	PositionSource string   // where the position came from
	// Version is the number of the description shown: 1 for the mark's
	// own row, 2 and on for mark_version.
	Version   int
	CreatedAt time.Time
	CreatedBy string
	// Latest is the latest condition report, nil if none.
	Latest *Condition
	// Retired is the mark's retirement, nil while it is in use.
	Retired *Retirement
	// Replaces is the designation of the mark this one replaced, or "".
	Replaces string
	// Aliases are the mark's other names, in the order they were given.
	Aliases []string
	// FoundBy is the alias the mark was looked up by, or "" (set by the
	// look-up, not stored).
	FoundBy string
	// DistanceM is the great-circle distance from the search point, in
	// metres (near searches only).
	DistanceM *float64
}

// Retirement is a mark taken out of use for good.
type Retirement struct {
	On         time.Time // a date
	Reason     string
	RecordedBy string
	RecordedAt time.Time
	// ReplacedBy is the designation of the mark that replaced it, or "".
	ReplacedBy string
}

// The current position: the latest version's, or the mark's own row's
// when it has none.
const (
	curLat = "(CASE WHEN v.id IS NULL THEN m.lat ELSE v.lat END)"
	curLon = "(CASE WHEN v.id IS NULL THEN m.lon ELSE v.lon END)"
)

var markColumns = `m.id, m.designation, coalesce(v.mark_type, m.mark_type), coalesce(v.setting, m.setting),
	coalesce(v.stamping, m.stamping), coalesce(v.directions, m.to_reach), coalesce(v.description, ''),
	` + curLat + `, ` + curLon + `, coalesce(v.position_source, ''), coalesce(v.version, 1),
	m.created_at, m.created_by, c.id, c.condition, c.note, c.observed_on, c.recorded_at, c.recorded_by,
	ret.retired_on, ret.reason, ret.recorded_by, ret.recorded_at, rby.designation AS replaced_by_designation,
	rof.designation AS replaces_designation,
	coalesce((SELECT array_agg(a.alias ORDER BY a.id) FROM mark_alias a WHERE a.mark_id = m.id), '{}') AS aliases`

// markFrom joins each mark to its latest description, its latest
// condition report, its retirement and the mark it replaced.
const markFrom = ` FROM mark m LEFT JOIN LATERAL (
	SELECT * FROM mark_condition mc WHERE mc.mark_id = m.id ORDER BY mc.observed_on DESC, mc.id DESC LIMIT 1
) c ON true LEFT JOIN LATERAL (
	SELECT * FROM mark_version mv WHERE mv.mark_id = m.id ORDER BY mv.version DESC LIMIT 1
) v ON true
LEFT JOIN mark_retirement ret ON ret.mark_id = m.id
LEFT JOIN mark rby ON rby.id = ret.replaced_by
LEFT JOIN mark_retirement rofr ON rofr.replaced_by = m.id
LEFT JOIN mark rof ON rof.id = rofr.mark_id`

// markDesignation is the designation of the mark whose id is the column
// col, as a scalar subquery: one lookup by the mark's key per row. Lists
// of one run's or one adjustment's rows name their marks this way rather
// than by a join, which PostgreSQL may make a hash join over every mark of
// the register (measured 2026-12-02, 390,000 marks: the sections of a
// 1,000-mark run read in 105 ms by a join, in 2.5 ms by the subquery), so
// that their cost follows the run, not the register.
func markDesignation(col string) string {
	return "(SELECT designation FROM mark WHERE id = " + col + ")"
}

func scanMark(row pgx.Row, extra ...any) (Mark, error) {
	var m Mark
	var cid *int64
	var c Condition
	var cond, note, by *string
	var on, at *time.Time
	var retOn, retAt *time.Time
	var retReason, retBy, retRepl, replaces *string
	dest := append([]any{&m.ID, &m.Designation, &m.Type, &m.Setting, &m.Stamping, &m.Directions, &m.Description,
		&m.Lat, &m.Lon, &m.PositionSource, &m.Version,
		&m.CreatedAt, &m.CreatedBy, &cid, &cond, &note, &on, &at, &by,
		&retOn, &retReason, &retBy, &retAt, &retRepl, &replaces, &m.Aliases}, extra...)
	if err := row.Scan(dest...); err != nil {
		return Mark{}, translate(err)
	}
	if cid != nil {
		c = Condition{ID: *cid, MarkID: m.ID, Condition: *cond, Note: *note, ObservedOn: *on, RecordedAt: *at, RecordedBy: *by}
		m.Latest = &c
	}
	if retOn != nil {
		m.Retired = &Retirement{On: *retOn, Reason: *retReason, RecordedBy: *retBy, RecordedAt: *retAt}
		if retRepl != nil {
			m.Retired.ReplacedBy = *retRepl
		}
	}
	if replaces != nil {
		m.Replaces = *replaces
	}
	return m, nil
}

// MarkInsertParams are the fields of a new mark.
type MarkInsertParams struct {
	Designation, Type, Setting, Stamping, Directions string
	Lat, Lon                                         *float64
	CreatedBy                                        string
}

// MarkInsert adds a mark; ErrAlreadyExists if the designation is taken,
// ErrNameTaken if it is another mark's alias. The directions go in the
// mark's column to_reach (migrations/00018).
func MarkInsert(ctx context.Context, db DBTX, p MarkInsertParams) (int64, error) {
	var id int64
	err := db.QueryRow(ctx, `INSERT INTO mark (designation, mark_type, setting, stamping, to_reach, lat, lon, created_by)
		VALUES ($1, $2, $3, $4, $5, $6, $7, $8) RETURNING id`,
		p.Designation, p.Type, p.Setting, p.Stamping, p.Directions, p.Lat, p.Lon, p.CreatedBy).Scan(&id)
	if err != nil {
		return 0, fmt.Errorf("insert mark %s: %w", p.Designation, translate(err))
	}
	return id, nil
}

// MarkInsertManyParams are new marks made with a run: designations only,
// with no description and no position.
type MarkInsertManyParams struct {
	Designations []string
	CreatedBy    string
}

// MarkInsertMany adds the marks in one statement and returns their
// identifiers by designation; ErrAlreadyExists if a designation is taken
// (or two of them are one name once folded), and then none is added.
func MarkInsertMany(ctx context.Context, db DBTX, p MarkInsertManyParams) (map[string]int64, error) {
	rows, err := db.Query(ctx, `INSERT INTO mark (designation, mark_type, setting, stamping, to_reach, lat, lon, created_by)
		SELECT u.designation, '', '', '', '', NULL, NULL, $2 FROM unnest($1::text[]) WITH ORDINALITY AS u (designation, ord) ORDER BY u.ord
		RETURNING id, designation`, p.Designations, p.CreatedBy)
	if err != nil {
		return nil, fmt.Errorf("insert %d marks: %w", len(p.Designations), translate(err))
	}
	type made struct {
		id          int64
		designation string
	}
	ms, err := collect(rows, func(r pgx.Row) (made, error) {
		var m made
		return m, translate(r.Scan(&m.id, &m.designation))
	})
	if err != nil {
		return nil, fmt.Errorf("insert %d marks: %w", len(p.Designations), err)
	}
	ids := make(map[string]int64, len(ms))
	for _, m := range ms {
		ids[m.designation] = m.id
	}
	return ids, nil
}

// MarkGetParams names a mark.
type MarkGetParams struct {
	Designation string
	// ForUpdate locks the mark's row until the transaction ends, so writers
	// of the mark's heights take turns. It does not block condition reports.
	ForUpdate bool
}

// MarkGet returns a mark by its exact designation; ErrNotFound if none.
func MarkGet(ctx context.Context, db DBTX, p MarkGetParams) (Mark, error) {
	if p.ForUpdate {
		// Lock first, then read with the latest condition.
		if _, err := db.Exec(ctx, "SELECT 1 FROM mark WHERE designation = $1 FOR NO KEY UPDATE", p.Designation); err != nil {
			return Mark{}, translateAs(err, RolePublisher)
		}
	}
	return scanMark(db.QueryRow(ctx, "SELECT "+markColumns+markFrom+" WHERE m.designation = $1", p.Designation))
}

// MarkGetFolded returns the mark whose designation has the folded form
// folded (names.Fold: lower(normalize(designation, NFKC)) here, the
// expression of the unique index mark_designation_folded, which agrees
// with it on the designations the schema allows); ErrNotFound if none.
func MarkGetFolded(ctx context.Context, db DBTX, folded string) (Mark, error) {
	return scanMark(db.QueryRow(ctx, "SELECT "+markColumns+markFrom+" WHERE lower(normalize(m.designation, NFKC)) = $1", folded))
}

// MarkGetByAlias returns the mark one of whose aliases has the folded form
// folded (as MarkGetFolded, over the index mark_alias_folded), with
// FoundBy set to that alias; ErrNotFound if none. ForUpdate locks the
// mark's row as MarkGet does.
func MarkGetByAlias(ctx context.Context, db DBTX, folded string, forUpdate bool) (Mark, error) {
	if forUpdate {
		if _, err := db.Exec(ctx, `SELECT 1 FROM mark WHERE id = (SELECT mark_id FROM mark_alias
			WHERE lower(normalize(alias, NFKC)) = $1) FOR NO KEY UPDATE`, folded); err != nil {
			return Mark{}, translateAs(err, RolePublisher)
		}
	}
	var alias string
	m, err := scanMark(db.QueryRow(ctx, "SELECT "+markColumns+", fa.alias"+markFrom+
		" JOIN mark_alias fa ON fa.mark_id = m.id WHERE lower(normalize(fa.alias, NFKC)) = $1", folded), &alias)
	m.FoundBy = alias
	return m, err
}

// MarkIDsByNames returns the identifiers of the marks named, by name: a
// name is a mark's designation exactly, or else the folded form of one of
// its aliases (as register.mark resolves one name), looked up for every
// name in one statement. Names of no mark are absent.
func MarkIDsByNames(ctx context.Context, db DBTX, names, folded []string) (map[string]int64, error) {
	rows, err := db.Query(ctx, `SELECT u.name, coalesce(m.id, a.mark_id)
		FROM unnest($1::text[], $2::text[]) AS u (name, folded)
		LEFT JOIN mark m ON m.designation = u.name
		LEFT JOIN mark_alias a ON m.id IS NULL AND lower(normalize(a.alias, NFKC)) = u.folded
		WHERE m.id IS NOT NULL OR a.mark_id IS NOT NULL`, names, folded)
	if err != nil {
		return nil, translate(err)
	}
	type found struct {
		name string
		id   int64
	}
	got, err := collect(rows, func(r pgx.Row) (found, error) {
		var f found
		return f, translate(r.Scan(&f.name, &f.id))
	})
	if err != nil {
		return nil, err
	}
	out := make(map[string]int64, len(got))
	for _, f := range got {
		out[f.name] = f.id
	}
	return out, nil
}

// designationKey is the SQL of a mark's designation key: its folded form
// (lower(normalize(designation, NFKC)), as the unique index of 00009) with
// the punctuation - _ . / left out, in byte order (COLLATE "C"), as the
// index mark_designation_hint (migrations/00024) holds it.
const designationKey = `(translate(lower(normalize(designation, NFKC)), '-_./', '') COLLATE "C")`

// MarkDesignationsByKeyPrefix returns, in order of their keys, up to limit
// designations whose key (folded, punctuation left out: designationKey)
// starts with prefix, or of every mark if prefix is "". The prefix is a
// range scan of the index mark_designation_hint, so a register of any size
// answers in a few index pages; a caller that gets limit names back knows
// there may be more. A prefix with bytes outside printable ASCII matches
// nothing (designations are ASCII: migrations/00001).
func MarkDesignationsByKeyPrefix(ctx context.Context, db DBTX, prefix string, limit int) ([]string, error) {
	var rows pgx.Rows
	var err error
	if prefix == "" {
		rows, err = db.Query(ctx, "SELECT designation FROM mark ORDER BY "+designationKey+" LIMIT $1", limit)
	} else {
		for i := 0; i < len(prefix); i++ {
			if prefix[i] < 0x21 || prefix[i] >= 0x7e {
				return nil, nil
			}
		}
		// The keys starting with prefix are those from prefix up to, not
		// including, prefix with its last byte one higher.
		upper := prefix[:len(prefix)-1] + string(rune(prefix[len(prefix)-1]+1))
		rows, err = db.Query(ctx, "SELECT designation FROM mark WHERE "+designationKey+" >= $1 AND "+designationKey+" < $2 ORDER BY "+designationKey+" LIMIT $3",
			prefix, upper, limit)
	}
	if err != nil {
		return nil, translate(err)
	}
	return collect(rows, func(r pgx.Row) (string, error) {
		var d string
		return d, translate(r.Scan(&d))
	})
}

// MarkListParams filters a listing of marks.
type MarkListParams struct {
	// Near, if set, keeps marks within RadiusM metres of it and sorts them
	// by distance.
	Near    *LatLon
	RadiusM float64
	// Conditions, if set, keeps marks whose latest condition is one of
	// these; "unknown" matches marks with no report.
	Conditions []string
	// Name, if set (a folded name, see MarkGetFolded), keeps the mark whose
	// designation or one of whose aliases has that folded form.
	Name string
	// Limit, if more than zero, is the most marks listed: the first in the
	// listing's order, so for a near search the nearest Limit marks (ties
	// by designation), found nearest first by the GiST indexes
	// (markListNearest) rather than by sorting every mark within the
	// radius. Not with PageSize.
	Limit int
	// PageSize, if more than 0, asks for one page of at most PageSize
	// marks by designation (a near search too), those whose designation
	// comes after After: the pages of a listing too large to hold at
	// once, each answered by the index on the designation.
	PageSize int
	After    string
}

// LatLon is a position in decimal degrees.
type LatLon struct{ Lat, Lon float64 }

// MeanEarthRadiusM is the radius in metres of the sphere on which the
// register measures distances between marks (near searches): the IUGG mean
// radius R1 = (2a + b)/3 of GRS 80 (Moritz 2000, "Geodetic Reference System
// 1980", J. Geodesy 74). It is not reduce.CurvatureEarthRadiusM, the
// textbook's radius (20,906,000 ft) with which curvature and refraction are
// computed so that the textbook's table is reproduced; the two differ by
// about 0.02 %. See docs/references.md#earth-radii.
const MeanEarthRadiusM = 6371008.8

// haversineSQL is the great-circle distance in metres from ($1, $2) to the
// mark, by the haversine formula, with R = MeanEarthRadiusM:
//
//	d = 2R asin √(sin²(Δφ/2) + cos φ1 cos φ2 sin²(Δλ/2))
var haversineSQL = `2 * ` + strconv.FormatFloat(MeanEarthRadiusM, 'f', -1, 64) + ` * asin(least(1, sqrt(
	power(sin(radians(` + curLat + ` - $1) / 2), 2) +
	cos(radians($1)) * cos(radians(` + curLat + `)) * power(sin(radians(` + curLon + ` - $2) / 2), 2))))`

// MarkList lists marks with their latest condition: by designation, or by
// distance for a near search.
func MarkList(ctx context.Context, db DBTX, p MarkListParams) ([]Mark, error) {
	if p.Near != nil && p.Limit > 0 && p.PageSize == 0 {
		if ms, ok, err := markListNearest(ctx, db, p); ok || err != nil {
			return ms, err
		}
	}
	return markList(ctx, db, p, nil)
}

// markList runs markListSQL, keeping only the marks of ids if it is not
// nil.
func markList(ctx context.Context, db DBTX, p MarkListParams, ids []int64) ([]Mark, error) {
	q, args := markListSQL(p, ids)
	rows, err := db.Query(ctx, q, args...)
	if err != nil {
		return nil, translate(err)
	}
	return collect(rows, func(r pgx.Row) (Mark, error) {
		if p.Near == nil {
			return scanMark(r)
		}
		var d float64
		m, err := scanMark(r, &d)
		m.DistanceM = &d
		return m, err
	})
}

// markListSQL builds MarkList's query. A near search keeps the marks in
// the bounding boxes (answered by the GiST index mark_position), then the
// exact haversine distance decides and sorts.
func markListSQL(p MarkListParams, ids []int64) (string, []any) {
	var where []string
	var args []any
	q := "SELECT " + markColumns
	if p.Near != nil {
		args = append(args, p.Near.Lat, p.Near.Lon, p.RadiusM)
		q = "SELECT * FROM (SELECT " + markColumns + ", " + haversineSQL + " AS distance_m"
		where = append(where, curLat+" IS NOT NULL")
		if ids == nil {
			in := boxesSQL(boundingBoxes(*p.Near, p.RadiusM))
			// Candidates by either position the GiST indexes answer (the
			// mark's own and its versions'); the current one decides.
			where = append(where, "m.id IN (SELECT id FROM mark WHERE lat IS NOT NULL AND "+in+
				" UNION SELECT mark_id FROM mark_version WHERE lat IS NOT NULL AND "+in+")")
		}
	}
	from := markFrom
	if ids != nil {
		// The marks by their keys, one probe each, not a scan of mark.
		args = append(args, ids)
		from = strings.Replace(markFrom, " FROM mark m ", fmt.Sprintf(" FROM (SELECT DISTINCT unnest($%d::bigint[]) AS id) AS u JOIN mark m ON m.id = u.id ", len(args)), 1)
	}
	where, args = markFilters(p, where, args)
	q += from
	if len(where) > 0 {
		q += " WHERE " + strings.Join(where, " AND ")
	}
	if p.PageSize > 0 {
		args = append(args, p.After, p.PageSize)
		page := fmt.Sprintf("designation > $%d ORDER BY designation LIMIT $%d", len(args)-1, len(args))
		if p.Near != nil {
			return q + ") near WHERE distance_m <= $3 AND " + page, args
		}
		if len(where) > 0 {
			return q + " AND m." + page, args
		}
		return q + " WHERE m." + page, args
	}
	limit := ""
	if p.Limit > 0 {
		limit = " LIMIT " + strconv.Itoa(p.Limit)
	}
	if p.Near != nil {
		return q + ") near WHERE distance_m <= $3 ORDER BY distance_m, designation" + limit, args
	}
	return q + " ORDER BY m.designation" + limit, args
}

// markFilters appends to where and args the conditions of p.Conditions
// (on the latest condition report, joined as c) and p.Name (on mark m).
func markFilters(p MarkListParams, where []string, args []any) ([]string, []any) {
	if len(p.Conditions) > 0 {
		args = append(args, p.Conditions)
		where = append(where, fmt.Sprintf("coalesce(c.condition, 'unknown') = ANY($%d)", len(args)))
	}
	if p.Name != "" {
		args = append(args, p.Name)
		// By the unique indexes on the folded forms of both.
		where = append(where, fmt.Sprintf(`m.id IN (SELECT id FROM mark WHERE lower(normalize(designation, NFKC)) = $%d
			UNION SELECT mark_id FROM mark_alias WHERE lower(normalize(alias, NFKC)) = $%d)`, len(args), len(args)))
	}
	return where, args
}

// MarkIDsWithin returns the ids of the marks whose current position is
// within radiusM metres of c, in order of id: an area chosen by its marks'
// keys alone (the bounding boxes by the GiST indexes, then the exact
// haversine distance of the current position), without reading the
// marks' rows, conditions or aliases.
func MarkIDsWithin(ctx context.Context, db DBTX, c LatLon, radiusM float64) ([]int64, error) {
	in := boxesSQL(boundingBoxes(c, radiusM))
	rows, err := db.Query(ctx, `SELECT m.id FROM mark m LEFT JOIN LATERAL (
			SELECT mv.id, mv.lat, mv.lon FROM mark_version mv WHERE mv.mark_id = m.id ORDER BY mv.version DESC LIMIT 1
		) v ON true
		WHERE m.id IN (SELECT id FROM mark WHERE lat IS NOT NULL AND `+in+`
			UNION SELECT mark_id FROM mark_version WHERE lat IS NOT NULL AND `+in+`)
		  AND `+curLat+` IS NOT NULL AND `+haversineSQL+` <= $3
		ORDER BY m.id`, c.Lat, c.Lon, radiusM)
	if err != nil {
		return nil, translate(err)
	}
	return collect(rows, func(r pgx.Row) (int64, error) {
		var id int64
		return id, translate(r.Scan(&id))
	})
}

// boxesSQL is the condition that point(lon, lat) lies in one of boxes.
func boxesSQL(boxes [][4]float64) string {
	var in []string
	for _, b := range boxes {
		in = append(in, fmt.Sprintf("point(lon, lat) <@ box(point(%g, %g), point(%g, %g))", b[0], b[1], b[2], b[3]))
	}
	return "(" + strings.Join(in, " OR ") + ")"
}

// nearestSQL reads, for centre ($1, $2) as (lon, lat), the first $3
// positions in order of their plane distance in degrees: the marks' own
// (GiST index mark_position) and their versions' (mark_version_position),
// each index read nearest first. No box bounds them: with one, the
// planner, which takes a box to hold a fixed few rows, read every
// position in the box and sorted them (at 100,000 marks, 2,382 positions
// of a 50 km box for the nearest 50: 6.5 ms; docs/performance.md), and
// the radius is markList's to apply, to the marks' current positions.
func nearestSQL() string {
	return `SELECT id, pd FROM (
		(SELECT id, point(lon, lat) <-> point($1, $2) AS pd FROM mark WHERE lat IS NOT NULL
			ORDER BY point(lon, lat) <-> point($1, $2) LIMIT $3)
		UNION ALL
		(SELECT mark_id, point(lon, lat) <-> point($1, $2) FROM mark_version WHERE lat IS NOT NULL
			ORDER BY point(lon, lat) <-> point($1, $2) LIMIT $3)
	) AS c ORDER BY pd LIMIT $3`
}

// markListNearest answers a near search with a limit nearest first, by
// the GiST indexes' ordering by distance (point <-> point), so that the
// nearest 50 of 15,000 marks in a city are some 50 index entries rather
// than 15,000 rows sorted. The indexes order by the plane distance in
// degrees, δ = √(Δλ² + Δφ²), not by the great-circle distance, so it reads
// positions (the marks' own and their versions', as markListSQL's
// candidates) in order of δ, the first n of them, computes the exact
// distances of their marks' current positions, and checks that no mark it
// left out could be nearer: every point within d of the centre lies in
// boundingBoxes(centre, d), so within δ of the farthest corner of that
// box; if the n-th position read is further than that, for d the distance
// of the last mark kept (or the radius, when fewer are found), nothing
// was missed. Otherwise it reads four times as many and tries again. ok
// is false for a circle that crosses ±180° or holds a pole, where the
// plane distance in degrees is no guide: MarkList then sorts every mark
// within the radius.
func markListNearest(ctx context.Context, db DBTX, p MarkListParams) (ms []Mark, ok bool, err error) {
	c := *p.Near
	reach := func(d float64) (float64, bool) {
		b := boundingBoxes(c, d)
		if len(b) != 1 || b[0][0] <= -180 && b[0][2] >= 180 {
			return 0, false
		}
		dLon := math.Max(math.Abs(b[0][0]-c.Lon), math.Abs(b[0][2]-c.Lon))
		dLat := math.Max(math.Abs(b[0][1]-c.Lat), math.Abs(b[0][3]-c.Lat))
		return math.Hypot(dLon, dLat), true
	}
	if _, ok := reach(p.RadiusM); !ok {
		return nil, false, nil
	}
	q := nearestSQL()
	for n := nearestFirstRead(c, p.Limit); ; n *= 4 {
		rows, err := db.Query(ctx, q, c.Lon, c.Lat, n)
		if err != nil {
			return nil, true, translate(err)
		}
		type cand struct {
			id int64
			pd float64
		}
		cands, err := collect(rows, func(r pgx.Row) (cand, error) {
			var x cand
			return x, translate(r.Scan(&x.id, &x.pd))
		})
		if err != nil {
			return nil, true, err
		}
		ids := make([]int64, 0, len(cands))
		seen := make(map[int64]bool, len(cands))
		for _, x := range cands {
			if !seen[x.id] {
				ids, seen[x.id] = append(ids, x.id), true
			}
		}
		if ms, err = markListNearestOf(ctx, db, p, ids); err != nil {
			return nil, true, err
		}
		if len(cands) < n {
			return ms, true, nil // every position was read
		}
		d := p.RadiusM
		if len(ms) == p.Limit {
			d = *ms[len(ms)-1].DistanceM
		}
		if r, _ := reach(d); r < cands[len(cands)-1].pd {
			return ms, true, nil
		}
	}
}

// nearestFirstRead is how many positions markListNearest reads first
// for the nearest limit marks of c, so that one read nearly always
// proves itself complete. Of marks spread evenly, the limit within
// distance d fill an ellipse of semi-axes a = d/(R cos φ) and b = d/R in
// degrees of longitude and latitude; the read must reach the corner of
// their box, √(a² + b²), a circle holding (a² + b²)/(ab) = 1/cos φ + cos φ
// times as many (2 at the equator, 2.1 at 40°, 2.5 at 60°); and a mark
// that has a later description is read twice, by its own position and its
// version's. Measured at 1,000,000 marks, 40.7° N, every mark with a
// version: the nearest 50 needed 206 positions, and the 200 read first
// (4 a mark kept) were not enough, so every such search read 800 more.
func nearestFirstRead(c LatLon, limit int) int {
	cos := math.Cos(c.Lat * math.Pi / 180)
	if cos < 0.1 {
		cos = 0.1
	}
	return max(int(math.Ceil(2.5*float64(limit)*(1/cos+cos))), 64)
}

// markListNearestOf lists the nearest p.Limit of the marks of ids within
// p.RadiusM of p.Near (and of p.Conditions and p.Name, if set), nearest
// first, ties by designation, as markList would with those ids: it keeps
// them by their current positions alone (the mark's key, its latest
// version's position, and its latest condition only if p.Conditions asks
// for one), and reads the whole rows (descriptions, conditions, aliases,
// retirements) of only the marks it keeps. markList read them for every
// candidate, some four times as many marks as it keeps.
func markListNearestOf(ctx context.Context, db DBTX, p MarkListParams, ids []int64) ([]Mark, error) {
	args := []any{p.Near.Lat, p.Near.Lon, p.RadiusM, ids}
	cond := ""
	where := []string{curLat + " IS NOT NULL"}
	if len(p.Conditions) > 0 {
		cond = ` LEFT JOIN LATERAL (
			SELECT mc.condition FROM mark_condition mc WHERE mc.mark_id = m.id ORDER BY mc.observed_on DESC, mc.id DESC LIMIT 1
		) c ON true`
	}
	where, args = markFilters(p, where, args)
	kept := `SELECT * FROM (SELECT m.id, m.designation, ` + haversineSQL + ` AS distance_m
		FROM (SELECT DISTINCT unnest($4::bigint[]) AS id) AS u JOIN mark m ON m.id = u.id LEFT JOIN LATERAL (
			SELECT mv.id, mv.lat, mv.lon FROM mark_version mv WHERE mv.mark_id = m.id ORDER BY mv.version DESC LIMIT 1
		) v ON true` + cond + `
		WHERE ` + strings.Join(where, " AND ") + `) near
		WHERE distance_m <= $3 ORDER BY distance_m, designation LIMIT ` + strconv.Itoa(p.Limit)
	q := "SELECT " + markColumns + ", n.distance_m" +
		strings.Replace(markFrom, " FROM mark m ", " FROM ("+kept+") AS n JOIN mark m ON m.id = n.id ", 1) +
		" ORDER BY n.distance_m, m.designation"
	rows, err := db.Query(ctx, q, args...)
	if err != nil {
		return nil, translate(err)
	}
	return collect(rows, func(r pgx.Row) (Mark, error) {
		var d float64
		m, err := scanMark(r, &d)
		m.DistanceM = &d
		return m, err
	})
}

// boundingBoxes returns boxes (lon1, lat1, lon2, lat2, in degrees) that
// together hold every point within r metres of c on the sphere. The latitude
// band is φ ± r/R; the longitude half-width is asin(sin(r/R) / cos φ), the
// widest a small circle reaches (it is the whole circle of longitude when
// the circle holds a pole). A box that crosses ±180° is split in two.
func boundingBoxes(c LatLon, r float64) [][4]float64 {
	a := r / MeanEarthRadiusM // angular radius, radians
	dLat := a * 180 / math.Pi
	lat1, lat2 := c.Lat-dLat, c.Lat+dLat
	if lat1 <= -90 || lat2 >= 90 || math.Sin(a) >= math.Cos(c.Lat*math.Pi/180) {
		return [][4]float64{{-180, math.Max(lat1, -90), 180, math.Min(lat2, 90)}}
	}
	dLon := math.Asin(math.Sin(a)/math.Cos(c.Lat*math.Pi/180)) * 180 / math.Pi
	// A hair wider, so rounding never drops a mark on the edge.
	dLon, lat1, lat2 = dLon*(1+1e-9)+1e-9, lat1-1e-9, lat2+1e-9
	lon1, lon2 := c.Lon-dLon, c.Lon+dLon
	switch {
	case lon1 < -180:
		return [][4]float64{{lon1 + 360, lat1, 180, lat2}, {-180, lat1, lon2, lat2}}
	case lon2 > 180:
		return [][4]float64{{lon1, lat1, 180, lat2}, {-180, lat1, lon2 - 360, lat2}}
	}
	return [][4]float64{{lon1, lat1, lon2, lat2}}
}

// MarkListByDesignations returns the marks with the given designations
// (those that exist), each with its latest condition report.
func MarkListByDesignations(ctx context.Context, db DBTX, designations []string) ([]Mark, error) {
	rows, err := db.Query(ctx, "SELECT "+markColumns+strings.Replace(markFrom, " FROM mark m ",
		" FROM (SELECT DISTINCT unnest($1::text[]) AS designation) AS u JOIN mark m ON m.designation = u.designation ", 1)+" ORDER BY m.designation", designations)
	if err != nil {
		return nil, translate(err)
	}
	return collect(rows, func(r pgx.Row) (Mark, error) { return scanMark(r) })
}

// MarkLock locks the rows of the given marks, in order of identifier so
// that writers locking overlapping sets never deadlock, until the
// transaction ends. It takes the lock HeightSet takes for one mark.
func MarkLock(ctx context.Context, db DBTX, markIDs []int64) error {
	_, err := db.Exec(ctx, `SELECT 1 FROM (SELECT DISTINCT unnest($1::bigint[]) AS id) AS u JOIN mark m ON m.id = u.id
		ORDER BY m.id FOR NO KEY UPDATE OF m`, markIDs)
	return translateAs(err, RolePublisher)
}

// MarkListByFolded returns the marks whose folded designations are among
// folded (see MarkGetFolded), each with its latest condition report.
func MarkListByFolded(ctx context.Context, db DBTX, folded []string) ([]Mark, error) {
	rows, err := db.Query(ctx, "SELECT "+markColumns+strings.Replace(markFrom, " FROM mark m ",
		" FROM (SELECT DISTINCT unnest($1::text[]) AS folded) AS u JOIN mark m ON lower(normalize(m.designation, NFKC)) = u.folded ", 1)+" ORDER BY m.designation", folded)
	if err != nil {
		return nil, translate(err)
	}
	return collect(rows, func(r pgx.Row) (Mark, error) { return scanMark(r) })
}

// MarkEarliestRecord returns, for each of the marks that has one, the
// earliest date the register has a record of it in the field: the earliest
// of its condition reports' dates observed and of the dates of the runs
// that touched it (voided ones too: the mark was there).
func MarkEarliestRecord(ctx context.Context, db DBTX, markIDs []int64) (map[int64]time.Time, error) {
	rows, err := db.Query(ctx, `SELECT mark_id, min(d) FROM (
		SELECT c.mark_id, c.observed_on AS d FROM unnest($1::bigint[]) AS u (mark_id) JOIN mark_condition c ON c.mark_id = u.mark_id
		UNION ALL
		SELECT rm.mark_id, r.observed_on FROM unnest($1::bigint[]) AS u (mark_id) JOIN run_mark rm ON rm.mark_id = u.mark_id
		JOIN run r ON r.id = rm.run_id
		WHERE r.observed_on IS NOT NULL
	) AS records GROUP BY mark_id`, markIDs)
	if err != nil {
		return nil, translate(err)
	}
	type first struct {
		id int64
		on time.Time
	}
	list, err := collect(rows, func(r pgx.Row) (first, error) {
		var f first
		return f, translate(r.Scan(&f.id, &f.on))
	})
	if err != nil {
		return nil, err
	}
	out := make(map[int64]time.Time, len(list))
	for _, f := range list {
		out[f.id] = f.on
	}
	return out, nil
}

// MarkCount is the number of marks in the register.
func MarkCount(ctx context.Context, db DBTX) (int64, error) {
	var n int64
	err := db.QueryRow(ctx, "SELECT count(*) FROM mark").Scan(&n)
	return n, translate(err)
}

// MarkPositions returns the current position of each of the marks that
// has one, by the mark's identifier.
func MarkPositions(ctx context.Context, db DBTX, markIDs []int64) (map[int64]LatLon, error) {
	rows, err := db.Query(ctx, `SELECT m.id, `+curLat+`, `+curLon+` FROM mark m LEFT JOIN LATERAL (
		SELECT * FROM mark_version mv WHERE mv.mark_id = m.id ORDER BY mv.version DESC LIMIT 1
	) v ON true WHERE m.id = ANY($1) AND `+curLat+` IS NOT NULL`, markIDs)
	if err != nil {
		return nil, translate(err)
	}
	type pos struct {
		id int64
		ll LatLon
	}
	list, err := collect(rows, func(r pgx.Row) (pos, error) {
		var p pos
		return p, translate(r.Scan(&p.id, &p.ll.Lat, &p.ll.Lon))
	})
	if err != nil {
		return nil, err
	}
	out := make(map[int64]LatLon, len(list))
	for _, p := range list {
		out[p.id] = p.ll
	}
	return out, nil
}

// BBox is a box of longitude and latitude in decimal degrees (WGS 84, as
// OGC API – Features' bbox: west, south, east, north). West greater than
// East is a box across the antimeridian.
type BBox struct{ West, South, East, North float64 }

// MarkPageParams ask for one page of marks in designation order.
type MarkPageParams struct {
	// BBox, if set, keeps the marks whose current position is in it.
	BBox *BBox
	// After, if set, starts the page after this designation (keyset
	// paging: the next page of a listing is the marks after its last).
	After string
	// Limit is the most marks returned.
	Limit int
}

// MarkPage returns up to p.Limit marks after p.After by designation, in
// p.BBox when given, each with its latest condition. The unique index on
// the designation serves the order and the start; a box is answered by
// the GiST indexes on the positions (the mark's own and its versions'),
// and the current position decides.
func MarkPage(ctx context.Context, db DBTX, p MarkPageParams) ([]Mark, error) {
	q, args := markPageSQL(p)
	rows, err := db.Query(ctx, q, args...)
	if err != nil {
		return nil, translate(err)
	}
	return collect(rows, func(r pgx.Row) (Mark, error) { return scanMark(r) })
}

// markPageSQL builds MarkPage's query.
func markPageSQL(p MarkPageParams) (string, []any) {
	args := []any{p.After, p.Limit}
	q := "SELECT " + markColumns + markFrom + " WHERE m.designation > $1"
	if b := p.BBox; b != nil {
		var boxes [][4]float64
		if b.West <= b.East {
			boxes = [][4]float64{{b.West, b.South, b.East, b.North}}
		} else {
			boxes = [][4]float64{{b.West, b.South, 180, b.North}, {-180, b.South, b.East, b.North}}
		}
		var in []string
		for i, x := range boxes {
			args = append(args, x[0], x[1], x[2], x[3])
			n := 3 + 4*i
			in = append(in, fmt.Sprintf("point(lon, lat) <@ box(point($%d, $%d), point($%d, $%d))", n, n+1, n+2, n+3))
		}
		cur := fmt.Sprintf("point(%s, %s) <@ box(point($%d, $%d), point($%d, $%d))", curLon, curLat, 3, 4, 5, 6)
		if len(boxes) == 2 {
			cur = "(" + cur + " OR " + fmt.Sprintf("point(%s, %s) <@ box(point($%d, $%d), point($%d, $%d))", curLon, curLat, 7, 8, 9, 10) + ")"
		}
		ors := "(" + strings.Join(in, " OR ") + ")"
		q += " AND " + curLat + " IS NOT NULL AND " + cur + " AND m.id IN (SELECT id FROM mark WHERE lat IS NOT NULL AND " + ors +
			" UNION SELECT mark_id FROM mark_version WHERE lat IS NOT NULL AND " + ors + ")"
	}
	return q + " ORDER BY m.designation LIMIT $2", args
}
