// Package pgtest gives each test its own fresh, migrated PostgreSQL
// database.
//
// Where the server comes from, in order:
//
//  1. CAIRN_TEST_DATABASE_URL: a server URL; each test gets a database made
//     from a migrated template on it, dropped when the test ends.
//  2. (to come) a Docker engine through testcontainers-go.
//  3. (to come) a throwaway cluster from the machine's PostgreSQL binaries.
//  4. Otherwise the test fails with a message saying how to provide one.
//
// It never skips.
package pgtest

import (
	"context"
	"crypto/rand"
	"crypto/sha256"
	"encoding/hex"
	"fmt"
	"io/fs"
	"os"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/jackc/pgx/v5"
	"github.com/jackc/pgx/v5/pgxpool"

	"cairn/internal/store"
	"cairn/migrations"
)

// DB is one test's database.
type DB struct {
	Pool *pgxpool.Pool
	// URL connects to this database (for cairn processes a test starts).
	URL string
}

var (
	serverOnce sync.Once
	serverURL  string
	serverErr  error
)

// server returns the URL of a server's maintenance database.
func server() (string, error) {
	serverOnce.Do(func() {
		if u := os.Getenv("CAIRN_TEST_DATABASE_URL"); u != "" {
			serverURL = u
			return
		}
		serverErr = fmt.Errorf("pgtest: no PostgreSQL for tests: set CAIRN_TEST_DATABASE_URL (e.g. postgres://postgres@127.0.0.1:5432/postgres), or start one with `docker compose up -d`")
	})
	return serverURL, serverErr
}

// New returns a fresh, migrated database for t, dropped when t ends.
func New(t testing.TB) *DB {
	t.Helper()
	ctx := context.Background()
	admin, err := server()
	if err != nil {
		t.Fatal(err)
	}
	tmpl, err := template(ctx, admin)
	if err != nil {
		t.Fatalf("pgtest: template database: %v", err)
	}
	name := "cairn_test_" + randomHex(6)
	if err := createFrom(ctx, admin, name, tmpl); err != nil {
		t.Fatalf("pgtest: create test database: %v", err)
	}
	url, err := withDatabase(admin, name)
	if err != nil {
		t.Fatal(err)
	}
	pool, err := store.Open(ctx, url)
	if err != nil {
		t.Fatalf("pgtest: %v", err)
	}
	t.Cleanup(func() {
		pool.Close()
		if err := exec(context.Background(), admin, "DROP DATABASE IF EXISTS "+pgx.Identifier{name}.Sanitize()+" WITH (FORCE)"); err != nil {
			t.Logf("pgtest: drop %s: %v", name, err)
		}
	})
	return &DB{Pool: pool, URL: url}
}

// template returns the name of a database migrated to the current schema,
// made once per set of migrations (its name carries their hash) and shared
// by all tests and test processes.
func template(ctx context.Context, admin string) (string, error) {
	name := "cairn_tmpl_" + migrationsHash()[:12]
	conn, err := pgx.Connect(ctx, admin)
	if err != nil {
		return "", err
	}
	defer conn.Close(ctx)
	// Test processes of several packages run at once: take turns.
	if _, err := conn.Exec(ctx, "SELECT pg_advisory_lock(727411)"); err != nil {
		return "", err
	}
	defer conn.Exec(context.WithoutCancel(ctx), "SELECT pg_advisory_unlock(727411)")
	var exists bool
	if err := conn.QueryRow(ctx, "SELECT EXISTS (SELECT 1 FROM pg_database WHERE datname = $1 AND datistemplate)", name).Scan(&exists); err != nil {
		return "", err
	}
	if exists {
		return name, nil
	}
	ident := pgx.Identifier{name}.Sanitize()
	if _, err := conn.Exec(ctx, "DROP DATABASE IF EXISTS "+ident+" WITH (FORCE)"); err != nil {
		return "", err
	}
	if _, err := conn.Exec(ctx, "CREATE DATABASE "+ident); err != nil {
		return "", err
	}
	url, err := withDatabase(admin, name)
	if err != nil {
		return "", err
	}
	pool, err := store.Open(ctx, url)
	if err != nil {
		return "", err
	}
	err = store.Migrate(ctx, pool)
	pool.Close()
	if err != nil {
		return "", fmt.Errorf("migrate: %w", err)
	}
	if _, err := conn.Exec(ctx, "ALTER DATABASE "+ident+" WITH IS_TEMPLATE true ALLOW_CONNECTIONS false"); err != nil {
		return "", err
	}
	return name, nil
}

// createFrom creates database name as a copy of tmpl, retrying while another
// session briefly holds the template.
func createFrom(ctx context.Context, admin, name, tmpl string) error {
	var err error
	for i := 0; i < 50; i++ {
		err = exec(ctx, admin, "CREATE DATABASE "+pgx.Identifier{name}.Sanitize()+" TEMPLATE "+pgx.Identifier{tmpl}.Sanitize())
		if err == nil || !strings.Contains(err.Error(), "being accessed by other users") {
			return err
		}
		time.Sleep(100 * time.Millisecond)
	}
	return err
}

func exec(ctx context.Context, url, sql string) error {
	conn, err := pgx.Connect(ctx, url)
	if err != nil {
		return err
	}
	defer conn.Close(ctx)
	_, err = conn.Exec(ctx, sql)
	return err
}

// withDatabase returns url with its database replaced by name.
func withDatabase(url, name string) (string, error) {
	cfg, err := pgx.ParseConfig(url)
	if err != nil {
		return "", fmt.Errorf("pgtest: parse %q: %w", url, err)
	}
	host := cfg.Host
	if strings.HasPrefix(host, "/") {
		return fmt.Sprintf("host=%s port=%d user=%s dbname=%s", host, cfg.Port, cfg.User, name), nil
	}
	return fmt.Sprintf("postgres://%s@%s:%d/%s?sslmode=disable", cfg.User, host, cfg.Port, name), nil
}

func migrationsHash() string {
	h := sha256.New()
	_ = fs.WalkDir(migrations.FS, ".", func(path string, d fs.DirEntry, err error) error {
		if err != nil || d.IsDir() {
			return err
		}
		b, err := fs.ReadFile(migrations.FS, path)
		h.Write([]byte(path))
		h.Write(b)
		return err
	})
	return hex.EncodeToString(h.Sum(nil))
}

func randomHex(n int) string {
	b := make([]byte, n)
	_, _ = rand.Read(b)
	return hex.EncodeToString(b)
}
