package store

import (
	"context"
	"fmt"
	"net/url"
	"strings"

	"github.com/jackc/pgx/v5"
)

// WithDatabase returns connection string conn with its database replaced by
// name. A URL keeps everything else; a keyword/value string or "" (PG*
// variables) is resolved and written out as host, port, user and dbname.
func WithDatabase(conn, name string) (string, error) {
	if strings.HasPrefix(conn, "postgres://") || strings.HasPrefix(conn, "postgresql://") {
		u, err := url.Parse(conn)
		if err != nil {
			return "", fmt.Errorf("parse database URL: %w", err)
		}
		u.Path = "/" + name
		u.RawPath = ""
		return u.String(), nil
	}
	cfg, err := pgx.ParseConfig(conn)
	if err != nil {
		return "", fmt.Errorf("parse database URL: %w", err)
	}
	s := fmt.Sprintf("host=%s port=%d user=%s dbname=%s", quoteKV(cfg.Host), cfg.Port, quoteKV(cfg.User), quoteKV(name))
	if !strings.HasPrefix(cfg.Host, "/") && cfg.TLSConfig == nil {
		s += " sslmode=disable"
	}
	return s, nil
}

func quoteKV(s string) string {
	if s != "" && !strings.ContainsAny(s, ` '\`) {
		return s
	}
	return "'" + strings.NewReplacer(`\`, `\\`, `'`, `\'`).Replace(s) + "'"
}

// DatabaseRecreate drops database name on the server conn connects to (its
// sessions are ended) and creates it empty.
func DatabaseRecreate(ctx context.Context, conn, name string) error {
	c, err := pgx.Connect(ctx, conn)
	if err != nil {
		return fmt.Errorf("connect to server: %w", err)
	}
	defer c.Close(context.WithoutCancel(ctx))
	if err := DatabaseDrop(ctx, c, name); err != nil {
		return err
	}
	return DatabaseCreate(ctx, c, DatabaseCreateParams{Name: name})
}

// DatabaseEmpty reports whether the connected database holds no tables of
// its own (a restore goes only into such a database).
func DatabaseEmpty(ctx context.Context, db DBTX) (bool, error) {
	var n int
	err := db.QueryRow(ctx, `SELECT count(*) FROM pg_class c JOIN pg_namespace n ON n.oid = c.relnamespace
		WHERE c.relkind IN ('r', 'p', 'v', 'm', 'S') AND n.nspname NOT IN ('pg_catalog', 'information_schema')
		AND n.nspname NOT LIKE 'pg_toast%'`).Scan(&n)
	if err != nil {
		return false, fmt.Errorf("look for tables: %w", translate(err))
	}
	return n == 0, nil
}

// The functions below administer the server the register lives on rather
// than the register itself (the embedded default's start-up, restore and
// the test harness use them). Each takes a connection to another database
// of the server, such as postgres.

// DatabaseGetParams name a database to look for.
type DatabaseGetParams struct {
	Name string
	// Template looks only for a database marked as a template.
	Template bool
}

// DatabaseExists reports whether the database exists on conn's server.
func DatabaseExists(ctx context.Context, conn *pgx.Conn, p DatabaseGetParams) (bool, error) {
	var exists bool
	err := conn.QueryRow(ctx, `SELECT EXISTS (SELECT 1 FROM pg_database WHERE datname = $1 AND (datistemplate OR NOT $2))`,
		p.Name, p.Template).Scan(&exists)
	if err != nil {
		return false, fmt.Errorf("look for database %s: %w", p.Name, err)
	}
	return exists, nil
}

// DatabaseCreateParams name a database to create.
type DatabaseCreateParams struct {
	Name string
	// Template is the database to copy; "" for the server's default.
	Template string
}

// DatabaseCreate creates a database. A template another session is
// connected to gives an error whose text says it is "being accessed by
// other users" (PostgreSQL's own words), which the caller may retry.
func DatabaseCreate(ctx context.Context, conn *pgx.Conn, p DatabaseCreateParams) error {
	sql := "CREATE DATABASE " + pgx.Identifier{p.Name}.Sanitize()
	if p.Template != "" {
		sql += " TEMPLATE " + pgx.Identifier{p.Template}.Sanitize()
	}
	if _, err := conn.Exec(ctx, sql); err != nil {
		return fmt.Errorf("create database %s: %w", p.Name, err)
	}
	return nil
}

// DatabaseBusy reports whether err is DatabaseCreate's refusal to copy a
// template that another session is connected to.
func DatabaseBusy(err error) bool {
	return err != nil && strings.Contains(err.Error(), "being accessed by other users")
}

// DatabaseDrop drops a database if it exists, ending its sessions.
func DatabaseDrop(ctx context.Context, conn *pgx.Conn, name string) error {
	if _, err := conn.Exec(ctx, "DROP DATABASE IF EXISTS "+pgx.Identifier{name}.Sanitize()+" WITH (FORCE)"); err != nil {
		return fmt.Errorf("drop database %s: %w", name, err)
	}
	return nil
}

// DatabaseMakeTemplate marks a database as a template that no session may
// connect to, so that copies of it can be made at once.
func DatabaseMakeTemplate(ctx context.Context, conn *pgx.Conn, name string) error {
	if _, err := conn.Exec(ctx, "ALTER DATABASE "+pgx.Identifier{name}.Sanitize()+" WITH IS_TEMPLATE true ALLOW_CONNECTIONS false"); err != nil {
		return fmt.Errorf("make database %s a template: %w", name, err)
	}
	return nil
}

// AdvisoryLock takes the session-level advisory lock key on conn, waiting
// for it; the returned function releases it.
func AdvisoryLock(ctx context.Context, conn *pgx.Conn, key int64) (unlock func(), err error) {
	if _, err := conn.Exec(ctx, "SELECT pg_advisory_lock($1)", key); err != nil {
		return nil, fmt.Errorf("take advisory lock %d: %w", key, err)
	}
	return func() { conn.Exec(context.WithoutCancel(ctx), "SELECT pg_advisory_unlock($1)", key) }, nil
}

// DatabaseSettings are what a database was created with that a copy made
// for it must share: its owner, encoding and locale.
type DatabaseSettings struct {
	Owner, Encoding, Collate, Ctype string
	// LocaleProvider is c (libc) or i (ICU, with ICULocale).
	LocaleProvider, ICULocale string
}

// DatabaseSettingsGet returns the settings of database name.
func DatabaseSettingsGet(ctx context.Context, conn *pgx.Conn, name string) (DatabaseSettings, error) {
	var s DatabaseSettings
	err := conn.QueryRow(ctx, `SELECT pg_get_userbyid(datdba), pg_encoding_to_char(encoding), datcollate, datctype,
		datlocprovider::text, coalesce(daticulocale, '') FROM pg_database WHERE datname = $1`, name).
		Scan(&s.Owner, &s.Encoding, &s.Collate, &s.Ctype, &s.LocaleProvider, &s.ICULocale)
	if err != nil {
		return s, fmt.Errorf("read the settings of database %s: %w", name, translate(err))
	}
	return s, nil
}

// DatabaseCreateLike creates database name from template0 with the
// encoding and locale of s (its owner is the connected role).
func DatabaseCreateLike(ctx context.Context, conn *pgx.Conn, name string, s DatabaseSettings) error {
	sql := "CREATE DATABASE " + pgx.Identifier{name}.Sanitize() + " TEMPLATE template0 ENCODING " + quoteLiteral(s.Encoding) +
		" LC_COLLATE " + quoteLiteral(s.Collate) + " LC_CTYPE " + quoteLiteral(s.Ctype)
	if s.LocaleProvider == "i" {
		sql += " LOCALE_PROVIDER icu ICU_LOCALE " + quoteLiteral(s.ICULocale)
	}
	if _, err := conn.Exec(ctx, sql); err != nil {
		return fmt.Errorf("create database %s: %w", name, translate(err))
	}
	return nil
}

// DatabaseRename renames database from to to; no session may be
// connected to it.
func DatabaseRename(ctx context.Context, conn *pgx.Conn, from, to string) error {
	if _, err := conn.Exec(ctx, "ALTER DATABASE "+pgx.Identifier{from}.Sanitize()+" RENAME TO "+pgx.Identifier{to}.Sanitize()); err != nil {
		return fmt.Errorf("rename database %s to %s: %w", from, to, translate(err))
	}
	return nil
}

// DatabaseSetOwner makes role the owner of database name.
func DatabaseSetOwner(ctx context.Context, conn *pgx.Conn, name, role string) error {
	if _, err := conn.Exec(ctx, "ALTER DATABASE "+pgx.Identifier{name}.Sanitize()+" OWNER TO "+pgx.Identifier{role}.Sanitize()); err != nil {
		return fmt.Errorf("make %s the owner of database %s: %w", role, name, translate(err))
	}
	return nil
}
