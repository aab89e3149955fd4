package store

import (
	"context"
	"fmt"
	"maps"
	"slices"
	"strings"

	"github.com/jackc/pgx/v5"
	"github.com/pressly/goose/v3"
)

// TableCounts is the number of rows in each table of the register, keyed
// by table name. Two counts compare with Equal (or reflect.DeepEqual);
// String lists them in name order.
type TableCounts map[string]int64

// TableCount counts, exactly, the rows of every ordinary (or partitioned)
// table of the register: the tables in the schema the connection creates
// and finds unqualified names in (current_schema(), where the migrations
// put them), as the catalog lists them, so that a table a later migration
// adds is counted without a change here. Partitions are counted with their
// parent, not again on their own.
//
// Goose's own table (goose.DefaultTablename) is left out: it is the
// migrator's bookkeeping, written only by migrations and the same in every
// register at one schema version, and counting it would make an empty
// register look written to.
//
// The counts come from one statement, so they are of one snapshot even
// while others write.
func TableCount(ctx context.Context, db DBTX) (TableCounts, error) {
	rows, err := db.Query(ctx, `SELECT n.nspname, c.relname FROM pg_catalog.pg_class c
		JOIN pg_catalog.pg_namespace n ON n.oid = c.relnamespace
		WHERE n.nspname = current_schema() AND c.relkind IN ('r', 'p') AND NOT c.relispartition
		AND c.relname <> $1
		ORDER BY c.relname`, goose.DefaultTablename)
	if err != nil {
		return nil, fmt.Errorf("list tables: %w", translate(err))
	}
	type table struct{ schema, name string }
	tables, err := collect(rows, func(r pgx.Row) (table, error) {
		var t table
		return t, r.Scan(&t.schema, &t.name)
	})
	if err != nil {
		return nil, fmt.Errorf("list tables: %w", err)
	}
	if len(tables) == 0 {
		var schema *string
		if err := db.QueryRow(ctx, "SELECT current_schema()").Scan(&schema); err != nil {
			return nil, fmt.Errorf("find the register's schema: %w", translate(err))
		}
		if schema == nil {
			return nil, fmt.Errorf("count tables: no schema to count in (search_path names no existing schema)")
		}
		return TableCounts{}, nil
	}
	parts := make([]string, len(tables))
	for i, t := range tables {
		parts[i] = fmt.Sprintf("SELECT %s::text, count(*) FROM %s", quoteLiteral(t.name), pgx.Identifier{t.schema, t.name}.Sanitize())
	}
	rows, err = db.Query(ctx, strings.Join(parts, " UNION ALL "))
	if err != nil {
		return nil, fmt.Errorf("count rows: %w", translate(err))
	}
	type count struct {
		name string
		n    int64
	}
	counts, err := collect(rows, func(r pgx.Row) (count, error) {
		var c count
		return c, r.Scan(&c.name, &c.n)
	})
	if err != nil {
		return nil, fmt.Errorf("count rows: %w", err)
	}
	out := make(TableCounts, len(counts))
	for _, c := range counts {
		out[c.name] = c.n
	}
	return out, nil
}

// quoteLiteral quotes s as an SQL string literal.
func quoteLiteral(s string) string {
	return "'" + strings.ReplaceAll(s, "'", "''") + "'"
}

// Tables returns the names of the tables counted, in order.
func (c TableCounts) Tables() []string {
	return slices.Sorted(maps.Keys(c))
}

// Rows returns the number of rows of table; it panics if table was not
// counted (a misspelt name), so that a test cannot pass by reading a
// count of zero for a table that does not exist.
func (c TableCounts) Rows(table string) int64 {
	n, ok := c[table]
	if !ok {
		panic(fmt.Sprintf("store: no table %q among the tables counted (%s)", table, strings.Join(c.Tables(), ", ")))
	}
	return n
}

// Equal reports whether c and d count the same tables with the same rows.
func (c TableCounts) Equal(d TableCounts) bool { return maps.Equal(c, d) }

// String lists the counts in table name order: "datum 1, height 0, ...".
func (c TableCounts) String() string {
	var b strings.Builder
	for i, t := range c.Tables() {
		if i > 0 {
			b.WriteString(", ")
		}
		fmt.Fprintf(&b, "%s %d", t, c[t])
	}
	return b.String()
}

// Diff describes how d differs from c, table by table in name order
// ("height 1 → 6, run (absent) → 0"); "" when they are equal.
func (c TableCounts) Diff(d TableCounts) string {
	all := TableCounts{}
	maps.Copy(all, c)
	maps.Copy(all, d)
	names := all.Tables()
	var diffs []string
	show := func(m TableCounts, t string) string {
		if n, ok := m[t]; ok {
			return fmt.Sprint(n)
		}
		return "(absent)"
	}
	for _, t := range names {
		if a, b := show(c, t), show(d, t); a != b {
			diffs = append(diffs, fmt.Sprintf("%s %s → %s", t, a, b))
		}
	}
	return strings.Join(diffs, ", ")
}
