package store

import (
	"context"
	"fmt"
	"io/fs"

	"github.com/jackc/pgx/v5/pgxpool"
	"github.com/pressly/goose/v3"

	"cairn/migrations"
)

// Server describes the PostgreSQL server a pool is connected to.
type Server struct {
	Host     string // host name, address, or folder of the Unix socket
	Port     uint16
	Database string
	User     string
	Version  string // the server's version, e.g. "15.19"
}

// ServerGet describes the server and database of pool.
func ServerGet(ctx context.Context, pool *pgxpool.Pool) (Server, error) {
	c := pool.Config().ConnConfig
	s := Server{Host: c.Host, Port: c.Port, Database: c.Database, User: c.User}
	if err := pool.QueryRow(ctx, "SHOW server_version").Scan(&s.Version); err != nil {
		return s, fmt.Errorf("ask server version: %w", err)
	}
	return s, nil
}

// RegisterCounts is the size of the register.
type RegisterCounts struct {
	Marks          int64
	HeightVersions int64
}

// RegisterCount counts marks and height versions. applied is false (and
// the counts zero) while the tables that hold them do not exist yet.
func RegisterCount(ctx context.Context, pool *pgxpool.Pool) (n RegisterCounts, applied bool, err error) {
	if err := pool.QueryRow(ctx, "SELECT to_regclass('mark') IS NOT NULL AND to_regclass('height') IS NOT NULL").Scan(&applied); err != nil {
		return n, false, fmt.Errorf("look for register tables: %w", err)
	}
	if !applied {
		return n, false, nil
	}
	if err := pool.QueryRow(ctx, "SELECT (SELECT count(*) FROM mark), (SELECT count(*) FROM height)").Scan(&n.Marks, &n.HeightVersions); err != nil {
		return n, true, fmt.Errorf("count marks and height versions: %w", err)
	}
	return n, true, nil
}

// SchemaLatest returns the newest schema version this cairn knows, from
// the embedded migrations alone.
func SchemaLatest() (int64, error) {
	files, err := fs.Glob(migrations.FS, "*.sql")
	if err != nil {
		return 0, fmt.Errorf("list migrations: %w", err)
	}
	var latest int64
	for _, name := range files {
		v, err := goose.NumericComponent(name)
		if err != nil {
			return 0, fmt.Errorf("migration %s: %w", name, err)
		}
		latest = max(latest, v)
	}
	return latest, nil
}
