package store

import (
	"context"
	"fmt"
)

// The queries of an export (docs/import.md): each row as the text of its
// columns, in the order of the layout's export header, NULL as "".
const (
	// A mark as first recorded (version 1, the mark's own row), and its
	// retirement.
	exportMarksSQL = `SELECT m.designation, m.mark_type, m.setting, m.stamping, m.to_reach,
	m.lat::text, m.lon::text, m.created_by,
	to_char(ret.retired_on, 'YYYY-MM-DD'), coalesce(ret.reason, ''), coalesce(ret.recorded_by, ''), coalesce(rby.designation, '')
	FROM mark m
	LEFT JOIN mark_retirement ret ON ret.mark_id = m.id
	LEFT JOIN mark rby ON rby.id = ret.replaced_by
	ORDER BY m.id`
	exportDescriptionsSQL = `SELECT m.designation, v.mark_type, v.setting, v.stamping, v.directions, v.description,
	v.lat::text, v.lon::text, v.position_source, v.reason, v.recorded_by
	FROM mark_version v JOIN mark m ON m.id = v.mark_id ORDER BY m.id, v.version`
	exportAliasesSQL = `SELECT m.designation, a.alias, a.kind, a.agency, a.note, a.recorded_by
	FROM mark_alias a JOIN mark m ON m.id = a.mark_id ORDER BY a.id`
	exportConditionsSQL = `SELECT c.id::text, m.designation, to_char(c.observed_on, 'YYYY-MM-DD'), c.condition, c.note, c.recorded_by
	FROM mark_condition c JOIN mark m ON m.id = c.mark_id ORDER BY m.id, c.id`
	exportHeightsSQL = `SELECT m.designation, d.code, h.source_kind, h.value::text, h.unit, h.decimals::text, h.class,
	CASE WHEN f.t = date_trunc('day', f.t) THEN to_char(f.t, 'YYYY-MM-DD') ELSE to_char(f.t, 'YYYY-MM-DD"T"HH24:MI:SS.US"Z"') END,
	h.source, h.reason, h.recorded_by` + heightFrom + `
	CROSS JOIN LATERAL (SELECT ` + heightInForce + ` AT TIME ZONE 'UTC' AS t) f
	ORDER BY m.id, d.code, h.version`
)

// ExportMarks calls fn with each mark of the register, in the order they
// were added, as first recorded: designation, type, setting, stamping,
// directions, lat, lon, who added it, and its retirement (date, reason,
// who recorded it, the mark that replaced it). The rows are read as fn
// takes them, never all held.
func ExportMarks(ctx context.Context, db DBTX, fn func([]string) error) error {
	return exportRows(ctx, db, "marks", exportMarksSQL, fn)
}

// ExportDescriptions calls fn with every later version of a mark's
// description, mark by mark in version order: mark, type, setting,
// stamping, directions, description, lat, lon, position source, reason,
// by.
func ExportDescriptions(ctx context.Context, db DBTX, fn func([]string) error) error {
	return exportRows(ctx, db, "descriptions", exportDescriptionsSQL, fn)
}

// ExportAliases calls fn with every alias in recorded order: mark, alias,
// kind, agency, note, by.
func ExportAliases(ctx context.Context, db DBTX, fn func([]string) error) error {
	return exportRows(ctx, db, "aliases", exportAliasesSQL, fn)
}

// ExportConditions calls fn with each condition report, mark by mark in
// recorded order: ref (the report's id here), mark, observed on,
// condition, note, by.
func ExportConditions(ctx context.Context, db DBTX, fn func([]string) error) error {
	return exportRows(ctx, db, "condition reports", exportConditionsSQL, fn)
}

// ExportHeights calls fn with every height version, chain by chain (mark,
// then datum code) in recorded order: mark, datum, kind, value, unit,
// decimals, class, in force from (a date when at midnight UTC), source,
// reason, by.
func ExportHeights(ctx context.Context, db DBTX, fn func([]string) error) error {
	return exportRows(ctx, db, "heights", exportHeightsSQL, fn)
}

// ExportPhoto is a photograph as export writes it.
type ExportPhoto struct {
	ConditionID int64
	View        string
	MediaType   string
	FileName    string
	SHA256      []byte
	Content     []byte
	RecordedBy  string
}

// ExportPhotos calls fn with every photograph, in the order of their
// reports (as ExportConditions) and then as kept, one at a time with its
// bytes.
func ExportPhotos(ctx context.Context, db DBTX, fn func(ExportPhoto) error) error {
	rows, err := db.Query(ctx, `SELECT p.condition_id, p.view, p.media_type, p.file_name, p.sha256, p.content, p.recorded_by
		FROM condition_photo p JOIN mark_condition c ON c.id = p.condition_id ORDER BY c.mark_id, c.id, p.id`)
	if err != nil {
		return fmt.Errorf("export photographs: %w", translate(err))
	}
	defer rows.Close()
	for rows.Next() {
		var p ExportPhoto
		if err := rows.Scan(&p.ConditionID, &p.View, &p.MediaType, &p.FileName, &p.SHA256, &p.Content, &p.RecordedBy); err != nil {
			return fmt.Errorf("export photographs: %w", translate(err))
		}
		if err := fn(p); err != nil {
			return err
		}
	}
	if err := rows.Err(); err != nil {
		return fmt.Errorf("export photographs: %w", translate(err))
	}
	return nil
}

func exportRows(ctx context.Context, db DBTX, what, sql string, fn func([]string) error) error {
	rows, err := db.Query(ctx, sql)
	if err != nil {
		return fmt.Errorf("export %s: %w", what, translate(err))
	}
	defer rows.Close()
	n := len(rows.FieldDescriptions())
	vals := make([]*string, n)
	dest := make([]any, n)
	for i := range vals {
		dest[i] = &vals[i]
	}
	rec := make([]string, n)
	for rows.Next() {
		if err := rows.Scan(dest...); err != nil {
			return fmt.Errorf("export %s: %w", what, translate(err))
		}
		for i, v := range vals {
			rec[i] = ""
			if v != nil {
				rec[i] = *v
			}
		}
		if err := fn(rec); err != nil {
			return err
		}
	}
	if err := rows.Err(); err != nil {
		return fmt.Errorf("export %s: %w", what, translate(err))
	}
	return nil
}
