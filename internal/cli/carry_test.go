package cli

import (
	"context"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"cairn/internal/localpg"

	"github.com/jackc/pgx/v5/pgxpool"
)

// embeddedEnv is the environment of an embedded default of its own, in a
// new data folder the server's user may enter.
func embeddedEnv(t *testing.T) map[string]string {
	t.Helper()
	data := t.TempDir()
	if os.Geteuid() == 0 {
		for _, d := range []string{filepath.Dir(data), data} {
			if err := os.Chmod(d, 0o711); err != nil {
				t.Fatal(err)
			}
		}
	}
	env := map[string]string{"XDG_DATA_HOME": data, localpg.MakeServerUserEnv: "1"}
	t.Cleanup(func() { runDB(t, testFactory(env), "db", "stop") })
	return env
}

// A register backed up from one cluster and restored into another, whose
// transaction counter starts again low, goes on with numbers of its own:
// the writes after the restore are commits of their own, and the commit
// chain of every table verifies. (Before migrations/00014 a new
// transaction took the id of a recorded commit, its rows joined that
// commit, and the audit reported the commit's rows changed.)
func TestRestoreIntoAnotherClusterGoesOn(t *testing.T) {
	t.Parallel()
	first, second := embeddedEnv(t), embeddedEnv(t)
	// Forty commits in the first cluster, after 5 000 transactions of
	// other work; the second cluster's counter is brought to just below
	// the first of them, as a register with a long past meets a new
	// cluster.
	burnTo(t, first, 5000)
	for i := range 40 {
		if _, errOut, err := runDB(t, testFactory(first), "mark", "add", fmt.Sprintf("TC-%04d", 100+i), "--directions", "set before the backup"); err != nil {
			t.Fatalf("write %d before the backup: %v\n%s", i+1, err, errOut)
		}
	}
	file := filepath.Join(t.TempDir(), "register.dump")
	if _, errOut, err := runDB(t, testFactory(first), "backup", file); err != nil {
		t.Fatalf("backup: %v\n%s", err, errOut)
	}
	if out, errOut, err := runDB(t, testFactory(second), "restore", file); err != nil {
		t.Fatalf("restore: %v\n%s\n%s", err, out, errOut)
	}
	var low int64
	onAdmin(t, first, func(ctx context.Context, pool *pgxpool.Pool) error {
		return pool.QueryRow(ctx, "SELECT min(xid)::text::bigint FROM register_commit WHERE seq > 0").Scan(&low)
	})
	burnTo(t, second, low-1)
	// As many after, so that the second cluster's counter passes the
	// numbers of the first's commits.
	for i := range 40 {
		if _, errOut, err := runDB(t, testFactory(second), "mark", "add", fmt.Sprintf("TC-%04d", 200+i), "--directions", "set after the restore"); err != nil {
			t.Fatalf("write %d after the restore: %v\n%s", i+1, err, errOut)
		}
	}
	out, errOut, err := runDB(t, testFactory(second), "audit", "verify")
	if err != nil || !strings.Contains(errOut, "evidence: 80 commit(s) verify") {
		t.Fatalf("audit verify after the restore and forty writes: %v\n%s\n%s", err, out, errOut)
	}
}

// onAdmin runs fn over the owner's connection to the embedded default of
// env.
func onAdmin(t *testing.T, env map[string]string, fn func(context.Context, *pgxpool.Pool) error) {
	t.Helper()
	f := testFactory(env)
	defer f.Close()
	ctx := context.Background()
	pool, err := f.Admin(ctx)
	if err != nil {
		t.Fatal(err)
	}
	if err := fn(ctx, pool); err != nil {
		t.Fatal(err)
	}
}

// burnTo spends transaction ids of env's cluster, one transaction each,
// until the server's next id is past xid.
func burnTo(t *testing.T, env map[string]string, xid int64) {
	t.Helper()
	onAdmin(t, env, func(ctx context.Context, pool *pgxpool.Pool) error {
		for {
			var cur int64
			if err := pool.QueryRow(ctx, "SELECT pg_current_xact_id()::text::bigint").Scan(&cur); err != nil {
				return err
			}
			if cur >= xid {
				return nil
			}
		}
	})
}
