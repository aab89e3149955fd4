package store

import (
	"context"
	"fmt"

	"github.com/jackc/pgx/v5/pgxpool"
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

// RegisterCounts is the size of the register. Estimated says that the
// counts are the planner's estimates (pg_class.reltuples, as of the
// table's last ANALYZE), not counted row by row.
type RegisterCounts struct {
	Marks          int64
	HeightVersions int64
	Estimated      bool
}

// CountExactlyBelow is the size below which RegisterCount counts a table
// row by row; at or above it, the planner's estimate is quick and close
// (a count of every row of a national register takes seconds).
var CountExactlyBelow = int64(100000)

// RegisterCount counts marks and height versions: exactly, unless the
// planner estimates either table at CountExactlyBelow rows or more, in
// which case both are the estimates. applied is false (and the counts
// zero) while the tables that hold them do not exist yet.
func RegisterCount(ctx context.Context, pool *pgxpool.Pool) (n RegisterCounts, applied bool, err error) {
	if err := pool.QueryRow(ctx, "SELECT to_regclass('mark') IS NOT NULL AND to_regclass('height') IS NOT NULL").Scan(&applied); err != nil {
		return n, false, fmt.Errorf("look for register tables: %w", err)
	}
	if !applied {
		return n, false, nil
	}
	// reltuples is -1 for a table never analyzed or vacuumed.
	var marks, heights float64
	if err := pool.QueryRow(ctx, `SELECT (SELECT reltuples FROM pg_class WHERE oid = 'mark'::regclass),
		(SELECT reltuples FROM pg_class WHERE oid = 'height'::regclass)`).Scan(&marks, &heights); err != nil {
		return n, true, fmt.Errorf("estimate marks and height versions: %w", err)
	}
	if marks >= 0 && heights >= 0 && (int64(marks) >= CountExactlyBelow || int64(heights) >= CountExactlyBelow) {
		return RegisterCounts{Marks: int64(marks), HeightVersions: int64(heights), Estimated: true}, true, nil
	}
	if err := pool.QueryRow(ctx, "SELECT (SELECT count(*) FROM mark), (SELECT count(*) FROM height)").Scan(&n.Marks, &n.HeightVersions); err != nil {
		return n, true, fmt.Errorf("count marks and height versions: %w", err)
	}
	return n, true, nil
}

// SchemaLatest returns the newest schema version this cairn knows, from
// the embedded migrations alone.
func SchemaLatest() (int64, error) {
	vs, err := embeddedVersions()
	if err != nil {
		return 0, fmt.Errorf("list migrations: %w", err)
	}
	if len(vs) == 0 {
		return 0, fmt.Errorf("list migrations: none embedded")
	}
	return vs[len(vs)-1], nil
}
