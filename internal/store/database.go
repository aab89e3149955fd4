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
	ident := pgx.Identifier{name}.Sanitize()
	if _, err := c.Exec(ctx, "DROP DATABASE IF EXISTS "+ident+" WITH (FORCE)"); err != nil {
		return fmt.Errorf("drop database %s: %w", name, err)
	}
	if _, err := c.Exec(ctx, "CREATE DATABASE "+ident); err != nil {
		return fmt.Errorf("create database %s: %w", name, err)
	}
	return nil
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
