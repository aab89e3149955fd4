package cli

import (
	"bytes"
	"context"
	"errors"
	"fmt"
	"os/exec"
	"strings"
	"syscall"
	"testing"
	"time"

	"github.com/jackc/pgx/v5/pgxpool"

	"cairn/internal/localpg"
	"cairn/internal/pgtest"
	"cairn/internal/registertest"
	"cairn/internal/store"
)

// faultGuard bounds how long a fault test waits for a cairn process: a
// guard against a hang, not a measure of time.
const faultGuard = 2 * time.Minute

// stalledCommand is a cairn process held inside its own transaction by a
// lock that another connection holds.
type stalledCommand struct {
	cmd     *exec.Cmd
	exited  chan error
	stderr  *bytes.Buffer
	backend int    // the process id of its server session
	release func() // rolls the holding transaction back
}

// holdLock runs the statements of hold in a transaction of its own on pool
// and returns the function that rolls it back (also called when the test
// ends).
func holdLock(t *testing.T, pool *pgxpool.Pool, hold ...string) func() {
	t.Helper()
	ctx := context.Background()
	tx, err := pool.Begin(ctx)
	if err != nil {
		t.Fatal(err)
	}
	for _, sql := range hold {
		if _, err := tx.Exec(ctx, sql); err != nil {
			t.Fatalf("%s: %v", sql, err)
		}
	}
	released := false
	release := func() {
		if !released {
			released = true
			_ = tx.Rollback(ctx)
		}
	}
	t.Cleanup(release)
	return release
}

// stallCommand takes the locks of hold on pool's database, starts cairn
// with args against url (under ctx, a guard against a hang), and returns
// once the process's session waits for one of them with its transaction
// open and holding a transaction id, that is, having written or locked
// rows.
func stallCommand(t *testing.T, ctx context.Context, pool *pgxpool.Pool, url string, hold []string, args ...string) *stalledCommand {
	t.Helper()
	s := &stalledCommand{exited: make(chan error, 1), stderr: &bytes.Buffer{}}
	s.release = holdLock(t, pool, hold...)
	s.cmd = exec.CommandContext(ctx, cairnBinary(t), append([]string{"--db", url}, args...)...)
	s.cmd.Stderr = s.stderr
	// Past the guard, a hung process is asked for its goroutines' stacks
	// (they end up in its stderr, in the failure), then killed.
	s.cmd.Cancel = func() error { return s.cmd.Process.Signal(syscall.SIGQUIT) }
	s.cmd.WaitDelay = 5 * time.Second
	if err := s.cmd.Start(); err != nil {
		t.Fatal(err)
	}
	go func() { s.exited <- s.cmd.Wait() }()
	t.Cleanup(func() { _ = s.cmd.Process.Kill() }) // done already, if all went well
	waitFor(t, "cairn "+args[0]+" to wait inside its transaction", func() bool {
		select {
		case err := <-s.exited:
			t.Fatalf("cairn %s ended before it was stopped: %v: %s", strings.Join(args, " "), err, s.stderr.String())
		default:
		}
		var pid int
		err := pool.QueryRow(context.Background(), `SELECT pid FROM pg_stat_activity
			WHERE datname = current_database() AND wait_event_type = 'Lock'
			AND backend_xid IS NOT NULL AND pid <> pg_backend_pid()`).Scan(&pid)
		if err == nil {
			s.backend = pid
			return true
		}
		return false
	})
	return s
}

// sessionGone waits until the server session pid has ended.
func sessionGone(t *testing.T, pool *pgxpool.Pool, pid int) {
	t.Helper()
	waitFor(t, "the session of the stopped cairn to end", func() bool {
		var n int
		if err := pool.QueryRow(context.Background(), "SELECT count(*) FROM pg_stat_activity WHERE pid = $1", pid).Scan(&n); err != nil {
			t.Fatal(err)
		}
		return n == 0
	})
}

// A cairn process killed with SIGKILL in the middle of each write command,
// inside its transaction, leaves every table of the register as it was;
// the audit passes; and the same command then succeeds.
//
// To kill each at that point every time, another connection holds a lock
// the command needs part way: the process starts its transaction, writes
// or locks rows, then waits for the lock, and is killed while it waits.
// (run record has a test of its own, TestRunRecordKilledLeavesNothing.)
func TestWriteCommandsKilledLeaveNothing(t *testing.T) {
	t.Parallel()
	height := []string{"height", "set", "--in-force-from", inForceNow(), "BM2", "783.250", "--unit", "m", "--datum", "NAVD88",
		"--source", "Outside check (invented citation)", "--reason", "outside check", "--by", "test"}
	cases := []struct {
		name string
		// hold takes the lock the command meets part way.
		hold []string
		// args are the command's; draft, in them, stands for a draft
		// adjustment of run 1 made for the case.
		args []string
	}{
		// The mark's row is written, then its designation waits on the
		// same designation, written by the holder and not yet committed.
		{"mark add", []string{"INSERT INTO mark (designation, created_by) VALUES ('TC-0412', 'holder')"},
			[]string{"mark", "add", "TC-0412", "--type", "bronze disk", "--by", "test"}},
		// The report's row is written, then its check that the mark
		// exists waits on the mark's row.
		{"mark condition", []string{"SELECT 1 FROM mark WHERE designation = 'BM2' FOR UPDATE"},
			[]string{"mark", "condition", "BM2", "disturbed", "--note", "post tilted", "--by", "test"}},
		// The datum's row is written, then its code waits on the same
		// code, not yet committed.
		{"datum add", []string{"INSERT INTO datum (code, name, created_by) VALUES ('OBLD61', 'holder', 'holder')"},
			[]string{"datum", "add", "OBLD61", "--name", "Orrin Bay Local Datum 1961", "--by", "test"}},
		// The mark is locked and its latest version read; the new
		// version waits.
		{"height set", []string{"LOCK TABLE height IN SHARE MODE"}, height},
		// The same for a withdrawal, a version with no value.
		{"height withdraw", []string{"LOCK TABLE height IN SHARE MODE"},
			[]string{"height", "withdraw", "--in-force-from", inForceNow(), "BM1", "--datum", "NAVD88", "--reason", "mark destroyed", "--by", "test"}},
		// The adjustment, its runs and its held marks are written; its
		// results wait.
		{"adjust", []string{"LOCK TABLE adjustment_result IN SHARE MODE"},
			[]string{"adjust", "1", "--hold", "BM1", "--by", "test"}},
		// The adjustment and its marks are locked and the publication
		// event written; the new versions wait.
		{"publish", []string{"LOCK TABLE height IN SHARE MODE"},
			[]string{"publish", "draft", "--reason", "reviewed", "--yes", "--by", "test"}},
		// The adjustment is locked; the discard event waits.
		{"discard", []string{"LOCK TABLE adjustment_event IN SHARE MODE"},
			[]string{"discard", "draft", "--reason", "not wanted", "--yes", "--by", "test"}},
	}
	for _, c := range cases {
		t.Run(strings.ReplaceAll(c.name, " ", "-"), func(t *testing.T) {
			t.Parallel()
			db := pgtest.New(t)
			seedWorked(t, db, 1)
			args := append([]string(nil), c.args...)
			for i, a := range args {
				if a == "draft" {
					args[i] = adjustForTest(t, db.URL, "1")
				}
			}
			before := registertest.Counts(t, db.Pool)
			ctx, cancel := context.WithTimeout(context.Background(), faultGuard)
			defer cancel()

			s := stallCommand(t, ctx, db.Pool, db.URL, c.hold, args...)
			if err := s.cmd.Process.Signal(syscall.SIGKILL); err != nil {
				t.Fatal(err)
			}
			err := <-s.exited
			var ee *exec.ExitError
			if !errors.As(err, &ee) || ee.Sys().(syscall.WaitStatus).Signal() != syscall.SIGKILL {
				t.Fatalf("cairn ended with %v, want killed by SIGKILL", err)
			}
			s.release()
			sessionGone(t, db.Pool, s.backend)

			if !registertest.AssertNothingWritten(t, db.Pool, before) {
				t.Fatalf("killed %s changed the register", c.name)
			}
			mustRun(t, db.URL, "audit", "verify")
			mustRun(t, db.URL, args...)
			if after := registertest.Counts(t, db.Pool); after.Equal(before) {
				t.Fatalf("%s after the kill wrote nothing", c.name)
			}
			mustRun(t, db.URL, "audit", "verify")
		})
	}
}

// The server restarted (a fast shutdown and start of a throwaway cluster
// of the test's own) in the middle of a publication and in the middle of a
// recording: each cairn process ends with an error saying the connection
// was lost and nothing was written; the register is as it was; the audit
// passes; and the command then succeeds whole.
//
// As in TestWriteCommandsKilledLeaveNothing, a lock held by another
// connection stops each process inside its transaction, having written
// part of its work, when the server restarts.
func TestServerRestartMidWrite(t *testing.T) {
	t.Parallel()
	ctx := context.Background()
	cluster, url, err := localpg.Throwaway(ctx)
	if err != nil {
		t.Fatal(err)
	}
	pool, err := pgxpool.New(ctx, url)
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(pool.Close) // after the holding transactions' cleanups
	db := &pgtest.DB{Pool: pool, URL: url}
	// The cluster is new: migrate it as cairn's first command would.
	if err := store.Migrate(ctx, pool); err != nil {
		t.Fatal(err)
	}
	runs, books := seedWorked(t, db, 1)
	book := writeBook(t, "copy-2.csv", registertest.SideShot(t, append([]byte("# copy 2\n"), books[0]...), "copy 2"))
	draft := adjustForTest(t, url, fmt.Sprint(runs[0]))

	cases := []struct {
		name string
		hold string
		args []string
		// wrote checks the register after the command has run again.
		wrote func(before, after store.TableCounts) bool
	}{
		// The publication event is written; the new versions wait.
		{"publication", "LOCK TABLE height IN SHARE MODE",
			[]string{"publish", draft, "--reason", "reviewed", "--yes", "--by", "test"},
			func(b, a store.TableCounts) bool {
				// BM2 to BM6: every mark of the circuit but the held one.
				return a.Rows("adjustment_event") == b.Rows("adjustment_event")+1 && a.Rows("height") == b.Rows("height")+5
			}},
		// The run and its sightings are written; its sections wait.
		{"recording", "LOCK TABLE section IN SHARE MODE",
			[]string{"run", "record", book, "--by", "test"},
			func(b, a store.TableCounts) bool {
				// The copy has one sighting more: its side shot
				// (registertest.SideShot) makes it other observations.
				return a.Rows("run") == b.Rows("run")+1 && a.Rows("sighting") == b.Rows("sighting")*2+1 && a.Rows("section") == b.Rows("section")*2
			}},
	}
	for _, c := range cases {
		before := registertest.Counts(t, db.Pool)
		guard, cancel := context.WithTimeout(ctx, faultGuard)
		s := stallCommand(t, guard, pool, url, []string{c.hold}, c.args...)
		if err := cluster.Restart(ctx); err != nil {
			t.Fatal(err)
		}
		err := <-s.exited
		hung := guard.Err() != nil
		cancel()
		if hung {
			t.Fatalf("%s: cairn did not end after the restart (stopped by the guard): %s", c.name, s.stderr.String())
		}
		msg := s.stderr.String()
		if code := s.cmd.ProcessState.ExitCode(); code != ExitFailure {
			t.Fatalf("%s: cairn ended with %v (exit %d), want exit %d: %s", c.name, err, code, ExitFailure, msg)
		}
		if !strings.Contains(msg, "connection to the database was lost") || !strings.Contains(msg, "nothing was written") {
			t.Errorf("%s: the error does not say the connection was lost and nothing was written: %s", c.name, msg)
		}
		t.Logf("%s: %s", c.name, strings.TrimSpace(msg))
		s.release() // its connection went with the old server
		pool.Reset()
		if !registertest.AssertNothingWritten(t, db.Pool, before) {
			t.Fatalf("%s cut by a restart changed the register", c.name)
		}
		mustRun(t, url, "audit", "verify")
		mustRun(t, url, c.args...)
		if after := registertest.Counts(t, db.Pool); !c.wrote(before, after) {
			t.Fatalf("%s after the restart: %v to %v", c.name, before, after)
		}
		mustRun(t, url, "audit", "verify")
	}
}
