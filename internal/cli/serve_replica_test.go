package cli

import (
	"context"
	"fmt"
	"io"
	"net"
	"net/http"
	"os"
	"os/exec"
	"os/user"
	"path/filepath"
	"strconv"
	"strings"
	"syscall"
	"testing"
	"time"

	"github.com/jackc/pgx/v5"

	"cairn/internal/localpg"
	"cairn/internal/pgtest"
	"cairn/internal/registertest"
	"cairn/internal/store"
)

// pgCluster is a PostgreSQL cluster a test makes from the machine's
// binaries, on a port of its own (never the shared test server's).
type pgCluster struct {
	bin, data, socket, log string
	port                   int
}

// pgRunner runs PostgreSQL's programs as the harness does: as this
// process's user, or, as root (which PostgreSQL refuses), as the server's
// own system user (localpg.ServerUser).
type pgRunner struct {
	bin  string
	cred *syscall.Credential
	uid  int
}

func newPGRunner(t *testing.T) *pgRunner {
	t.Helper()
	// initdb is where the server's programs are (Debian puts no initdb
	// on PATH; its pg_basebackup there is a wrapper).
	tool, err := localpg.FindTool("initdb", "")
	if err != nil {
		t.Fatalf("PostgreSQL's binaries (initdb, pg_ctl, pg_basebackup; /usr/lib/postgresql/*/bin): %v", err)
	}
	r := &pgRunner{bin: filepath.Dir(tool), uid: os.Geteuid()}
	for _, p := range []string{"pg_ctl", "pg_basebackup", "postgres"} {
		if _, err := os.Stat(filepath.Join(r.bin, p)); err != nil {
			t.Fatalf("no %s beside initdb in %s: %v", p, r.bin, err)
		}
	}
	if os.Geteuid() == 0 {
		if _, err := localpg.EnsureServerUser(); err != nil {
			t.Fatal(err)
		}
		u, err := user.Lookup(localpg.ServerUser)
		if err != nil {
			t.Fatal(err)
		}
		uid, _ := strconv.Atoi(u.Uid)
		gid, _ := strconv.Atoi(u.Gid)
		r.cred, r.uid = &syscall.Credential{Uid: uint32(uid), Gid: uint32(gid)}, uid
	}
	return r
}

// run runs a PostgreSQL program, failing the test with its output.
func (r *pgRunner) run(t *testing.T, name string, args ...string) {
	t.Helper()
	ctx, cancel := context.WithTimeout(context.Background(), 2*time.Minute)
	defer cancel()
	cmd := exec.CommandContext(ctx, filepath.Join(r.bin, name), args...)
	cmd.Env = append(os.Environ(), "LC_ALL=C", "PGTZ=UTC")
	if r.cred != nil {
		cmd.SysProcAttr = &syscall.SysProcAttr{Credential: r.cred}
	}
	if out, err := cmd.CombinedOutput(); err != nil {
		t.Fatalf("%s %s: %v\n%s", name, strings.Join(args, " "), err, out)
	}
}

// folder makes a folder for the clusters that the server's user owns,
// removed at the end.
func (r *pgRunner) folder(t *testing.T) string {
	t.Helper()
	d, err := os.MkdirTemp("", "cairn-replica-")
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { os.RemoveAll(d) })
	if err := os.Chmod(d, 0o700); err != nil {
		t.Fatal(err)
	}
	if err := os.Chown(d, r.uid, -1); err != nil {
		t.Fatal(err)
	}
	return d
}

// freePort is a loopback port free now.
func freePort(t *testing.T) int {
	t.Helper()
	l, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	defer l.Close()
	return l.Addr().(*net.TCPAddr).Port
}

// start starts the cluster on its port, listening on loopback and on a
// socket in its own folder; it is stopped at the end of the test.
func (r *pgRunner) start(t *testing.T, c *pgCluster) {
	t.Helper()
	r.run(t, "pg_ctl", "start", "-D", c.data, "-l", c.log, "-w", "-t", "60", "-o",
		fmt.Sprintf("-c port=%d -c listen_addresses=127.0.0.1 -c unix_socket_directories=%s -c fsync=off", c.port, c.socket))
	t.Cleanup(func() {
		cmd := exec.Command(filepath.Join(r.bin, "pg_ctl"), "stop", "-D", c.data, "-m", "immediate", "-w")
		if r.cred != nil {
			cmd.SysProcAttr = &syscall.SysProcAttr{Credential: r.cred}
		}
		if out, err := cmd.CombinedOutput(); err != nil {
			t.Errorf("stop the cluster in %s: %v\n%s", c.data, err, out)
		}
	})
}

func (c *pgCluster) url(role, db string) string {
	return fmt.Sprintf("postgres://%s@127.0.0.1:%d/%s?sslmode=disable", role, c.port, db)
}

// lsnReplayed says whether the standby has replayed the primary's WAL
// up to lsn (PostgreSQL 15 documentation, §9.27.4 "Recovery Control
// Functions": pg_last_wal_replay_lsn; §9.27.3: pg_current_wal_lsn).
func lsnReplayed(ctx context.Context, standby *pgx.Conn, lsn string) (bool, error) {
	var ok bool
	err := standby.QueryRow(ctx, "SELECT coalesce(pg_last_wal_replay_lsn() >= $1::pg_lsn, false)", lsn).Scan(&ok)
	return ok, err
}

// waitReplayed waits, a minute at most, until the standby has replayed
// all the primary has written so far; it returns the LSN waited for.
func waitReplayed(t *testing.T, primary, standby *pgx.Conn) string {
	t.Helper()
	ctx := context.Background()
	var lsn string
	if err := primary.QueryRow(ctx, "SELECT pg_current_wal_lsn()::text").Scan(&lsn); err != nil {
		t.Fatal(err)
	}
	deadline := time.Now().Add(time.Minute)
	for {
		ok, err := lsnReplayed(ctx, standby, lsn)
		if err != nil {
			t.Fatal(err)
		}
		if ok {
			return lsn
		}
		if time.Now().After(deadline) {
			t.Fatalf("the standby had not replayed the primary's WAL to %s after a minute", lsn)
		}
		time.Sleep(20 * time.Millisecond) // a poll's pace, not a claim about replication's speed
	}
}

func connect(t *testing.T, url string) *pgx.Conn {
	t.Helper()
	c, err := pgx.Connect(context.Background(), url)
	if err != nil {
		t.Fatalf("connect %s: %v", url, err)
	}
	t.Cleanup(func() { c.Close(context.Background()) })
	return c
}

// getPage requests the page and returns its status, ETag and body.
func getPage(t *testing.T, u string) (int, string, string) {
	t.Helper()
	resp, err := http.Get(u)
	if err != nil {
		t.Fatal(err)
	}
	defer resp.Body.Close()
	b, err := io.ReadAll(resp.Body)
	if err != nil {
		t.Fatal(err)
	}
	return resp.StatusCode, resp.Header.Get("ETag"), string(b)
}

// cairn serve from a streaming replica: a primary cluster made with
// initdb on a free port, a hot standby made from it with pg_basebackup
// on another (standby.signal and primary_conninfo, PostgreSQL 15
// documentation §27.2 "Log-Shipping Standby Servers", §27.2.4 "Setting
// Up a Standby Server", §27.4 "Hot Standby"), the register migrated and
// written on the primary, and serve run against the standby as a login
// member of cairn_reader. A height set on the primary reaches the mark's
// page on the replica once the standby has replayed the primary's WAL to
// the commit (pg_last_wal_replay_lsn against pg_current_wal_lsn, waited
// for a minute at most), with a new ETag; the standby refuses a write.
func TestServeFromReplica(t *testing.T) {
	t.Parallel()
	r := newPGRunner(t)
	dir := r.folder(t)
	primary := &pgCluster{data: filepath.Join(dir, "primary"), socket: dir, log: filepath.Join(dir, "primary.log"), port: freePort(t)}
	r.run(t, "initdb", "-D", primary.data, "-U", "postgres", "-A", "trust", "-E", "UTF8", "--locale=C", "--no-sync")
	// wal_level replica and max_wal_senders 10 are PostgreSQL 15's
	// defaults (§20.5.1, §20.6.1); the trust of initdb -A trust takes
	// replication connections from loopback (initdb's pg_hba.conf).
	r.start(t, primary)
	ctx := context.Background()
	pc := connect(t, primary.url("postgres", "postgres"))
	if _, err := pc.Exec(ctx, "CREATE DATABASE cairn"); err != nil {
		t.Fatal(err)
	}
	pool, err := store.Open(ctx, primary.url("postgres", "cairn"))
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(pool.Close)
	if err := store.Migrate(ctx, pool); err != nil {
		t.Fatal(err)
	}
	if _, err := pool.Exec(ctx, "CREATE ROLE cairn_web LOGIN IN ROLE cairn_reader"); err != nil {
		t.Fatal(err)
	}
	b := registertest.On(t, &pgtest.DB{Pool: pool, URL: primary.url("postgres", "cairn")})
	b.Mark(t, registertest.MarkOpts{Designation: "TC-0412"})
	b.Height(t, registertest.HeightOpts{Designation: "TC-0412", Value: "101.234", InForceFrom: replicaDay("2015-03-01")})

	standby := &pgCluster{data: filepath.Join(dir, "standby"), socket: dir, log: filepath.Join(dir, "standby.log"), port: freePort(t)}
	r.run(t, "pg_basebackup", "-h", "127.0.0.1", "-p", strconv.Itoa(primary.port), "-U", "postgres", "-D", standby.data, "-X", "stream", "-c", "fast", "--no-sync")
	// A hot standby: standby.signal, and where the primary is.
	conf := fmt.Sprintf("primary_conninfo = 'host=127.0.0.1 port=%d user=postgres application_name=cairn_standby'\nhot_standby = on\n", primary.port)
	for name, text := range map[string]string{"standby.signal": "", "postgresql.auto.conf": conf} {
		f, err := os.OpenFile(filepath.Join(standby.data, name), os.O_CREATE|os.O_APPEND|os.O_WRONLY, 0o600)
		if err == nil {
			_, err = f.WriteString(text)
			if cerr := f.Close(); err == nil {
				err = cerr
			}
		}
		if err == nil {
			err = os.Chown(filepath.Join(standby.data, name), r.uid, -1)
		}
		if err != nil {
			t.Fatal(err)
		}
	}
	r.start(t, standby)
	sc := connect(t, standby.url("cairn_web", "cairn"))
	var inRecovery bool
	if err := sc.QueryRow(ctx, "SELECT pg_is_in_recovery()").Scan(&inRecovery); err != nil || !inRecovery {
		t.Fatalf("the standby is not in recovery: %v %v", inRecovery, err)
	}
	var streaming int
	if err := pc.QueryRow(ctx, "SELECT count(*) FROM pg_stat_replication WHERE application_name = 'cairn_standby'").Scan(&streaming); err != nil {
		t.Fatal(err)
	}
	waitReplayed(t, pc, sc)
	if _, err := sc.Exec(ctx, "CREATE TABLE nothing_here (x int)"); err == nil || !strings.Contains(err.Error(), "read-only") {
		t.Errorf("the standby took a write: %v", err)
	}

	logs := serveUntil(t, standby.url("cairn_web", "cairn"), nil, func(addr string) {
		page := "http://" + addr + "/marks/TC-0412"
		status, tag, body := getPage(t, page)
		if status != http.StatusOK || !strings.Contains(body, "101.234") || strings.Contains(body, "101.240") {
			t.Fatalf("the replica's page before: %d %.300s", status, body)
		}
		b.Height(t, registertest.HeightOpts{Designation: "TC-0412", Value: "101.240", InForceFrom: replicaDay("2020-06-01")})
		b.Mark(t, registertest.MarkOpts{Designation: "TC-0413"})
		lsn := waitReplayed(t, pc, sc)
		status, tag2, body := getPage(t, page)
		if status != http.StatusOK || !strings.Contains(body, "101.240") || tag2 == tag {
			t.Errorf("the replica's page after replaying to %s: %d, ETag %s then %s: %.300s", lsn, status, tag, tag2, body)
		}
		if status, _, body := getPage(t, "http://"+addr+"/marks/TC-0413"); status != http.StatusOK {
			t.Errorf("a mark made on the primary is not served by the replica: %d %.200s", status, body)
		}
	})
	if streaming != 1 {
		t.Errorf("the primary streams to %d standbys named cairn_standby, want 1", streaming)
	}
	if !strings.Contains(logs, "as role cairn_web") || strings.Contains(logs, "CAN WRITE") {
		t.Errorf("serve's output: %s", logs)
	}
}

func replicaDay(s string) *time.Time {
	d, err := time.Parse("2006-01-02", s)
	if err != nil {
		panic(err)
	}
	return &d
}
