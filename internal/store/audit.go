package store

import (
	"context"
	"crypto/rand"
	"encoding/hex"
	"errors"
	"fmt"
	"strconv"
	"time"

	"github.com/jackc/pgx/v5"
	"github.com/jackc/pgx/v5/pgconn"
	"github.com/jackc/pgx/v5/pgxpool"
)

// The queries of the audit that derives the register again
// (register/audit_derive.go, register/audit_schema.go).

// AuditRunIDs returns the identifier of every run, in order: the audit
// reads them one at a time, so a large register is never held whole.
// With after not nil, only the runs recorded by transactions after that
// one (an incremental audit's).
func AuditRunIDs(ctx context.Context, db DBTX, after *uint64) ([]int64, error) {
	q, args := "SELECT id FROM run ORDER BY id", []any{}
	if after != nil {
		q, args = "SELECT id FROM run WHERE created_xid > $1::text::xid8 ORDER BY id", []any{strconv.FormatUint(*after, 10)}
	}
	rows, err := db.Query(ctx, q, args...)
	if err != nil {
		return nil, translate(err)
	}
	return collect(rows, func(r pgx.Row) (int64, error) {
		var id int64
		return id, translate(r.Scan(&id))
	})
}

// AuditPublishedAfter returns the adjustments published by transactions
// after xid after, in order (an incremental audit's).
func AuditPublishedAfter(ctx context.Context, db DBTX, after uint64) ([]int64, error) {
	rows, err := db.Query(ctx, `SELECT adjustment_id FROM adjustment_event
		WHERE status = 'published' AND created_xid > $1::text::xid8 ORDER BY adjustment_id`, strconv.FormatUint(after, 10))
	if err != nil {
		return nil, translate(err)
	}
	return collect(rows, func(r pgx.Row) (int64, error) {
		var id int64
		return id, translate(r.Scan(&id))
	})
}

// AuditRun is what the audit reads of a run to parse and reduce it again.
type AuditRun struct {
	ID         int64
	FileName   string
	Book       []byte
	Checks     []byte
	RecordedAt time.Time
	// Standards is the profile that judged the run (empty before v15).
	Standards RunStandards
}

// AuditRunGet returns run id's book, check summary and time of recording.
func AuditRunGet(ctx context.Context, db DBTX, id int64) (AuditRun, error) {
	r := AuditRun{ID: id}
	err := db.QueryRow(ctx, `SELECT file_name, book, checks::text, recorded_at,
		coalesce(standards_profile, ''), coalesce(standards_version, ''), coalesce(standards_source, ''), standards_file
		FROM run WHERE id = $1`, id).
		Scan(&r.FileName, &r.Book, &r.Checks, &r.RecordedAt,
			&r.Standards.Profile, &r.Standards.Version, &r.Standards.Source, &r.Standards.File)
	return r, translate(err)
}

// AuditHeight is a height version that cites an adjustment, or is of
// kind adjustment, with the status of the adjustment it cites.
type AuditHeight struct {
	Height
	// AdjustmentStatus is draft, published or discarded; "" when no
	// adjustment has the identifier cited (or none is cited).
	AdjustmentStatus string
}

const auditHeightColumns = "SELECT " + heightColumns + `,
	coalesce((SELECT coalesce(e.status, 'draft') FROM adjustment a LEFT JOIN adjustment_event e ON e.adjustment_id = a.id
		WHERE a.id = h.adjustment_id), '')` + heightFrom

// AuditCitingHeight is what the audit compares of a version citing an
// adjustment with the adjustment's result.
type AuditCitingHeight struct {
	ID                 int64
	Designation, Datum string
	Version            int
	SourceKind, Class  string
	Value, Unit        *string
	Decimals           *int
	RecordedAt         time.Time
}

// AuditHeightsOfAdjustment returns the versions that cite adjustment id,
// by mark, with the fields the audit compares only (not whether each is
// current, nor its commit: a probe of the chain and a join per version,
// most of the query's time for a large publication).
func AuditHeightsOfAdjustment(ctx context.Context, db DBTX, id int64) ([]AuditCitingHeight, error) {
	rows, err := db.Query(ctx, `SELECT h.id, m.designation, d.code, h.version, h.source_kind, h.class,
		h.value::text, h.unit, h.decimals, h.recorded_at
		FROM height h JOIN mark m ON m.id = h.mark_id JOIN datum d ON d.id = h.datum_id
		WHERE h.adjustment_id = $1 ORDER BY m.designation, h.id`, id)
	if err != nil {
		return nil, translate(err)
	}
	return collect(rows, func(r pgx.Row) (AuditCitingHeight, error) {
		var h AuditCitingHeight
		var dec *int16
		if err := r.Scan(&h.ID, &h.Designation, &h.Datum, &h.Version, &h.SourceKind, &h.Class, &h.Value, &h.Unit, &dec, &h.RecordedAt); err != nil {
			return h, translate(err)
		}
		if dec != nil {
			d := int(*dec)
			h.Decimals = &d
		}
		return h, nil
	})
}

// AuditHeightsNotOfPublished returns the versions of kind adjustment, or
// citing an adjustment, whose adjustment is not published (a draft, a
// discarded one, or none), by adjustment and mark. With after not nil,
// only the versions written by transactions after that one (an
// incremental audit's: the index on created_xid finds them).
func AuditHeightsNotOfPublished(ctx context.Context, db DBTX, after *uint64) ([]AuditHeight, error) {
	cond, args := "", []any{}
	if after != nil {
		cond, args = " AND h.created_xid > $1::text::xid8", []any{strconv.FormatUint(*after, 10)}
	}
	rows, err := db.Query(ctx, auditHeightColumns+` WHERE (h.adjustment_id IS NOT NULL OR h.source_kind = 'adjustment')`+cond+`
		AND NOT EXISTS (SELECT 1 FROM adjustment_event e WHERE e.adjustment_id = h.adjustment_id AND e.status = 'published')
		ORDER BY h.adjustment_id, m.designation, h.id`, args...)
	if err != nil {
		return nil, translate(err)
	}
	return collect(rows, func(r pgx.Row) (AuditHeight, error) {
		var ah AuditHeight
		var err error
		ah.Height, err = scanHeight(extraScan{row: r, extra: []any{&ah.AdjustmentStatus}})
		return ah, err
	})
}

// SchemaEntry is one object of the schema and its definition as the
// catalog gives it: Key names it ("trigger height_chain on height"), Def is
// everything that must not change.
type SchemaEntry struct {
	Kind, Key, Def string
	// SecurityDefiner is set on a function that runs with its owner's
	// privileges.
	SecurityDefiner bool
}

// The schema's fingerprint: functions, triggers (with whether they are
// enabled), constraints, columns and grants of every schema but the
// system's. Grants to an object's owner are named "owner", whoever that
// is, so a copy owned by another role compares equal.
const schemaFingerprint = `
WITH ns AS (
	SELECT oid, nspname FROM pg_namespace
	WHERE nspname NOT IN ('pg_catalog', 'information_schema') AND nspname NOT LIKE 'pg_toast%' AND nspname NOT LIKE 'pg_temp%'
), rel AS (
	SELECT c.oid, c.relname, c.relkind, c.relowner, c.relacl, ns.nspname FROM pg_class c JOIN ns ON ns.oid = c.relnamespace
	WHERE c.relkind IN ('r', 'p', 'v', 'm', 'S', 'f')
), fn AS (
	SELECT p.oid, p.proname, p.proowner, p.proacl, p.prosecdef, ns.nspname FROM pg_proc p JOIN ns ON ns.oid = p.pronamespace
	WHERE NOT EXISTS (SELECT 1 FROM pg_depend d WHERE d.classid = 'pg_proc'::regclass AND d.objid = p.oid AND d.deptype = 'e')
)
SELECT 'function', format('function %s.%s(%s)', fn.nspname, fn.proname, pg_get_function_identity_arguments(fn.oid)),
	format('language %s; returns %s; security %s; volatility %s; config %s; body %s',
		l.lanname, pg_get_function_result(fn.oid), CASE WHEN fn.prosecdef THEN 'definer' ELSE 'invoker' END,
		p.provolatile, coalesce(array_to_string(p.proconfig, ', '), 'none'), p.prosrc),
	fn.prosecdef
FROM fn JOIN pg_proc p ON p.oid = fn.oid JOIN pg_language l ON l.oid = p.prolang
UNION ALL
SELECT 'trigger', format('trigger %s on %s.%s', t.tgname, rel.nspname, rel.relname),
	format('%s; enabled %s', pg_get_triggerdef(t.oid), t.tgenabled), false
FROM pg_trigger t JOIN rel ON rel.oid = t.tgrelid WHERE NOT t.tgisinternal
UNION ALL
SELECT 'trigger', format('trigger of constraint %s on %s.%s calling %s (type %s)', co.conname, rel.nspname, rel.relname, t.tgfoid::regproc, t.tgtype),
	format('enabled %s', t.tgenabled), false
FROM pg_trigger t JOIN rel ON rel.oid = t.tgrelid JOIN pg_constraint co ON co.oid = t.tgconstraint WHERE t.tgisinternal
UNION ALL
SELECT 'constraint', format('constraint %s on %s.%s', co.conname, rel.nspname, rel.relname),
	format('%s; deferrable %s, deferred %s, valid %s', pg_get_constraintdef(co.oid), co.condeferrable, co.condeferred, co.convalidated), false
FROM pg_constraint co JOIN rel ON rel.oid = co.conrelid
UNION ALL
SELECT 'column', format('column %s.%s.%s', rel.nspname, rel.relname, a.attname),
	format('%s; not null %s; default %s', format_type(a.atttypid, a.atttypmod), a.attnotnull,
		-- created_xid's default carries the register's base in this
		-- cluster as a constant (migrations/00021): register state, not
		-- schema; a wrong base shows as rows no commit covers.
		coalesce(CASE WHEN a.attname = 'created_xid'
			THEN regexp_replace(pg_get_expr(ad.adbin, ad.adrelid), '^(\(\(\(\(\(pg_current_xact_id\(\)\)::text\)::bigint \+ )[0-9]+(\)\)::text\)::xid8)$', '\1BASE\2')
			ELSE pg_get_expr(ad.adbin, ad.adrelid) END, 'none')), false
FROM pg_attribute a JOIN rel ON rel.oid = a.attrelid LEFT JOIN pg_attrdef ad ON ad.adrelid = a.attrelid AND ad.adnum = a.attnum
WHERE a.attnum > 0 AND NOT a.attisdropped
UNION ALL
SELECT 'table', format('%s %s.%s', CASE rel.relkind WHEN 'S' THEN 'sequence' WHEN 'v' THEN 'view' ELSE 'table' END, rel.nspname, rel.relname),
	format('kind %s; row security %s, forced %s; view %s', rel.relkind, c.relrowsecurity, c.relforcerowsecurity,
		coalesce(pg_get_viewdef(rel.oid), 'none')), false
FROM rel JOIN pg_class c ON c.oid = rel.oid
UNION ALL
SELECT 'grant', format('grant on %s.%s to %s', rel.nspname, rel.relname, g.who), g.privs, false
FROM rel, LATERAL (SELECT CASE WHEN x.grantee = 0 THEN 'PUBLIC' WHEN x.grantee = rel.relowner THEN 'owner' ELSE x.grantee::regrole::text END AS who,
		string_agg(x.privilege_type || CASE WHEN x.is_grantable THEN ' with grant option' ELSE '' END, ', ' ORDER BY x.privilege_type) AS privs
	FROM aclexplode(coalesce(rel.relacl, acldefault(CASE WHEN rel.relkind = 'S' THEN 's' ELSE 'r' END::"char", rel.relowner))) x GROUP BY 1) g
UNION ALL
SELECT 'grant', format('grant on column %s.%s.%s to %s', rel.nspname, rel.relname, a.attname, g.who), g.privs, false
FROM rel JOIN pg_attribute a ON a.attrelid = rel.oid AND a.attnum > 0 AND NOT a.attisdropped AND a.attacl IS NOT NULL,
	LATERAL (SELECT CASE WHEN x.grantee = 0 THEN 'PUBLIC' WHEN x.grantee = rel.relowner THEN 'owner' ELSE x.grantee::regrole::text END AS who,
		string_agg(x.privilege_type, ', ' ORDER BY x.privilege_type) AS privs FROM aclexplode(a.attacl) x GROUP BY 1) g
UNION ALL
SELECT 'grant', format('grant on function %s.%s(%s) to %s', fn.nspname, fn.proname, pg_get_function_identity_arguments(fn.oid), g.who), g.privs, false
FROM fn, LATERAL (SELECT CASE WHEN x.grantee = 0 THEN 'PUBLIC' WHEN x.grantee = fn.proowner THEN 'owner' ELSE x.grantee::regrole::text END AS who,
		string_agg(x.privilege_type, ', ' ORDER BY x.privilege_type) AS privs
	FROM aclexplode(coalesce(fn.proacl, acldefault('f', fn.proowner))) x GROUP BY 1) g
UNION ALL
SELECT 'grant', format('grant on schema %s to %s', n.nspname, g.who), g.privs, false
FROM pg_namespace n JOIN ns ON ns.oid = n.oid,
	LATERAL (SELECT CASE WHEN x.grantee = 0 THEN 'PUBLIC' WHEN x.grantee = n.nspowner THEN 'owner' ELSE x.grantee::regrole::text END AS who,
		string_agg(x.privilege_type, ', ' ORDER BY x.privilege_type) AS privs
	FROM aclexplode(coalesce(n.nspacl, acldefault('n', n.nspowner))) x GROUP BY 1) g
UNION ALL
SELECT 'grant', format('grant on the database to %s', g.who), g.privs, false
FROM pg_database d,
	LATERAL (SELECT CASE WHEN x.grantee = 0 THEN 'PUBLIC' WHEN x.grantee = d.datdba THEN 'owner' ELSE x.grantee::regrole::text END AS who,
		string_agg(x.privilege_type, ', ' ORDER BY x.privilege_type) AS privs
	FROM aclexplode(coalesce(d.datacl, acldefault('d', d.datdba))) x GROUP BY 1) g
WHERE d.datname = current_database()
UNION ALL
SELECT 'schema', format('schema %s', ns.nspname), 'present', false FROM ns`

// SchemaFingerprint returns the schema of the connected database as
// entries, one per object (see schemaFingerprint).
func SchemaFingerprint(ctx context.Context, db DBTX) ([]SchemaEntry, error) {
	rows, err := db.Query(ctx, schemaFingerprint)
	if err != nil {
		return nil, fmt.Errorf("read the schema's catalog: %w", translate(err))
	}
	return collect(rows, func(r pgx.Row) (SchemaEntry, error) {
		var e SchemaEntry
		return e, translate(r.Scan(&e.Kind, &e.Key, &e.Def, &e.SecurityDefiner))
	})
}

// SchemaMigratedAt returns when the connected database's latest migration
// was applied (goose's own record); zero when it has none.
func SchemaMigratedAt(ctx context.Context, db DBTX) (time.Time, error) {
	var t *time.Time
	err := db.QueryRow(ctx, "SELECT max(tstamp) FROM goose_db_version").Scan(&t)
	if err != nil {
		return time.Time{}, translate(err)
	}
	if t == nil {
		return time.Time{}, nil
	}
	return *t, nil
}

// ErrScratchRefused says the server refused to create a scratch database
// (the role may not create databases).
var ErrScratchRefused = errors.New("the role may not create a database")

// WithScratchRegister creates a new database on the server pool connects
// to, as pool's role, migrates it with the embedded migrations, calls fn
// with it, and drops it, whatever fn returns. ErrScratchRefused when the
// role may not create databases.
func WithScratchRegister(ctx context.Context, pool *pgxpool.Pool, fn func(DBTX) error) error {
	b := make([]byte, 6)
	if _, err := rand.Read(b); err != nil {
		return err
	}
	name := "cairn_audit_" + hex.EncodeToString(b)
	admin, err := pgx.ConnectConfig(ctx, pool.Config().ConnConfig.Copy())
	if err != nil {
		return fmt.Errorf("connect to server: %w", err)
	}
	defer admin.Close(context.WithoutCancel(ctx))
	if err := DatabaseCreate(ctx, admin, DatabaseCreateParams{Name: name, Template: "template0"}); err != nil {
		var pe *pgconn.PgError
		if errors.As(err, &pe) && pe.Code == "42501" {
			return fmt.Errorf("%w: %s", ErrScratchRefused, pe.Message)
		}
		return err
	}
	defer DatabaseDrop(context.WithoutCancel(ctx), admin, name)
	cfg := pool.Config().Copy()
	cfg.ConnConfig.Database = name
	cfg.MaxConns = 2
	scratch, err := pgxpool.NewWithConfig(ctx, cfg)
	if err != nil {
		return fmt.Errorf("connect to scratch database %s: %w", name, err)
	}
	defer scratch.Close()
	if err := Migrate(ctx, scratch); err != nil {
		return fmt.Errorf("migrate scratch database %s: %w", name, err)
	}
	return fn(scratch)
}

// SchemaServerKey names what a freshly migrated database's schema depends
// on besides the migrations: the server (address and version) and which
// of the register's roles (RoleReader, RoleRecorder, RolePublisher, which
// the migrations grant to) are present on it, so that a fingerprint of a
// scratch database can be reused for the same key within one process.
// Other roles, the logins of the office's people among them, whatever
// their names, are not part of it: a login made or dropped (cairn_… or
// not) changes nothing a fresh migration makes.
func SchemaServerKey(ctx context.Context, pool *pgxpool.Pool) (string, error) {
	var k string
	err := pool.QueryRow(ctx, `SELECT current_setting('server_version_num') || ' ' ||
		coalesce((SELECT string_agg(rolname, ',' ORDER BY rolname) FROM pg_roles WHERE rolname = ANY($1::text[])), '')`,
		[]string{RoleReader, RoleRecorder, RolePublisher}).Scan(&k)
	if err != nil {
		return "", translate(err)
	}
	c := pool.Config().ConnConfig
	return fmt.Sprintf("%s:%d %s %s", c.Host, c.Port, c.User, k), nil
}
