// Package store is the only package that speaks SQL: the pgx pool, the
// queries of the register, and the goose migration runner.
package store

import (
	"context"
	"crypto/sha256"
	"database/sql"
	"encoding/hex"
	"errors"
	"fmt"
	"io/fs"
	"slices"
	"strconv"
	"sync"
	"time"

	"github.com/jackc/pgx/v5"
	"github.com/jackc/pgx/v5/pgxpool"
	"github.com/jackc/pgx/v5/stdlib"
	"github.com/pressly/goose/v3"
	"github.com/pressly/goose/v3/lock"

	"cairn/migrations"
)

// Open connects a pool to url ("" uses libpq defaults and PG* variables) and
// checks that the server answers. Its sessions speak UTF-8 whatever the URL
// says: pgx sends Go's strings, which are UTF-8, as they are, so a session
// in another client_encoding would have the server misread them ("Größe"
// stored as "GrÃ¶Ãe").
func Open(ctx context.Context, url string) (*pgxpool.Pool, error) {
	return OpenWith(ctx, url, PoolOptions{})
}

// PoolOptions shape the sessions of a pool beyond what its URL says.
type PoolOptions struct {
	// StatementTimeout, when more than zero, is every session's
	// statement_timeout: the server cancels a statement running longer.
	StatementTimeout time.Duration
	// ReadOnly makes every transaction of every session read-only
	// (default_transaction_read_only), a second lock behind the role's
	// privileges.
	ReadOnly bool
	// MaxConns, when more than zero, bounds the pool's connections.
	MaxConns int32
	// ApplicationName names the sessions in pg_stat_activity.
	ApplicationName string
	// NoJIT turns the server's JIT compilation off for the pool's sessions
	// (jit = off). A site's statements each read a few dozen rows by
	// index; the planner's cost estimate of some (the in-force test's
	// subqueries) passes jit_above_cost, and compiling them took 35-55 ms
	// of a statement that runs in 2.5 ms (docs/performance.md, the register
	// on the web under load).
	NoJIT bool
}

// OpenWith is Open with the sessions shaped by o.
func OpenWith(ctx context.Context, url string, o PoolOptions) (*pgxpool.Pool, error) {
	cfg, err := pgxpool.ParseConfig(url)
	if err != nil {
		return nil, fmt.Errorf("parse database URL: %w", err)
	}
	cfg.ConnConfig.RuntimeParams["client_encoding"] = "UTF8"
	if o.StatementTimeout > 0 {
		cfg.ConnConfig.RuntimeParams["statement_timeout"] = strconv.FormatInt(o.StatementTimeout.Milliseconds(), 10)
	}
	if o.ReadOnly {
		cfg.ConnConfig.RuntimeParams["default_transaction_read_only"] = "on"
	}
	if o.NoJIT {
		cfg.ConnConfig.RuntimeParams["jit"] = "off"
	}
	if o.MaxConns > 0 {
		cfg.MaxConns = o.MaxConns
	}
	if o.ApplicationName != "" {
		cfg.ConnConfig.RuntimeParams["application_name"] = o.ApplicationName
	}
	pool, err := pgxpool.NewWithConfig(ctx, cfg)
	if err != nil {
		return nil, err
	}
	// The first connection, made now so that a server that cannot be
	// reached is said here; connecting is the check (no ping's round
	// trip after it).
	conn, err := pool.Acquire(ctx)
	if err != nil {
		pool.Close()
		return nil, fmt.Errorf("connect to %s: %w", describe(cfg), err)
	}
	conn.Release()
	return pool, nil
}

// TxNoJIT turns the server's JIT compilation off for the rest of
// transaction tx (SET LOCAL jit = off), as PoolOptions.NoJIT does for the
// web's sessions. The register's statements read and write many rows by
// index, each cheap: JIT pays off only for long computation per row, and
// whether it compiles is decided by the planner's estimates, which are
// largest where they are least reliable (a table written since its last
// ANALYZE, as a large commit an incremental audit reads first). Compiling
// took about a second of a draft's statement that ran in one and a half
// without, and 1.5 s of an audit's query that returns no row, once per
// parallel worker (docs/performance.md, issue 15). Drafts, publications
// and the audit's transactions call it.
func TxNoJIT(ctx context.Context, tx pgx.Tx) error {
	_, err := tx.Exec(ctx, "SET LOCAL jit = off")
	return translate(err)
}

func describe(cfg *pgxpool.Config) string {
	c := cfg.ConnConfig
	return fmt.Sprintf("database %q on %s port %d", c.Database, c.Host, c.Port)
}

// provider builds a goose provider over the embedded migrations, with a
// session lock so concurrent migrators take turns. A migration numbered
// below one already applied is applied too (out of order): 00009 came
// after 00010, and a register migrated to 00010 gets it.
func provider(db *sql.DB) (*goose.Provider, error) {
	locker, err := lock.NewPostgresSessionLocker()
	if err != nil {
		return nil, err
	}
	return goose.NewProvider(goose.DialectPostgres, db, migrations.FS, goose.WithSessionLocker(locker), goose.WithAllowOutofOrder(true))
}

// Migrate applies every pending migration, and carries the register's
// transaction numbers into this cluster when it has not met it before
// (CarryTransactionNumbers).
func Migrate(ctx context.Context, pool *pgxpool.Pool) error {
	// Every command opens the register through here: when every embedded
	// migration is applied and the register is at home in this cluster,
	// one query says so, without goose's lock and version reads.
	if ok, err := UpToDate(ctx, pool); err == nil && ok {
		return nil
	}
	db := stdlib.OpenDBFromPool(pool)
	defer db.Close()
	p, err := provider(db)
	if err != nil {
		return err
	}
	if _, err = p.Up(ctx); err != nil {
		return err
	}
	_, err = CarryTransactionNumbers(ctx, pool)
	return err
}

// CarryTransactionNumbers makes the register at home in the database
// cluster it is in (cairn_cluster_carry, migrations/00014): when it was
// copied here from another cluster, by a restore or otherwise, the
// register's base is raised so that every new transaction's number comes
// after every number it recorded. It reports whether it did; it is the
// owner's to run, and does nothing on a register already at home.
func CarryTransactionNumbers(ctx context.Context, db DBTX) (bool, error) {
	var home bool
	if err := db.QueryRow(ctx, `SELECT (SELECT system_identifier FROM register_cluster ORDER BY id DESC LIMIT 1)
		IS NOT DISTINCT FROM (SELECT system_identifier FROM pg_control_system())`).Scan(&home); err != nil {
		return false, fmt.Errorf("look up the cluster the register last met: %w", translate(err))
	}
	if home {
		return false, nil
	}
	var carried bool
	if err := db.QueryRow(ctx, "SELECT cairn_cluster_carry()").Scan(&carried); errors.Is(translate(err), ErrPermission) {
		// Not the owner: reading goes on, and a write is refused at its
		// commit with the advice to have the owner migrate (CA013).
		return false, nil
	} else if err != nil {
		return false, fmt.Errorf("carry the register's transaction numbers into this cluster: %w", translate(err))
	}
	return carried, nil
}

// MigrationsDigest is the SHA-256, in hex, of the embedded migrations:
// each file's name and length and text, in order of name.
var MigrationsDigest = sync.OnceValues(func() (string, error) {
	files, err := fs.Glob(migrations.FS, "*.sql")
	if err != nil {
		return "", err
	}
	slices.Sort(files)
	h := sha256.New()
	for _, name := range files {
		data, err := fs.ReadFile(migrations.FS, name)
		if err != nil {
			return "", err
		}
		fmt.Fprintf(h, "%s %d\n", name, len(data))
		h.Write(data)
	}
	return hex.EncodeToString(h.Sum(nil)), nil
})

// embeddedVersions are the versions of the embedded migrations.
var embeddedVersions = sync.OnceValues(func() ([]int64, error) {
	files, err := fs.Glob(migrations.FS, "*.sql")
	if err != nil {
		return nil, err
	}
	var vs []int64
	for _, name := range files {
		v, err := goose.NumericComponent(name)
		if err != nil {
			return nil, fmt.Errorf("migration %s: %w", name, err)
		}
		vs = append(vs, v)
	}
	slices.Sort(vs)
	return vs, nil
})

// UpToDate reports, in one query, whether every embedded migration is
// applied (the latest row of each version in goose's table says applied)
// and the register is at home in this cluster (CarryTransactionNumbers
// would do nothing). An error (no goose table yet) means "not known".
func UpToDate(ctx context.Context, pool *pgxpool.Pool) (bool, error) {
	want, err := embeddedVersions()
	if err != nil {
		return false, err
	}
	var applied []int64
	var home bool
	err = pool.QueryRow(ctx, `SELECT coalesce((SELECT array_agg(v.version_id ORDER BY v.version_id) FROM (
			SELECT DISTINCT ON (version_id) version_id, is_applied FROM goose_db_version ORDER BY version_id, id DESC) v
			WHERE v.is_applied AND v.version_id > 0), '{}'),
		(SELECT system_identifier FROM register_cluster ORDER BY id DESC LIMIT 1) IS NOT DISTINCT FROM (SELECT system_identifier FROM pg_control_system())`).
		Scan(&applied, &home)
	if err != nil {
		return false, err
	}
	return home && slices.Equal(applied, want), nil
}

// MigrateDown rolls back every migration (used by the migration test).
func MigrateDown(ctx context.Context, pool *pgxpool.Pool) error {
	db := stdlib.OpenDBFromPool(pool)
	defer db.Close()
	p, err := provider(db)
	if err != nil {
		return err
	}
	_, err = p.DownTo(ctx, 0)
	return err
}

// MigrateTo applies, or rolls back, migrations until version is the
// newest applied (the migration tests start from an older register).
func MigrateTo(ctx context.Context, pool *pgxpool.Pool, version int64) error {
	db := stdlib.OpenDBFromPool(pool)
	defer db.Close()
	p, err := provider(db)
	if err != nil {
		return err
	}
	cur, err := p.GetDBVersion(ctx)
	if err != nil {
		return err
	}
	if cur > version {
		_, err = p.DownTo(ctx, version)
	} else {
		_, err = p.UpTo(ctx, version)
	}
	return err
}

// MigrateOne applies the migration of version alone, whatever is pending
// before it (the migration tests make a register that got a migration
// before an older one).
func MigrateOne(ctx context.Context, pool *pgxpool.Pool, version int64) error {
	db := stdlib.OpenDBFromPool(pool)
	defer db.Close()
	p, err := provider(db)
	if err != nil {
		return err
	}
	_, err = p.ApplyVersion(ctx, version, true)
	return err
}

// SchemaVersion returns the applied schema version (0 for a database
// never migrated, which it leaves untouched) and the newest known.
func SchemaVersion(ctx context.Context, pool *pgxpool.Pool) (current, latest int64, err error) {
	db := stdlib.OpenDBFromPool(pool)
	defer db.Close()
	p, err := provider(db)
	if err != nil {
		return 0, 0, err
	}
	if srcs := p.ListSources(); len(srcs) > 0 {
		latest = srcs[len(srcs)-1].Version
	}
	var migrated bool
	if err := pool.QueryRow(ctx, "SELECT to_regclass('goose_db_version') IS NOT NULL").Scan(&migrated); err != nil {
		return 0, 0, fmt.Errorf("look for schema version table: %w", err)
	}
	if !migrated {
		return 0, latest, nil
	}
	// The version is the last of the unbroken run of applied migrations
	// from the first: a database with 00010 applied and 00009 not is at
	// version 8, and migrating brings it up to date.
	st, err := p.Status(ctx)
	if err != nil {
		return 0, 0, err
	}
	for _, m := range st {
		if m.State != goose.StateApplied {
			break
		}
		current = m.Source.Version
	}
	return current, latest, nil
}
