package pgtest

import (
	"context"
	"fmt"
	"os"
	"os/exec"
	"strings"
	"testing"

	"github.com/jackc/pgx/v5"
)

func TestNewGivesIsolatedMigratedDatabases(t *testing.T) {
	t.Parallel()
	a, b := New(t), New(t)
	ctx := context.Background()
	var na, nb string
	if err := a.Pool.QueryRow(ctx, "SELECT current_database()").Scan(&na); err != nil {
		t.Fatal(err)
	}
	if err := b.Pool.QueryRow(ctx, "SELECT current_database()").Scan(&nb); err != nil {
		t.Fatal(err)
	}
	if na == nb {
		t.Fatalf("two tests share database %s", na)
	}
	var v int64
	if err := a.Pool.QueryRow(ctx, "SELECT max(version_id) FROM goose_db_version").Scan(&v); err != nil {
		t.Fatalf("test database is not migrated: %v", err)
	}
	if v < 1 {
		t.Fatalf("schema version %d", v)
	}
}

// TestHelperHarness is run as a separate process by the tests of the
// fallback order: it takes a database from the harness and prints where
// it came from and whether it is reached over TCP or a Unix socket.
func TestHelperHarness(t *testing.T) {
	if os.Getenv("PGTEST_HELPER") == "" {
		return
	}
	db := New(t)
	var tcp bool
	if err := db.Pool.QueryRow(context.Background(), "SELECT inet_server_addr() IS NOT NULL").Scan(&tcp); err != nil {
		t.Fatal(err)
	}
	fmt.Printf("kind=%s tcp=%v\n", serverKind, tcp)
}

// harness runs TestHelperHarness in a new process with CAIRN_TEST_DATABASE_URL
// unset and the given extra environment.
func harness(t *testing.T, env ...string) (string, error) {
	t.Helper()
	cmd := exec.Command(os.Args[0], "-test.run=^TestHelperHarness$", "-test.v")
	for _, kv := range os.Environ() {
		if !strings.HasPrefix(kv, "CAIRN_TEST_") {
			cmd.Env = append(cmd.Env, kv)
		}
	}
	cmd.Env = append(cmd.Env, append([]string{"PGTEST_HELPER=1"}, env...)...)
	out, err := cmd.CombinedOutput()
	return string(out), err
}

func TestFallsBackToThrowawayCluster(t *testing.T) {
	t.Parallel()
	out, err := harness(t, "CAIRN_TEST_SERVER=cluster")
	if err != nil || !strings.Contains(out, "kind=cluster tcp=false") {
		t.Fatalf("harness with machine binaries: %v\n%s", err, out)
	}
}

func TestDockerWhenReachable(t *testing.T) {
	t.Parallel()
	out, err := harness(t, "CAIRN_TEST_SERVER=docker")
	if dockerEngine() == nil {
		if err != nil || !strings.Contains(out, "kind=docker tcp=true") {
			t.Fatalf("harness with a Docker engine: %v\n%s", err, out)
		}
		return
	}
	// No engine here: the harness must fail loudly, saying what to do.
	if err == nil || strings.Contains(out, "SKIP") {
		t.Fatalf("harness without Docker did not fail:\n%s", out)
	}
	for _, want := range []string{"Docker:", "CAIRN_TEST_DATABASE_URL", "apt install postgresql"} {
		if !strings.Contains(out, want) {
			t.Errorf("failure does not say %q:\n%s", want, out)
		}
	}
}

func TestFailsLoudlyWithNoServer(t *testing.T) {
	t.Parallel()
	// A temporary folder that cannot be made leaves no throwaway cluster.
	out, err := harness(t, "CAIRN_TEST_SERVER=cluster", "TMPDIR=/nonexistent/cairn")
	if err == nil || strings.Contains(out, "SKIP") || !strings.Contains(out, "--- FAIL") {
		t.Fatalf("harness with no server did not fail:\n%s", out)
	}
	if !strings.Contains(out, "no PostgreSQL for tests") || !strings.Contains(out, "CAIRN_TEST_DATABASE_URL=") {
		t.Errorf("failure does not say how to provide a server:\n%s", out)
	}
}

func TestWithDatabase(t *testing.T) {
	t.Parallel()
	for _, tc := range []struct{ in, want string }{
		{"postgres://u:secret@h:5433/postgres?sslmode=require", "postgres://u:secret@h:5433/x?sslmode=require"},
		{"postgres:///postgres?host=%2Ftmp%2Fs&user=cairn", "postgres:///x?host=%2Ftmp%2Fs&user=cairn"},
		{"host=/tmp/s user=cairn dbname=postgres", "host=/tmp/s user=cairn dbname=postgres dbname='x'"},
	} {
		got, err := withDatabase(tc.in, "x")
		if err != nil || got != tc.want {
			t.Errorf("withDatabase(%q) = %q, %v; want %q", tc.in, got, err, tc.want)
		}
		cfg, err := pgx.ParseConfig(got)
		if err != nil || cfg.Database != "x" {
			t.Errorf("%q parses to database %q, %v", got, cfg.Database, err)
		}
	}
}
