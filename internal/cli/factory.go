package cli

import (
	"context"
	"fmt"
	"os"
	"sync"

	"github.com/jackc/pgx/v5/pgxpool"

	"cairn/internal/localpg"
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

	once sync.Once
	pool *pgxpool.Pool
	err  error
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

// Pool connects to the register (starting the embedded default when it is
// the one chosen) and brings its schema up to date. It connects once.
func (f *Factory) Pool(ctx context.Context) (*pgxpool.Pool, error) {
	f.once.Do(func() {
		src := f.Source()
		url := src.URL
		if src.Embedded {
			c, err := localpg.Default()
			if err != nil {
				f.err = err
				return
			}
			if url, err = c.Start(ctx); err != nil {
				f.err = err
				return
			}
		}
		pool, err := store.Open(ctx, url)
		if err != nil {
			f.err = fmt.Errorf("open register (%s): %w", src.From, err)
			return
		}
		if err := store.Migrate(ctx, pool); err != nil {
			pool.Close()
			f.err = fmt.Errorf("bring register schema up to date: %w", err)
			return
		}
		f.pool = pool
	})
	return f.pool, f.err
}

// Close releases the database connection, if one was made.
func (f *Factory) Close() {
	if f.pool != nil {
		f.pool.Close()
	}
}
