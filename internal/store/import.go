package store

import (
	"context"
	"encoding/json"
	"fmt"
	"time"

	"github.com/jackc/pgx/v5"
)

// Import staging (migrations/00019): rows are copied into the unlogged
// tables of schema cairn_staging, keyed by the importing transaction, and
// deleted before it ends.

// StageMarkColumns, StageConditionColumns and StageHeightColumns are the
// columns a caller's rows give, in order, to StageCopy.
var (
	StageMarkColumns = []string{"line", "designation", "folded", "aliases", "alias_kinds", "alias_agencies",
		"mark_type", "setting", "stamping", "directions", "description", "lat", "lon", "position_source", "by",
		"retired_on", "retired_reason", "retired_by", "replaced_by", "replaced_folded"}
	StageConditionColumns   = []string{"line", "mark", "folded", "observed_on", "condition", "note", "by", "ref"}
	StageDescriptionColumns = []string{"line", "mark", "folded", "mark_type", "setting", "stamping", "directions", "description",
		"lat", "lon", "position_source", "reason", "by"}
	StageAliasColumns  = []string{"line", "mark", "folded", "alias", "alias_folded", "kind", "agency", "note", "by"}
	StagePhotoColumns  = []string{"line", "condition", "view", "media_type", "file_name", "content", "sha256", "by"}
	StageHeightColumns = []string{"line", "mark", "folded", "datum", "kind", "value", "unit", "decimals",
		"class", "in_force_from", "source", "reason", "by"}
)

// StageTables are the staging tables, by the kind of row each holds.
var StageTables = []string{"mark", "description", "alias", "condition", "photo", "height"}

// StageCopy copies the rows next gives (nil, nil at the end) into staging
// table (one of StageTables) with one COPY; next is called
// as COPY reads, so the rows are never all held.
func StageCopy(ctx context.Context, db Copier, table string, columns []string, next func() ([]any, error)) (int64, error) {
	n, err := db.CopyFrom(ctx, pgx.Identifier{"cairn_staging", "import_" + table}, columns, pgx.CopyFromFunc(next))
	if err != nil {
		return n, fmt.Errorf("copy into staging %s: %w", table, translate(err))
	}
	return n, nil
}

// StageProblem is a problem a set-based check found in staged rows.
type StageProblem struct {
	Kind  string // one of StageTables
	Line  int64
	Field string
	Msg   string
}

// StageCheck runs the checks of staged rows against each other and the
// register: a designation or alias taken or given twice, a mark or datum
// that neither the register nor the import has. All problems, by kind and
// line.
func StageCheck(ctx context.Context, db DBTX) ([]StageProblem, error) {
	rows, err := db.Query(ctx, `
WITH s AS (SELECT * FROM cairn_staging.import_mark WHERE import_xid = pg_current_xact_id()),
-- Every alias the import gives: of the marks file's aliases column, and
-- of aliases.csv (kind alias); ord orders them as they are written.
a AS (SELECT 'mark' AS kind, s.line, 0 AS ord, u.alias, lower(normalize(u.alias, NFKC)) AS folded
        FROM s, unnest(s.aliases) AS u (alias)
      UNION ALL
      SELECT 'alias', x.line, 1, x.alias, x.alias_folded
        FROM cairn_staging.import_alias x WHERE x.import_xid = pg_current_xact_id()),
-- A name the register or the import gives a mark: a mark named in the
-- other files is found by its designation or by an alias.
known AS (SELECT lower(normalize(m.designation, NFKC)) AS folded FROM mark m
          UNION ALL SELECT lower(normalize(x.alias, NFKC)) FROM mark_alias x
          UNION ALL SELECT s.folded FROM s
          UNION ALL SELECT a.folded FROM a),
c AS (SELECT * FROM cairn_staging.import_condition WHERE import_xid = pg_current_xact_id())
SELECT 'mark', s.line, 'designation', 'mark ' || m.designation || ' is in the register already'
  FROM s JOIN mark m ON lower(normalize(m.designation, NFKC)) = s.folded
UNION ALL
SELECT 'mark', s.line, 'designation', 'designation ' || s.designation || ' is an alias of mark ' || m.designation
  FROM s JOIN mark_alias x ON lower(normalize(x.alias, NFKC)) = s.folded JOIN mark m ON m.id = x.mark_id
UNION ALL
SELECT 'mark', s.line, 'designation', s.designation || ' is given also on line ' || o.line
  FROM s JOIN s o ON o.folded = s.folded AND o.line < s.line
UNION ALL
SELECT a.kind, a.line, CASE a.kind WHEN 'mark' THEN 'aliases' ELSE 'alias' END, 'alias ' || a.alias || ' is a name of mark ' || m.designation || ' in the register already'
  FROM a JOIN (SELECT id, designation, lower(normalize(designation, NFKC)) AS folded FROM mark
               UNION ALL SELECT x.mark_id, mm.designation, lower(normalize(x.alias, NFKC)) FROM mark_alias x JOIN mark mm ON mm.id = x.mark_id) m
    ON m.folded = a.folded
UNION ALL
SELECT a.kind, a.line, CASE a.kind WHEN 'mark' THEN 'aliases' ELSE 'alias' END, 'alias ' || a.alias || ' is also ' ||
       CASE WHEN a.rn > 1 THEN 'an alias on line ' || a.first_line || CASE WHEN a.first_kind <> a.kind THEN ' of ' || CASE a.first_kind WHEN 'mark' THEN 'the marks file' ELSE 'aliases.csv' END ELSE '' END
            ELSE 'the designation on line ' || d.line || CASE WHEN a.kind = 'alias' THEN ' of the marks file' ELSE '' END END
  FROM (SELECT a.*, row_number() OVER w AS rn, first_value(a.line) OVER w AS first_line, first_value(a.kind) OVER w AS first_kind
          FROM a WINDOW w AS (PARTITION BY a.folded ORDER BY a.ord, a.line)) a
  LEFT JOIN s d ON d.folded = a.folded
 WHERE a.rn > 1 OR d.line IS NOT NULL
UNION ALL
SELECT 'mark', s.line, 'replaced_by', 'no mark ' || s.replaced_by || ' in the register or in the marks file'
  FROM s WHERE s.replaced_folded <> '' AND NOT EXISTS (SELECT 1 FROM known k WHERE k.folded = s.replaced_folded)
UNION ALL
SELECT 'mark', s.line, 'replaced_by', 'mark ' || s.replaced_by || ' replaces also the mark of line ' || o.line || ': a mark replaces at most one'
  FROM s JOIN s o ON o.replaced_folded = s.replaced_folded AND o.line < s.line WHERE s.replaced_folded <> ''
UNION ALL
SELECT 'condition', c.line, 'mark', 'no mark ' || c.mark || ' in the register or in the marks file'
  FROM c WHERE NOT EXISTS (SELECT 1 FROM known k WHERE k.folded = c.folded)
UNION ALL
SELECT 'condition', r.line, 'ref', 'ref ' || r.ref || ' is given also on line ' || r.first_line
  FROM (SELECT c.line, c.ref, row_number() OVER w AS rn, first_value(c.line) OVER w AS first_line
          FROM c WHERE c.ref <> '' WINDOW w AS (PARTITION BY c.ref ORDER BY c.line)) r
 WHERE r.rn > 1
UNION ALL
SELECT 'description', d.line, 'mark', 'no mark ' || d.mark || ' in the register or in the marks file'
  FROM cairn_staging.import_description d
 WHERE d.import_xid = pg_current_xact_id() AND NOT EXISTS (SELECT 1 FROM known k WHERE k.folded = d.folded)
UNION ALL
SELECT 'alias', x.line, 'mark', 'no mark ' || x.mark || ' in the register or in the marks file'
  FROM cairn_staging.import_alias x
 WHERE x.import_xid = pg_current_xact_id()
   AND NOT EXISTS (SELECT 1 FROM mark m WHERE lower(normalize(m.designation, NFKC)) = x.folded)
   AND NOT EXISTS (SELECT 1 FROM mark_alias y WHERE lower(normalize(y.alias, NFKC)) = x.folded)
   AND NOT EXISTS (SELECT 1 FROM s WHERE s.folded = x.folded)
UNION ALL
SELECT 'photo', p.line, 'condition', 'no condition report with ref ' || p.condition || ' in conditions.csv'
  FROM cairn_staging.import_photo p
 WHERE p.import_xid = pg_current_xact_id() AND NOT EXISTS (SELECT 1 FROM c WHERE c.ref = p.condition)
UNION ALL
SELECT 'height', h.line, 'mark', 'no mark ' || h.mark || ' in the register or in the marks file'
  FROM cairn_staging.import_height h
 WHERE h.import_xid = pg_current_xact_id() AND NOT EXISTS (SELECT 1 FROM known k WHERE k.folded = h.folded)
UNION ALL
SELECT 'height', h.line, 'datum', 'no datum ' || h.datum || ' in the register (cairn datum list)'
  FROM cairn_staging.import_height h
 WHERE h.import_xid = pg_current_xact_id() AND NOT EXISTS (SELECT 1 FROM datum d WHERE d.code = h.datum)
ORDER BY 1, 2, 3`)
	if err != nil {
		return nil, fmt.Errorf("check staged rows: %w", translate(err))
	}
	return collect(rows, func(row pgx.Row) (StageProblem, error) {
		var p StageProblem
		return p, row.Scan(&p.Kind, &p.Line, &p.Field, &p.Msg)
	})
}

// ImportFile is one file an import read.
type ImportFile struct {
	Name   string `json:"name"`
	SHA256 string `json:"sha256"` // hex
	Rows   int64  `json:"rows"`
}

// ImportEvent is a recorded import.
type ImportEvent struct {
	ID         int64
	Source     string
	Files      []ImportFile
	RecordedBy string
	RecordedAt time.Time
}

func scanImportEvent(row pgx.Row) (ImportEvent, error) {
	var e ImportEvent
	var files []byte
	if err := row.Scan(&e.ID, &e.Source, &files, &e.RecordedBy, &e.RecordedAt); err != nil {
		return e, translate(err)
	}
	return e, json.Unmarshal(files, &e.Files)
}

const importEventColumns = "e.id, e.source, e.files, e.recorded_by, e.recorded_at"

// ImportEventWithFile returns the earliest import that read a file of
// SHA-256 sha (hex); ErrNotFound if none.
func ImportEventWithFile(ctx context.Context, db DBTX, sha string) (ImportEvent, error) {
	return scanImportEvent(db.QueryRow(ctx, "SELECT "+importEventColumns+` FROM import_event e
		WHERE e.files @> jsonb_build_array(jsonb_build_object('sha256', $1::text)) ORDER BY e.id LIMIT 1`, sha))
}

// ImportEventOfXact returns the import made by the transaction that
// wrote a row with created_xid xid; ErrNotFound if it was not an import.
func ImportEventOfXact(ctx context.Context, db DBTX, xid uint64) (ImportEvent, error) {
	return scanImportEvent(db.QueryRow(ctx, "SELECT "+importEventColumns+
		" FROM import_event e WHERE e.created_xid = $1::text::xid8", fmt.Sprint(xid)))
}

// ImportEventOfHeight returns the import that wrote height version id;
// ErrNotFound if it was not imported.
func ImportEventOfHeight(ctx context.Context, db DBTX, heightID int64) (ImportEvent, error) {
	return scanImportEvent(db.QueryRow(ctx, "SELECT "+importEventColumns+
		" FROM import_event e JOIN height h ON h.created_xid = e.created_xid WHERE h.id = $1", heightID))
}

// ImportEventInsertParams are the fields of a new import.
type ImportEventInsertParams struct {
	Source     string
	Files      []ImportFile
	RecordedBy string
}

// ImportEventInsert records an import; its id.
func ImportEventInsert(ctx context.Context, db DBTX, p ImportEventInsertParams) (int64, error) {
	files, err := json.Marshal(p.Files)
	if err != nil {
		return 0, err
	}
	var id int64
	err = db.QueryRow(ctx, "INSERT INTO import_event (source, files, recorded_by) VALUES ($1, $2::jsonb, $3) RETURNING id",
		p.Source, string(files), p.RecordedBy).Scan(&id)
	if err != nil {
		return 0, fmt.Errorf("insert import event: %w", translate(err))
	}
	return id, nil
}

// ImportCounts are the rows an import wrote.
type ImportCounts struct {
	Marks, Versions, Aliases, Conditions, Photos, Heights, Retirements int64
}

// StageApply inserts the staged rows into the register, through its
// triggers: marks (and a second version where the marks file gives a
// description or position source, with reason), their aliases (of the
// marks file, then of aliases.csv), the later versions of descriptions,
// condition reports and their photographs, then heights chain by chain,
// one statement per place in a chain (the k-th version of every mark and
// datum supersedes the latest), each set in line order, each place
// written at a time after the one before it; retirements last. Then it
// deletes the staged rows. eventID is the import's record, written in the
// same transaction.
func StageApply(ctx context.Context, db DBTX, eventID int64, reason string) (ImportCounts, error) {
	var c ImportCounts
	exec := func(n *int64, what, sql string, args ...any) error {
		tag, err := db.Exec(ctx, sql, args...)
		if err != nil {
			return fmt.Errorf("import %s: %w", what, translate(err))
		}
		if n != nil {
			*n += tag.RowsAffected()
		}
		return nil
	}
	if err := exec(&c.Marks, "marks", `INSERT INTO mark (designation, mark_type, setting, stamping, to_reach, lat, lon, created_by)
		SELECT designation, mark_type, setting, stamping, directions, lat, lon, by FROM cairn_staging.import_mark
		 WHERE import_xid = pg_current_xact_id() ORDER BY line`); err != nil {
		return c, err
	}
	if err := exec(&c.Versions, "mark descriptions", `INSERT INTO mark_version (mark_id, mark_type, setting, stamping, directions,
			description, lat, lon, position_source, reason, recorded_by)
		SELECT m.id, s.mark_type, s.setting, s.stamping, s.directions, s.description, s.lat, s.lon, s.position_source, $1, s.by
		  FROM cairn_staging.import_mark s JOIN mark m ON m.designation = s.designation
		 WHERE s.import_xid = pg_current_xact_id() AND (s.description <> '' OR s.position_source <> '') ORDER BY s.line`, reason); err != nil {
		return c, err
	}
	if err := exec(&c.Aliases, "aliases", `INSERT INTO mark_alias (mark_id, alias, kind, agency, recorded_by)
		SELECT m.id, u.alias, u.kind, u.agency, s.by
		  FROM cairn_staging.import_mark s JOIN mark m ON m.designation = s.designation,
		       unnest(s.aliases, s.alias_kinds, s.alias_agencies) WITH ORDINALITY AS u (alias, kind, agency, ord)
		 WHERE s.import_xid = pg_current_xact_id() ORDER BY s.line, u.ord`); err != nil {
		return c, err
	}
	// A mark named in another file by its designation or an alias.
	const markOf = `(SELECT m.id FROM mark m WHERE lower(normalize(m.designation, NFKC)) = %[1]s.folded
		UNION ALL SELECT x.mark_id FROM mark_alias x WHERE lower(normalize(x.alias, NFKC)) = %[1]s.folded LIMIT 1)`
	if err := exec(&c.Aliases, "aliases", fmt.Sprintf(`INSERT INTO mark_alias (mark_id, alias, kind, agency, note, recorded_by)
		SELECT `+markOf+`, sa.alias, sa.kind, sa.agency, sa.note, sa.by FROM cairn_staging.import_alias sa
		 WHERE sa.import_xid = pg_current_xact_id() ORDER BY sa.line`, "sa")); err != nil {
		return c, err
	}
	// Later versions of a description, after the marks file's own, in
	// line order: the trigger numbers each mark's versions as they come.
	if err := exec(&c.Versions, "mark descriptions", fmt.Sprintf(`INSERT INTO mark_version (mark_id, mark_type, setting, stamping, directions,
			description, lat, lon, position_source, reason, recorded_by)
		SELECT `+markOf+`, d.mark_type, d.setting, d.stamping, d.directions, d.description, d.lat, d.lon, d.position_source, d.reason, d.by
		  FROM cairn_staging.import_description d WHERE d.import_xid = pg_current_xact_id() ORDER BY d.line`, "d")); err != nil {
		return c, err
	}
	if err := exec(&c.Conditions, "condition reports", fmt.Sprintf(`INSERT INTO mark_condition (mark_id, condition, note, observed_on, recorded_by)
		SELECT `+markOf+`, c.condition, c.note, c.observed_on, c.by FROM cairn_staging.import_condition c
		 WHERE c.import_xid = pg_current_xact_id() ORDER BY c.line`, "c")); err != nil {
		return c, err
	}
	// Photographs: the reports were inserted in line order, so the n-th
	// report this transaction wrote (by id) is the n-th staged one (by
	// line); the join checks the mark and date as well, and a photograph
	// left without its report fails the import.
	var staged int64
	if err := db.QueryRow(ctx, `SELECT count(*) FROM cairn_staging.import_photo WHERE import_xid = pg_current_xact_id()`).Scan(&staged); err != nil {
		return c, fmt.Errorf("import photographs: %w", translate(err))
	}
	if staged > 0 {
		if err := exec(&c.Photos, "photographs", fmt.Sprintf(`WITH mine AS (
				SELECT id, mark_id, observed_on, row_number() OVER (ORDER BY id) AS n FROM mark_condition
				 WHERE created_xid = (SELECT e.created_xid FROM import_event e WHERE e.id = $1)),
			staged AS (
				SELECT c.ref, c.observed_on, `+markOf+` AS mark_id, row_number() OVER (ORDER BY c.line) AS n
				  FROM cairn_staging.import_condition c WHERE c.import_xid = pg_current_xact_id())
			INSERT INTO condition_photo (condition_id, view, media_type, file_name, content, sha256, recorded_by)
			SELECT mine.id, p.view, p.media_type, p.file_name, p.content, p.sha256, p.by
			  FROM cairn_staging.import_photo p
			  JOIN staged ON staged.ref = p.condition
			  JOIN mine ON mine.n = staged.n AND mine.mark_id = staged.mark_id AND mine.observed_on = staged.observed_on
			 WHERE p.import_xid = pg_current_xact_id() ORDER BY p.line`, "c"), eventID); err != nil {
			return c, err
		}
		if c.Photos != staged {
			return c, fmt.Errorf("import photographs: %d of %d found their condition report; nothing was written", c.Photos, staged)
		}
	}
	for k := 1; ; k++ {
		if k > 1 {
			// A chain's versions are recorded at strictly later times
			// (height_before_insert, the audit): each place after the first
			// takes the server's clock now as the time of its writes,
			// microseconds after the last.
			if err := exec(nil, "heights", `SELECT set_config('cairn.write_time',
				to_char(greatest(clock_timestamp(), cairn_write_time() + interval '1 microsecond') AT TIME ZONE 'UTC', 'YYYY-MM-DD"T"HH24:MI:SS.US'), true)`); err != nil {
				return c, err
			}
		}
		var n int64
		if err := exec(&n, "heights", fmt.Sprintf(`INSERT INTO height (mark_id, datum_id, supersedes, value, unit, decimals, class,
				source_kind, source, reason, recorded_by, in_force_from)
			SELECT r.mark_id, d.id,
			       (SELECT h.id FROM height h WHERE h.mark_id = r.mark_id AND h.datum_id = d.id ORDER BY h.version DESC LIMIT 1),
			       r.value::numeric, r.unit, r.decimals, r.class, r.kind, r.source, r.reason, r.by, r.in_force_from
			  FROM (SELECT s.*, `+markOf+` AS mark_id,
			               row_number() OVER (PARTITION BY s.folded, s.datum ORDER BY s.line) AS place
			          FROM cairn_staging.import_height s WHERE s.import_xid = pg_current_xact_id()) r
			  JOIN datum d ON d.code = r.datum
			 WHERE r.place = $1 ORDER BY r.line`, "s"), k); err != nil {
			return c, err
		}
		if n == 0 {
			break
		}
		c.Heights += n
	}
	// Retirements last, in line order: a mark that replaced another may
	// itself be retired by a later line.
	if err := exec(&c.Retirements, "retirements", fmt.Sprintf(`INSERT INTO mark_retirement (mark_id, replaced_by, retired_on, reason, recorded_by)
		SELECT m.id, CASE WHEN s.folded <> '' THEN `+markOf+` END, s.retired_on, s.retired_reason, CASE WHEN s.retired_by <> '' THEN s.retired_by ELSE s.by END
		  FROM (SELECT line, designation, retired_on, retired_reason, retired_by, by, replaced_folded AS folded FROM cairn_staging.import_mark WHERE import_xid = pg_current_xact_id() AND retired_on IS NOT NULL) s
		  JOIN mark m ON m.designation = s.designation ORDER BY s.line`, "s")); err != nil {
		return c, err
	}
	for _, t := range StageTables {
		if err := StageClear(ctx, db, t); err != nil {
			return c, err
		}
	}
	return c, nil
}

// StageClear deletes this transaction's staged rows of table.
func StageClear(ctx context.Context, db DBTX, table string) error {
	_, err := db.Exec(ctx, "DELETE FROM "+pgx.Identifier{"cairn_staging", "import_" + table}.Sanitize()+" WHERE import_xid = pg_current_xact_id()")
	if err != nil {
		return fmt.Errorf("clear staging %s: %w", table, translate(err))
	}
	return nil
}
