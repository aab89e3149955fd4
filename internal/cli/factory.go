package cli

import (
	"context"
	"fmt"
	"os"
	"sync"

	"github.com/jackc/pgx/v5/pgxpool"

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
	pool        *pgxpool.Pool
	connURL     string
	connErr     error
	migrateErr  error
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
	return localpg.New(dir), nil
}

// Conn connects to the register (starting the embedded default when it is
// the one chosen) without touching its schema. It connects once.
func (f *Factory) Conn(ctx context.Context) (*pgxpool.Pool, error) {
	f.connOnce.Do(func() {
		src := f.Source()
		url := src.URL
		if src.Embedded {
			c, err := f.Cluster()
			if err != nil {
				f.connErr = err
				return
			}
			if url, err = c.Start(ctx); err != nil {
				f.connErr = fmt.Errorf("start the embedded default: %w", err)
				return
			}
		}
		pool, err := store.Open(ctx, url)
		if err != nil {
			f.connErr = fmt.Errorf("open register (%s): %w", src.From, err)
			return
		}
		f.pool, f.connURL = pool, url
	})
	return f.pool, f.connErr
}

// ConnURL returns the connection string Conn uses ("" for the PG*
// variables), starting the embedded default when it is the one chosen.
func (f *Factory) ConnURL(ctx context.Context) (string, error) {
	if _, err := f.Conn(ctx); err != nil {
		return "", err
	}
	return f.connURL, nil
}

// Pool connects to the register like Conn and brings its schema up to
// date, once.
func (f *Factory) Pool(ctx context.Context) (*pgxpool.Pool, error) {
	f.migrateOnce.Do(func() {
		pool, err := f.Conn(ctx)
		if err != nil {
			f.migrateErr = err
			return
		}
		if err := store.Migrate(ctx, pool); err != nil {
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
