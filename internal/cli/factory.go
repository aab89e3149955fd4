package cli

import (
	"context"
	"fmt"
	"os"
	"sync"

	"github.com/jackc/pgx/v5/pgxpool"

	"cairn/internal/auditcache"
	"cairn/internal/localpg"
	"cairn/internal/register"
	"cairn/internal/store"
)

// Factory carries what commands need. Costly parts (the database) are made
// on first use, so `--help` and flag errors never open a database.
type Factory struct {
	IO      *IOStreams
	Version string

	// DatabaseURL is the --db flag; empty means CAIRN_DATABASE_URL, then the
	// standard PG* variables, then the embedded default.
	DatabaseURL string
	// Getenv reads the environment (os.Getenv unless a test replaces it).
	Getenv func(string) string

	connOnce    sync.Once
	migrateOnce sync.Once
	adminOnce   sync.Once
	pool        *pgxpool.Pool
	connURL     string
	connErr     error
	migrateErr  error
	// The owner's connection: the embedded default's owner role, or the
	// everyday connection itself on a server named by the user.
	adminPool *pgxpool.Pool
	adminURL  string
	adminErr  error
}

// NewFactory returns a factory over the given streams.
func NewFactory(ios *IOStreams, version string) *Factory {
	return &Factory{IO: ios, Version: version, Getenv: os.Getenv}
}

// DatabaseSource says where the register lives and how it was chosen.
type DatabaseSource struct {
	URL      string // connection string for pgx ("" = libpq defaults and PG* variables)
	From     string // "--db", "CAIRN_DATABASE_URL", "PG* variables" or "embedded default"
	Embedded bool
}

// pgVars are the standard libpq variables that name a server.
var pgVars = []string{"PGHOST", "PGHOSTADDR", "PGPORT", "PGDATABASE", "PGUSER", "PGSERVICE"}

// Source resolves which database to use, without connecting.
func (f *Factory) Source() DatabaseSource {
	if f.DatabaseURL != "" {
		return DatabaseSource{URL: f.DatabaseURL, From: "--db"}
	}
	if u := f.Getenv("CAIRN_DATABASE_URL"); u != "" {
		return DatabaseSource{URL: u, From: "CAIRN_DATABASE_URL"}
	}
	for _, v := range pgVars {
		if f.Getenv(v) != "" {
			return DatabaseSource{From: "PG* variables"}
		}
	}
	return DatabaseSource{From: "embedded default", Embedded: true}
}

// Cluster returns the embedded default cluster, in the data folder named
// by the factory's environment.
func (f *Factory) Cluster() (*localpg.Cluster, error) {
	dir, err := localpg.DefaultDir(f.Getenv)
	if err != nil {
		return nil, err
	}
	c := localpg.New(dir)
	c.MakeServerUser = f.Getenv(localpg.MakeServerUserEnv) == "1"
	if f.IO != nil {
		c.Notify = f.IO.ErrOut
	}
	return c, nil
}

// The register is reached by two connections, made here and nowhere else:
//
//   - Conn, the everyday one, which every command uses for its work. On
//     the embedded default it logs in as localpg.EverydayUser, a member of
//     cairn_publisher: neither the owner nor a superuser, so it can neither
//     disable triggers nor set session_replication_role.
//   - Admin, the owner's, for migrations and the administration of the
//     register (db roles, backup, restore, the demo's database). On the
//     embedded default it logs in as the owner, localpg.Superuser.
//
// On a server the user names (--db, CAIRN_DATABASE_URL, PG* variables) the
// two are one: cairn connects as the user says, and that role migrates.

// Conn connects to the register (starting the embedded default when it is
// the one chosen) without touching its schema. It connects once.
func (f *Factory) Conn(ctx context.Context) (*pgxpool.Pool, error) {
	f.connOnce.Do(func() {
		src := f.Source()
		url, admin, err := f.urls(ctx)
		if err != nil {
			f.connErr = err
			return
		}
		pool, err := store.Open(ctx, url)
		if err != nil && src.Embedded {
			// A cluster taken as secured since its start may have lost
			// its database or roles: secure it again, and connect once
			// more.
			if c, cerr := f.Cluster(); cerr == nil && c.Resecure() == nil {
				if url, admin, err = f.urls(ctx); err != nil {
					f.connErr = err
					return
				}
				pool, err = store.Open(ctx, url)
			}
		}
		if err != nil {
			f.connErr = fmt.Errorf("open register (%s): %w", src.From, err)
			return
		}
		f.pool, f.connURL, f.adminURL = pool, url, admin
	})
	return f.pool, f.connErr
}

// urls are the everyday and the owner's connection strings of the
// register chosen (Source), starting the embedded default when it is the
// one chosen.
func (f *Factory) urls(ctx context.Context) (url, admin string, err error) {
	src := f.Source()
	if !src.Embedded {
		return src.URL, src.URL, nil
	}
	c, err := f.Cluster()
	if err != nil {
		return "", "", err
	}
	if admin, err = c.Start(ctx); err != nil {
		return "", "", fmt.Errorf("start the embedded default: %w", err)
	}
	return c.UserURL(localpg.Database), admin, nil
}

// Admin connects to the register as its owner (see Conn), without
// touching its schema. It connects once.
func (f *Factory) Admin(ctx context.Context) (*pgxpool.Pool, error) {
	f.adminOnce.Do(func() {
		if _, f.adminErr = f.Conn(ctx); f.adminErr != nil {
			return
		}
		if f.adminURL == f.connURL {
			f.adminPool = f.pool
			return
		}
		pool, err := store.Open(ctx, f.adminURL)
		if err != nil {
			f.adminErr = fmt.Errorf("open register as its owner (%s): %w", f.Source().From, err)
			return
		}
		f.adminPool = pool
	})
	return f.adminPool, f.adminErr
}

// AdminURL returns the connection string Admin uses ("" for the PG*
// variables).
func (f *Factory) AdminURL(ctx context.Context) (string, error) {
	if _, err := f.Conn(ctx); err != nil {
		return "", err
	}
	return f.adminURL, nil
}

// Pool connects to the register like Conn and brings its schema up to
// date, once, through the owner's connection (Admin).
func (f *Factory) Pool(ctx context.Context) (*pgxpool.Pool, error) {
	f.migrateOnce.Do(func() {
		// Up to date, as nearly always: said on the everyday connection,
		// without the owner's (on the embedded default a connection of
		// its own, with its password's SCRAM exchange).
		pool, err := f.Conn(ctx)
		if err != nil {
			f.migrateErr = err
			return
		}
		if ok, err := store.UpToDate(ctx, pool); err == nil && ok {
			return
		}
		admin, err := f.Admin(ctx)
		if err != nil {
			f.migrateErr = err
			return
		}
		if err := store.Migrate(ctx, admin); err != nil {
			f.migrateErr = fmt.Errorf("bring register schema up to date: %w", err)
		}
	})
	if f.migrateErr != nil {
		return nil, f.migrateErr
	}
	return f.pool, nil
}

// Close releases the database connection, if one was made.
func (f *Factory) Close() {
	if f.adminPool != nil && f.adminPool != f.pool {
		f.adminPool.Close()
	}
	if f.pool != nil {
		f.pool.Close()
	}
}

// openRegister connects to the register f names, its schema brought up to
// date.
func openRegister(ctx context.Context, f *Factory) (*register.Register, error) {
	pool, err := f.Pool(ctx)
	if err != nil {
		return nil, err
	}
	return register.New(pool), nil
}

// openAdminRegister is openRegister over the owner's connection (Admin),
// for the audit, whose comparison of the schema makes and drops a scratch
// database. On a server named by --db the two are the same connection.
func openAdminRegister(ctx context.Context, f *Factory) (*register.Register, error) {
	if _, err := f.Pool(ctx); err != nil {
		return nil, err
	}
	admin, err := f.Admin(ctx)
	if err != nil {
		return nil, err
	}
	r := register.New(admin)
	useSchemaCache(r, false)
	return r, nil
}

// useSchemaCache makes r's audit keep the reference schema (a database
// freshly migrated by this binary) in the user's cache between runs
// (auditcache.Default), unless there is no cache directory; with fresh,
// it makes a scratch database again and replaces what was kept.
func useSchemaCache(r *register.Register, fresh bool) {
	if d, ok := auditcache.Default(); ok {
		d.Refresh = fresh
		r.UseSchemaCache(d)
	}
}
