package store

import (
	"context"
	"fmt"
)

// The queries of an export (docs/import.md): each row as the text of its
// columns, in the order of the layout's header, NULL as "".
const (
	exportMarksSQL = `SELECT m.designation,
	coalesce((SELECT string_agg(a.kind || CASE WHEN a.kind = 'agency' THEN '=' || a.agency ELSE '' END || ':' || a.alias, ';' ORDER BY a.id)
	            FROM mark_alias a WHERE a.mark_id = m.id), ''),
	coalesce(v.mark_type, m.mark_type), coalesce(v.setting, m.setting), coalesce(v.stamping, m.stamping),
	coalesce(v.directions, m.to_reach), coalesce(v.description, ''),
	(` + curLat + `)::text, (` + curLon + `)::text, coalesce(v.position_source, ''), m.created_by,
	to_char(ret.retired_on, 'YYYY-MM-DD'), coalesce(ret.reason, ''), coalesce(rby.designation, '')
	FROM mark m LEFT JOIN LATERAL (
		SELECT * FROM mark_version mv WHERE mv.mark_id = m.id ORDER BY mv.version DESC LIMIT 1
	) v ON true
	LEFT JOIN mark_retirement ret ON ret.mark_id = m.id
	LEFT JOIN mark rby ON rby.id = ret.replaced_by
	ORDER BY m.id`
	exportConditionsSQL = `SELECT m.designation, to_char(c.observed_on, 'YYYY-MM-DD'), c.condition, c.note, c.recorded_by
	FROM mark_condition c JOIN mark m ON m.id = c.mark_id ORDER BY m.id, c.id`
	exportHeightsSQL = `SELECT m.designation, d.code, h.source_kind, h.value::text, h.unit, h.decimals::text, h.class,
	CASE WHEN f.t = date_trunc('day', f.t) THEN to_char(f.t, 'YYYY-MM-DD') ELSE to_char(f.t, 'YYYY-MM-DD"T"HH24:MI:SS.US"Z"') END,
	h.source, h.reason, h.recorded_by` + heightFrom + `
	CROSS JOIN LATERAL (SELECT ` + heightInForce + ` AT TIME ZONE 'UTC' AS t) f
	ORDER BY m.id, d.code, h.version`
)

// ExportMarks calls fn with each mark of the register, in the order they
// were added: designation, aliases (KIND[=AGENCY]:ALIAS;...), type,
// setting, stamping, directions, description, lat, lon, position source,
// who added it, and its retirement (date, reason, the mark that replaced
// it), the description being the current one. The rows are
// read as fn takes them, never all held.
func ExportMarks(ctx context.Context, db DBTX, fn func([]string) error) error {
	return exportRows(ctx, db, "marks", exportMarksSQL, fn)
}

// ExportConditions calls fn with each condition report, mark by mark in
// recorded order: mark, observed on, condition, note, by.
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
