package store

import (
	"context"
	"fmt"
	"strconv"
	"time"

	"github.com/jackc/pgx/v5"
)

// EvidenceTable is one table of the evidence: its name and the columns of
// its key, which order its rows.
type EvidenceTable struct {
	Name string
	Key  string
}

// EvidenceTables are the tables of the evidence in their fixed order
// (docs/reliability.md, "The evidence"). The same list is in the
// database's cairn_evidence_tables (migrations/00013, 00016, 00018, 00019); it is written again
// here so that the audit does not take it from the database.
var EvidenceTables = []EvidenceTable{
	{"datum", "id"},
	{"mark", "id"},
	{"mark_condition", "id"},
	{"run", "id"},
	{"sighting", "run_id, seq"},
	{"section", "run_id, seq"},
	{"run_mark", "run_id, mark_id"},
	{"run_held", "run_id, mark_id"},
	{"run_event", "id"},
	{"adjustment", "id"},
	{"adjustment_run", "adjustment_id, run_id"},
	{"adjustment_held", "adjustment_id, height_id"},
	{"adjustment_result", "adjustment_id, mark_id"},
	{"adjustment_section", "adjustment_id, run_id, seq"},
	{"adjustment_event", "id"},
	{"height", "id"},
	{"check_run", "run_id"},
	{"check_connection", "run_id, seq"},
	{"mark_version", "id"},
	{"mark_alias", "id"},
	{"mark_retirement", "id"},
	{"condition_photo", "id"},
	{"import_event", "id"},
}

// EvidenceSession fixes, for the rest of transaction tx, the settings the
// canonical text of a row depends on (the time zone of timestamps, the
// digits of floating-point numbers, the form of bytea) and the search
// path, as the database's own stamp has them. tx should be REPEATABLE READ
// and READ ONLY, so that the whole audit reads one snapshot.
func EvidenceSession(ctx context.Context, tx pgx.Tx) error {
	for _, s := range []string{
		"SET LOCAL search_path = pg_catalog, public, pg_temp",
		"SET LOCAL TimeZone = 'UTC'",
		"SET LOCAL extra_float_digits = 1",
		"SET LOCAL bytea_output = 'hex'",
		"SET LOCAL jit = off", // as TxNoJIT: nothing of the text, only its cost
	} {
		if _, err := tx.Exec(ctx, s); err != nil {
			return fmt.Errorf("prepare the audit's session: %w", translate(err))
		}
	}
	return nil
}

// EvidenceCommit is a row of register_commit as stored.
type EvidenceCommit struct {
	Seq         int64
	Xid         uint64 // 0 for the genesis entry
	CommittedAt time.Time
	Login       string
	Manifest    string
	Digest      []byte
	Hash        []byte
}

// EvidenceCommitPage returns up to limit commits with seq > after, in the
// order of seq (the unique index on seq; a page at a time, so the audit
// never holds the whole register).
func EvidenceCommitPage(ctx context.Context, tx pgx.Tx, after int64, limit int) ([]EvidenceCommit, error) {
	rows, err := tx.Query(ctx, `SELECT seq, xid::text, committed_at, login, manifest, digest, hash
		FROM public.register_commit WHERE seq > $1 ORDER BY seq LIMIT $2`, after, limit)
	if err != nil {
		return nil, fmt.Errorf("read commits: %w", translate(err))
	}
	var out []EvidenceCommit
	for rows.Next() {
		var c EvidenceCommit
		var xid string
		if err := rows.Scan(&c.Seq, &xid, &c.CommittedAt, &c.Login, &c.Manifest, &c.Digest, &c.Hash); err != nil {
			return nil, fmt.Errorf("read commits: %w", translate(err))
		}
		if c.Xid, err = strconv.ParseUint(xid, 10, 64); err != nil {
			return nil, fmt.Errorf("read commits: transaction id %q: %w", xid, err)
		}
		out = append(out, c)
	}
	return out, translate(rows.Err())
}

// evidenceLateColumns are the columns added to a table of the evidence
// after v13, left out of a row's canonical text when NULL, so that rows
// written before them keep the text their commits' digests were made of
// (migrations/00015, 00017). Each entry's SQL is the same as
// cairn_commit_manifest's.
var evidenceLateColumns = map[string]string{
	// A run's standards (00015): all four NULL before v15; the file NULL
	// for a built-in profile.
	"run": ` - CASE WHEN r.standards_profile IS NULL THEN '{standards_profile,standards_version,standards_source,standards_file}'::text[]` +
		` WHEN r.standards_file IS NULL THEN '{standards_file}'::text[] ELSE '{}'::text[] END`,
	// A height's in-force time (00017): NULL for a version in force from
	// its own commit.
	"height": ` - CASE WHEN r.in_force_from IS NULL THEN 'in_force_from' ELSE '' END`,
}

// evidenceRowText is the SQL of the canonical text of a row r of table.
func evidenceRowText(table string) string {
	return "(to_jsonb(r) - 'created_xid'" + evidenceLateColumns[table] + ")"
}

// EvidenceRows calls fn with the canonical text of every row transaction
// xid wrote (genesis: the rows of no transaction, created_xid NULL), table
// by table in the order of EvidenceTables, each table's rows in key order,
// then fn(table, nil) at the end of each table. The text is to_jsonb of
// the row without created_xid (and the late columns that are NULL,
// evidenceLateColumns), by plain SELECTs (no function of the
// register's own). One round trip for all the tables.
func EvidenceRows(ctx context.Context, tx pgx.Tx, xid uint64, genesis bool, fn func(table string, text []byte) error) error {
	return EvidenceRowsOf(ctx, tx, EvidenceTables, xid, genesis, fn)
}

// EvidenceRowsOf is EvidenceRows of the given tables only (of
// EvidenceTables), in the order given: one part of a large commit's
// tables, the rest read at the same time on another transaction that
// shares tx's snapshot.
func EvidenceRowsOf(ctx context.Context, tx pgx.Tx, tables []EvidenceTable, xid uint64, genesis bool, fn func(table string, text []byte) error) error {
	b := &pgx.Batch{}
	for _, t := range tables {
		if genesis {
			b.Queue(fmt.Sprintf(`SELECT %s::text FROM public.%s r WHERE created_xid IS NULL ORDER BY %s`, evidenceRowText(t.Name), t.Name, t.Key))
		} else {
			b.Queue(fmt.Sprintf(`SELECT %s::text FROM public.%s r WHERE created_xid = $1::text::xid8 ORDER BY %s`, evidenceRowText(t.Name), t.Name, t.Key),
				strconv.FormatUint(xid, 10))
		}
	}
	br := tx.SendBatch(ctx, b)
	for _, t := range tables {
		rows, err := br.Query()
		if err != nil {
			br.Close()
			return fmt.Errorf("read the rows of %s: %w", t.Name, translate(err))
		}
		for rows.Next() {
			raw := rows.RawValues()
			if err := fn(t.Name, raw[0]); err != nil {
				rows.Close()
				br.Close()
				return err
			}
		}
		rows.Close()
		if err := rows.Err(); err != nil {
			br.Close()
			return fmt.Errorf("read the rows of %s: %w", t.Name, translate(err))
		}
		if err := fn(t.Name, nil); err != nil {
			br.Close()
			return err
		}
	}
	return translate(br.Close())
}

// EvidenceCommitAt returns the commit of seq; ErrNotFound if there is none.
func EvidenceCommitAt(ctx context.Context, tx pgx.Tx, seq int64) (EvidenceCommit, error) {
	page, err := EvidenceCommitPage(ctx, tx, seq-1, 1)
	if err != nil {
		return EvidenceCommit{}, err
	}
	if len(page) == 0 || page[0].Seq != seq {
		return EvidenceCommit{}, ErrNotFound
	}
	return page[0], nil
}

// EvidenceUncovered is a set of rows of one table that no commit covers.
type EvidenceUncovered struct {
	Table string
	Xid   *uint64 // nil: created_xid NULL with no genesis entry
	Rows  int64
}

// EvidenceUncoveredRows lists, per table and transaction, the rows whose
// created_xid names no commit of register_commit (or is NULL when there is
// no genesis entry): rows added behind the register's back.
//
// With after not nil, only the rows of transactions after that one (by
// the index on created_xid): the rows an incremental audit reaches.
func EvidenceUncoveredRows(ctx context.Context, tx pgx.Tx, after *uint64) ([]EvidenceUncovered, error) {
	var out []EvidenceUncovered
	cond, args := "", []any{}
	if after != nil {
		cond, args = "AND r.created_xid > $1::text::xid8", []any{strconv.FormatUint(*after, 10)}
	}
	for _, t := range EvidenceTables {
		rows, err := tx.Query(ctx, fmt.Sprintf(`SELECT r.created_xid::text, count(*) FROM public.%s r
			WHERE NOT EXISTS (SELECT 1 FROM public.register_commit c WHERE c.xid = coalesce(r.created_xid, '0'::xid8)) %s
			GROUP BY r.created_xid ORDER BY r.created_xid NULLS FIRST`, t.Name, cond), args...)
		if err != nil {
			return nil, fmt.Errorf("look for rows no commit covers in %s: %w", t.Name, translate(err))
		}
		for rows.Next() {
			var xid *string
			u := EvidenceUncovered{Table: t.Name}
			if err := rows.Scan(&xid, &u.Rows); err != nil {
				rows.Close()
				return nil, fmt.Errorf("look for rows no commit covers in %s: %w", t.Name, translate(err))
			}
			if xid != nil {
				x, err := strconv.ParseUint(*xid, 10, 64)
				if err != nil {
					rows.Close()
					return nil, fmt.Errorf("transaction id %q: %w", *xid, err)
				}
				u.Xid = &x
			}
			out = append(out, u)
		}
		rows.Close()
		if err := rows.Err(); err != nil {
			return nil, translate(err)
		}
	}
	return out, nil
}

// RegisterIdentity names the register: its database and the server
// cluster's system identifier (empty when the role may not read it).
func RegisterIdentity(ctx context.Context, db DBTX) (database, system string, err error) {
	if err := db.QueryRow(ctx, "SELECT current_database()").Scan(&database); err != nil {
		return "", "", fmt.Errorf("read the database's name: %w", translate(err))
	}
	var sys *string
	if err := db.QueryRow(ctx, "SELECT (SELECT system_identifier::text FROM pg_control_system()) WHERE has_function_privilege('pg_control_system()', 'EXECUTE')").Scan(&sys); err != nil && err != pgx.ErrNoRows {
		return database, "", nil
	}
	if sys != nil {
		system = *sys
	}
	return database, system, nil
}
