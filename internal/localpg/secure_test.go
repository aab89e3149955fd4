package localpg

import (
	"bytes"
	"context"
	"errors"
	"fmt"
	"net/url"
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
	"github.com/jackc/pgx/v5/pgconn"

	"cairn/internal/store"
)

// otherUserName is a second OS account the tests make, to knock at the
// embedded default's door as someone else.
const otherUserName = "cairn-test-other"

// otherUser returns a second OS account, made with useradd when missing.
// It needs root; without root the test fails saying so (it never skips).
func otherUser(t *testing.T) *account {
	t.Helper()
	if os.Geteuid() != 0 {
		t.Fatalf("this test needs a second OS account, made with useradd, which needs root; run the tests as root (as CI does)")
	}
	for range 50 {
		if a, err := lookupAccount(otherUserName); err == nil {
			return a
		}
		out, err := exec.Command("useradd", "--system", "--user-group", "--no-create-home", "--home-dir", "/nonexistent",
			"--shell", "/usr/sbin/nologin", otherUserName).CombinedOutput()
		var ee *exec.ExitError
		if err != nil && (!errors.As(err, &ee) || ee.ExitCode() != 9) {
			t.Logf("useradd %s: %v: %s (trying again)", otherUserName, err, out)
			time.Sleep(100 * time.Millisecond)
		}
	}
	t.Fatalf("could not make a second OS account %s with useradd", otherUserName)
	return nil
}

// psqlAs runs psql as OS account a (nil: this process's user) on conn, a
// database of c, and returns its output and error.
func psqlAs(t *testing.T, c *Cluster, a *account, conn string, env ...string) (string, error) {
	t.Helper()
	// psql of the cluster's own version (the one on PATH may be a wrapper).
	v, err := os.ReadFile(filepath.Join(c.dataDir(), "PG_VERSION"))
	if err != nil {
		t.Fatal(err)
	}
	psql, err := FindTool("psql", strings.TrimSpace(string(v)))
	if err != nil {
		t.Fatal(err)
	}
	cmd := exec.Command(psql, "-X", "-w", "-At", "-d", conn, "-c", "SELECT session_user")
	cmd.Dir = "/"
	cmd.Env = append([]string{"PATH=/usr/bin:/bin", "LC_ALL=C.UTF-8"}, env...)
	if a != nil {
		cmd.SysProcAttr = &syscall.SysProcAttr{Credential: a.credential()}
	}
	out, err := cmd.CombinedOutput()
	return string(out), err
}

// withoutPassfile returns conn with no passfile: a connection that knows
// no password.
func withoutPassfile(t *testing.T, conn string) string {
	t.Helper()
	u, err := url.Parse(conn)
	if err != nil {
		t.Fatal(err)
	}
	q := u.Query()
	q.Set("passfile", "/nonexistent")
	u.RawQuery = q.Encode()
	return u.String()
}

// The embedded default lets no one in without a password, and no other OS
// account in at all: pg_hba.conf trusts nothing; the owner and the
// everyday role are refused without their passwords; another OS account
// cannot reach the socket; the server's own OS account reaches it but has
// no password, and cannot read the file that keeps them.
func TestOthersShutOut(t *testing.T) {
	t.Parallel()
	ctx := context.Background()
	other := otherUser(t)
	c := testCluster(clusterDir(t, "cairn"))
	stopAtEnd(t, c)
	if _, err := c.Start(ctx); err != nil {
		t.Fatal(err)
	}

	hba, err := os.ReadFile(filepath.Join(c.Dir, "data", "pg_hba.conf"))
	if err != nil {
		t.Fatal(err)
	}
	var rules int
	for _, line := range strings.Split(string(hba), "\n") {
		f := strings.Fields(line)
		if len(f) == 0 || strings.HasPrefix(f[0], "#") {
			continue
		}
		rules++
		if method := f[len(f)-1]; method != "scram-sha-256" || f[0] != "local" {
			t.Errorf("pg_hba.conf rule %q: want only local connections with scram-sha-256", line)
		}
	}
	if rules == 0 {
		t.Errorf("pg_hba.conf has no rule:\n%s", hba)
	}

	// The passwords' file: outside the cluster's data, 0600, this user's.
	fi, err := os.Stat(c.passFile())
	if err != nil {
		t.Fatal(err)
	}
	if fi.Mode().Perm() != 0o600 || int(fi.Sys().(*syscall.Stat_t).Uid) != os.Geteuid() {
		t.Errorf("%s: mode %04o uid %d, want 0600 and uid %d", c.passFile(), fi.Mode().Perm(), fi.Sys().(*syscall.Stat_t).Uid, os.Geteuid())
	}

	// Roles without a password, through the socket: refused.
	owner := query(t, c.URL(Database), "SELECT current_user")
	mustExec(t, c.URL(Database), "CREATE ROLE cairn_t_nopw LOGIN")
	for _, role := range []string{owner, EverydayUser, "cairn_t_nopw"} {
		conn := withoutPassfile(t, c.urlAs(role, Database))
		cn, err := pgx.Connect(ctx, conn)
		if err == nil {
			cn.Close(ctx)
			t.Errorf("role %s connected without a password", role)
			continue
		}
		var pgErr *pgconn.PgError
		if !errors.As(err, &pgErr) || pgErr.Code != "28P01" {
			t.Errorf("role %s without a password: %v, want password authentication failed (28P01)", role, err)
		}
	}

	// Another OS account: the socket's folder is closed to it.
	if out, err := psqlAs(t, c, other, c.UserURL(Database), "PGPASSFILE="+c.passFile()); err == nil || !strings.Contains(out, "Permission denied") {
		t.Errorf("psql as %s: %v, %q; want permission denied on the socket", other.name, err, out)
	}
	// The server's own OS account reaches the socket but knows no password.
	if run, _ := runAs(true); run != nil {
		for _, role := range []string{owner, EverydayUser} {
			out, err := psqlAs(t, c, run, c.urlAs(role, Database), "PGPASSFILE="+c.passFile())
			if err == nil || !strings.Contains(out, "password") {
				t.Errorf("psql as %s, role %s: %v, %q; want refused for want of a password", run.name, role, err, out)
			}
		}
		cat := exec.Command("cat", c.passFile())
		cat.SysProcAttr = &syscall.SysProcAttr{Credential: run.credential()}
		if out, err := cat.CombinedOutput(); err == nil {
			t.Errorf("the server's user %s reads the passwords: %q", run.name, out)
		}
	}
}

// Everyday connections log in as a member of cairn_publisher that is
// neither owner nor superuser: it may not set session_replication_role
// nor disable the register's triggers. The owner migrates and owns the
// tables. The folders made on the way to a fresh cluster can be passed
// through by the server's user.
func TestEverydayRole(t *testing.T) {
	t.Parallel()
	ctx := context.Background()
	fresh := clusterDir(t, "fresh")
	c := testCluster(filepath.Join(fresh, "xdg", "cairn"))
	stopAtEnd(t, c)
	ownerURL, err := c.Start(ctx)
	if err != nil {
		t.Fatal(err)
	}

	way := os.FileMode(0o700)
	if os.Geteuid() == 0 {
		way = 0o711
	}
	for _, d := range []string{fresh, filepath.Join(fresh, "xdg")} {
		if fi, err := os.Stat(d); err != nil || fi.Mode().Perm() != way {
			t.Errorf("folder %s made on the way: %v, %v; want mode %04o", d, fi.Mode().Perm(), err, way)
		}
	}
	if fi, err := os.Stat(c.Dir); err != nil || fi.Mode().Perm() != 0o700 {
		t.Errorf("cluster folder %s: %v; want mode 0700", c.Dir, err)
	}
	if run, _ := runAs(true); run != nil {
		if err := run.canReach(c.Dir); err != nil {
			t.Error(err)
		}
	}

	owner, err := store.Open(ctx, ownerURL)
	if err != nil {
		t.Fatal(err)
	}
	defer owner.Close()
	if err := store.Migrate(ctx, owner); err != nil {
		t.Fatal(err)
	}
	var tableOwner string
	if err := owner.QueryRow(ctx, "SELECT tableowner FROM pg_tables WHERE tablename = 'height'").Scan(&tableOwner); err != nil || tableOwner != Superuser {
		t.Errorf("height owned by %q (%v), want the owner %s", tableOwner, err, Superuser)
	}

	conn, err := pgx.Connect(ctx, c.UserURL(Database))
	if err != nil {
		t.Fatal(err)
	}
	defer conn.Close(ctx)
	var session, current string
	var super, publisher bool
	if err := conn.QueryRow(ctx, `SELECT session_user, current_user, rolsuper, pg_has_role(current_user, 'cairn_publisher', 'USAGE')
		FROM pg_roles WHERE rolname = current_user`).Scan(&session, &current, &super, &publisher); err != nil {
		t.Fatal(err)
	}
	if session != EverydayUser || current != EverydayUser || super || !publisher || session == tableOwner {
		t.Errorf("everyday connection: session_user %s, current_user %s, superuser %v, publisher %v; want %s, a publisher and not the owner",
			session, current, super, publisher, EverydayUser)
	}
	for _, sql := range []string{
		"SET session_replication_role = replica",
		"ALTER TABLE height DISABLE TRIGGER ALL",
		"ALTER TABLE height DISABLE TRIGGER USER",
		"DELETE FROM height",
	} {
		_, err := conn.Exec(ctx, sql)
		var pgErr *pgconn.PgError
		if !errors.As(err, &pgErr) || (pgErr.Code != "42501" && !strings.HasPrefix(pgErr.Code, "CA")) {
			t.Errorf("%s as %s: %v, want refused (insufficient privilege)", sql, EverydayUser, err)
		}
	}
}

// A postmaster.pid left behind, whose process is gone, is a zombie or is
// another program, is recognised as stale, said so, and the server
// started.
func TestStalePostmasterPid(t *testing.T) {
	t.Parallel()
	ctx := context.Background()
	c := testCluster(clusterDir(t, "cairn"))
	stopAtEnd(t, c)
	url, err := c.Start(ctx)
	if err != nil {
		t.Fatal(err)
	}
	pidPath := filepath.Join(c.Dir, "data", "postmaster.pid")
	left, err := os.ReadFile(pidPath)
	if err != nil {
		t.Fatal(err)
	}
	_, rest, _ := strings.Cut(string(left), "\n")

	gone := exec.Command("true")
	if err := gone.Run(); err != nil {
		t.Fatal(err)
	}
	sleep := exec.Command("sleep", "600")
	if err := sleep.Start(); err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { sleep.Process.Kill(); sleep.Wait() })
	zombie := exec.Command("true")
	if err := zombie.Start(); err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { zombie.Wait() })
	for !strings.Contains(notServer(zombie.Process.Pid, ""), "zombie") {
		time.Sleep(10 * time.Millisecond) // until it has exited, unwaited for
	}

	for _, k := range []struct {
		pid  int
		want string
	}{
		{gone.Process.Pid, "is gone"},
		{sleep.Process.Pid, "is another program (sleep)"},
		{zombie.Process.Pid, "is a zombie"},
	} {
		if err := c.Stop(ctx); err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(pidPath, []byte(strconv.Itoa(k.pid)+"\n"+rest), 0o600); err != nil {
			t.Fatal(err)
		}
		if st, err := c.Status(ctx); err != nil || st.Running {
			t.Errorf("pid %d %s: status %+v, %v; want not running", k.pid, k.want, st, err)
		}
		var said bytes.Buffer
		c.Notify = &said
		if _, err := c.Start(ctx); err != nil {
			t.Fatalf("start over a stale postmaster.pid (process %s): %v", k.want, err)
		}
		c.Notify = nil
		if want := fmt.Sprintf("stale %s: process %d %s", pidPath, k.pid, k.want); !strings.Contains(said.String(), want) {
			t.Errorf("start said %q, want %q", said.String(), want)
		}
		if got := query(t, url, "SELECT 'up'"); got != "up" {
			t.Errorf("server after a stale pid of a process that %s: %q", k.want, got)
		}
		if st, _ := c.Status(ctx); !st.Running || st.PID == k.pid {
			t.Errorf("status after start: %+v", st)
		}
	}
}

// A socket folder apart (the cluster's path is too long for a socket)
// that another user made is refused, with a message saying so.
func TestSocketDirOfAnotherUser(t *testing.T) {
	t.Parallel()
	other := otherUser(t)
	c := testCluster(clusterDir(t, strings.Repeat("long-folder-name-", 6)))
	sock := c.SocketDir()
	if sock == c.Dir {
		t.Fatalf("socket folder is the cluster's own")
	}
	if err := os.Mkdir(sock, 0o777); err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { os.RemoveAll(sock) })
	if err := os.Chown(sock, other.uid, other.gid); err != nil {
		t.Fatal(err)
	}
	_, err := c.Start(context.Background())
	if err == nil {
		c.Stop(context.Background())
		t.Fatal("started with a socket folder of another user")
	}
	if want := "socket folder " + sock + " belongs to user " + other.name; !strings.Contains(err.Error(), want) {
		t.Errorf("error %q, want %q", err, want)
	}
	if _, err := os.Stat(filepath.Join(c.Dir, "data")); !errors.Is(err, os.ErrNotExist) {
		t.Errorf("a cluster was made: %v", err)
	}
}

// As root, a missing server user is refused with the command that makes it.
func TestServerUserMissing(t *testing.T) {
	t.Parallel()
	const name = "cairn-no-such-user"
	if _, err := user.Lookup(name); err == nil {
		t.Fatalf("user %s exists", name)
	}
	_, err := serverAccount(name, false)
	for _, want := range []string{"system user " + name, "useradd --system --user-group --no-create-home --home-dir /nonexistent --shell /usr/sbin/nologin " + name, MakeServerUserEnv + "=1"} {
		if err == nil || !strings.Contains(err.Error(), want) {
			t.Errorf("missing user: %v, want it to say %q", err, want)
		}
	}
	if ServerUser == "postgres" {
		t.Error("the server's user is the system server's own")
	}
}

// A cluster is secured once a start of its server: Start writes the
// server's stamp, the first three lines of postmaster.pid (its process
// id, data folder and start time: PostgreSQL's documentation, "Database
// File Layout", the postmaster.pid table), and a later Start of the same
// server takes it as secured, without the owner's connection; its cairn
// database dropped since is then missing, until Resecure has the next
// Start secure the server again. A restart of the server is another
// stamp, and secured again.
func TestSecuredOncePerServerStart(t *testing.T) {
	t.Parallel()
	ctx := context.Background()
	c := testCluster(clusterDir(t, "cairn"))
	stopAtEnd(t, c)
	if _, err := c.Start(ctx); err != nil {
		t.Fatal(err)
	}
	stamp := func() string {
		b, err := os.ReadFile(filepath.Join(c.Dir, "data", "postmaster.pid"))
		if err != nil {
			t.Fatal(err)
		}
		lines := strings.Split(string(b), "\n")
		return strings.Join(lines[:3], "\n") + "\n"
	}
	secured := func() string {
		b, _ := os.ReadFile(filepath.Join(c.Dir, "secured"))
		return string(b)
	}
	first := stamp()
	if got := secured(); got != first {
		t.Fatalf("secured %q, want the server's stamp %q", got, first)
	}
	mustExec(t, c.URL("postgres"), "DROP DATABASE "+Database)
	url, err := c.Start(ctx)
	if err != nil {
		t.Fatal(err)
	}
	if conn, err := pgx.Connect(ctx, url); err == nil {
		conn.Close(ctx)
		t.Fatal("the cairn database is back: the second Start secured the server again")
	}
	if err := c.Resecure(); err != nil {
		t.Fatal(err)
	}
	if url, err = c.Start(ctx); err != nil {
		t.Fatal(err)
	}
	if got := query(t, url, "SELECT current_database()"); got != Database {
		t.Errorf("after Resecure: connected to %q, want %s", got, Database)
	}
	if err := c.Restart(ctx); err != nil {
		t.Fatal(err)
	}
	if _, err := c.Start(ctx); err != nil {
		t.Fatal(err)
	}
	if got := secured(); got != stamp() || got == first {
		t.Errorf("after a restart: secured %q, want the new stamp %q (not %q)", got, stamp(), first)
	}
}
