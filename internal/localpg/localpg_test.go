package localpg

import (
	"bufio"
	"bytes"
	"context"
	"errors"
	"fmt"
	"io"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"syscall"
	"testing"

	"github.com/jackc/pgx/v5"
	"golang.org/x/sys/unix"
)

// clusterDir returns a fresh folder for a cluster. As root, the server runs
// as an unprivileged user, which must be able to enter the test's folders.
func clusterDir(t *testing.T, name string) string {
	t.Helper()
	base := t.TempDir()
	if os.Geteuid() == 0 {
		for _, d := range []string{filepath.Dir(base), base} {
			if err := os.Chmod(d, 0o711); err != nil {
				t.Fatal(err)
			}
		}
	}
	return filepath.Join(base, name)
}

// testCluster returns the cluster in dir, which, as root, makes the
// server's user when it is missing.
func testCluster(dir string) *Cluster {
	c := New(dir)
	c.MakeServerUser = true
	return c
}

// stopAtEnd stops c when the test ends.
func stopAtEnd(t *testing.T, c *Cluster) {
	t.Cleanup(func() {
		if err := c.Stop(context.Background()); err != nil {
			t.Errorf("stop: %v", err)
		}
	})
}

func query(t *testing.T, url, sql string) string {
	t.Helper()
	ctx := context.Background()
	conn, err := pgx.Connect(ctx, url)
	if err != nil {
		t.Fatalf("connect %s: %v", url, err)
	}
	defer conn.Close(ctx)
	var s string
	if err := conn.QueryRow(ctx, sql).Scan(&s); err != nil {
		t.Fatalf("%s: %v", sql, err)
	}
	return s
}

// alive says whether pid is a live process (not gone, not a zombie).
func alive(pid int) bool {
	b, err := os.ReadFile(fmt.Sprintf("/proc/%d/stat", pid))
	if err != nil {
		return false
	}
	_, rest, _ := strings.Cut(string(b), ") ")
	return !strings.HasPrefix(rest, "Z")
}

func TestStartStopRestart(t *testing.T) {
	t.Parallel()
	ctx := context.Background()
	c := testCluster(clusterDir(t, "cairn"))
	stopAtEnd(t, c)

	if st, err := c.Status(ctx); err != nil || st.Exists || st.Running {
		t.Fatalf("before start: status %+v, %v; want no cluster", st, err)
	}
	url, err := c.Start(ctx)
	if err != nil {
		t.Fatal(err)
	}
	st, err := c.Status(ctx)
	if err != nil || !st.Exists || !st.Running || st.PID == 0 {
		t.Fatalf("after start: status %+v, %v; want running", st, err)
	}
	if got := query(t, url, "SELECT current_database() || ' ' || current_user"); got != "cairn cairn" {
		t.Errorf("connected to %q, want database cairn as cairn", got)
	}
	if got := query(t, url, "SHOW listen_addresses"); got != "" {
		t.Errorf("listen_addresses = %q, want none (socket only)", got)
	}
	// As root, the cluster must belong to, and its server run as, the
	// unprivileged user; otherwise as this process's own user.
	wantUID := os.Geteuid()
	if wantUID == 0 {
		run, err := runAs(true)
		if err != nil {
			t.Fatal(err)
		}
		wantUID = run.uid
	}
	fi, err := os.Stat(filepath.Join(c.Dir, "data"))
	if err != nil {
		t.Fatal(err)
	}
	if uid := int(fi.Sys().(*syscall.Stat_t).Uid); uid != wantUID {
		t.Errorf("data folder owned by uid %d, want %d", uid, wantUID)
	}
	if uid := processUID(t, st.PID); uid != wantUID {
		t.Errorf("server runs as uid %d, want %d", uid, wantUID)
	}
	mustExec(t, url, "CREATE TABLE kept (n int); INSERT INTO kept VALUES (42)")

	// Start is idempotent: same server, same URL.
	url2, err := c.Start(ctx)
	if err != nil {
		t.Fatal(err)
	}
	st2, _ := c.Status(ctx)
	if url2 != url || st2.PID != st.PID {
		t.Errorf("second start: url %q pid %d, want %q pid %d", url2, st2.PID, url, st.PID)
	}

	if err := c.Stop(ctx); err != nil {
		t.Fatal(err)
	}
	if st, err := c.Status(ctx); err != nil || !st.Exists || st.Running {
		t.Fatalf("after stop: status %+v, %v; want stopped", st, err)
	}
	if conn, err := pgx.Connect(ctx, url); err == nil {
		conn.Close(ctx)
		t.Fatal("connected to a stopped cluster")
	}
	if err := c.Stop(ctx); err != nil {
		t.Errorf("stopping a stopped cluster: %v", err)
	}

	if _, err := c.Start(ctx); err != nil {
		t.Fatal(err)
	}
	if got := query(t, url, "SELECT n::text FROM kept"); got != "42" {
		t.Errorf("after restart: kept = %q, want 42", got)
	}

	// Restart: a new server process, the data kept, and a session of the
	// old server ended.
	before, _ := c.Status(ctx)
	conn, err := pgx.Connect(ctx, url)
	if err != nil {
		t.Fatal(err)
	}
	defer conn.Close(ctx)
	if err := c.Restart(ctx); err != nil {
		t.Fatal(err)
	}
	after, _ := c.Status(ctx)
	if !after.Running || after.PID == before.PID {
		t.Errorf("after Restart: status %+v, was pid %d; want a new server", after, before.PID)
	}
	if err := conn.Ping(ctx); err == nil {
		t.Error("a session of the server before Restart still answers")
	}
	if got := query(t, url, "SELECT n::text FROM kept"); got != "42" {
		t.Errorf("after Restart: kept = %q, want 42", got)
	}
	if err := c.Stop(ctx); err != nil {
		t.Fatal(err)
	}
	if err := c.Restart(ctx); err == nil || !strings.Contains(err.Error(), "not running") {
		t.Errorf("Restart of a stopped cluster: %v, want not running", err)
	}
}

func processUID(t *testing.T, pid int) int {
	t.Helper()
	b, err := os.ReadFile(fmt.Sprintf("/proc/%d/status", pid))
	if err != nil {
		t.Fatal(err)
	}
	for _, line := range strings.Split(string(b), "\n") {
		if f := strings.Fields(line); len(f) > 1 && f[0] == "Uid:" {
			var uid int
			fmt.Sscan(f[1], &uid)
			return uid
		}
	}
	t.Fatalf("no Uid in /proc/%d/status", pid)
	return -1
}

func mustExec(t *testing.T, url, sql string) {
	t.Helper()
	ctx := context.Background()
	conn, err := pgx.Connect(ctx, url)
	if err != nil {
		t.Fatal(err)
	}
	defer conn.Close(ctx)
	if _, err := conn.Exec(ctx, sql); err != nil {
		t.Fatalf("%s: %v", sql, err)
	}
}

// TestConcurrentStart starts one new cluster from three processes at once:
// all must succeed on the same server. Its folder's path is too long for a
// socket, so this also runs the socket fallback.
func TestConcurrentStart(t *testing.T) {
	t.Parallel()
	dir := clusterDir(t, strings.Repeat("long-folder-name-", 6))
	c := testCluster(dir)
	stopAtEnd(t, c)
	if c.SocketDir() == c.Dir || len(c.SocketDir()+"/.s.PGSQL.5432") > maxSocketPath {
		t.Fatalf("socket folder %q for a %d-byte cluster path", c.SocketDir(), len(c.Dir))
	}
	t.Cleanup(func() { os.RemoveAll(c.SocketDir()) })

	const n = 3
	cmds := make([]*exec.Cmd, n)
	outs := make([]*bytes.Buffer, n)
	for i := range cmds {
		cmds[i] = exec.Command(os.Args[0], "-test.run=^TestHelperProcess$")
		cmds[i].Env = append(os.Environ(), "LOCALPG_HELPER=start", "LOCALPG_HELPER_DIR="+dir)
		outs[i] = &bytes.Buffer{}
		cmds[i].Stdout, cmds[i].Stderr = outs[i], outs[i]
		if err := cmds[i].Start(); err != nil {
			t.Fatal(err)
		}
	}
	for i, cmd := range cmds {
		if err := cmd.Wait(); err != nil {
			t.Fatalf("process %d: %v\n%s", i, err, outs[i])
		}
	}
	want := "url=" + c.URL(Database) + "\n"
	for i, out := range outs {
		if !strings.Contains(out.String(), want) {
			t.Errorf("process %d printed %q, want %q", i, out, want)
		}
	}
	if got := query(t, c.URL(Database), "SELECT current_database()"); got != Database {
		t.Errorf("database %q", got)
	}
}

// TestHelperProcess is run as a separate process by other tests.
func TestHelperProcess(t *testing.T) {
	ctx := context.Background()
	switch os.Getenv("LOCALPG_HELPER") {
	case "":
		return
	case "start":
		url, err := testCluster(os.Getenv("LOCALPG_HELPER_DIR")).Start(ctx)
		if err != nil {
			fmt.Println("error:", err)
			os.Exit(1)
		}
		fmt.Println("url=" + url)
	case "throwaway":
		c, url, err := Throwaway(ctx)
		if err != nil {
			fmt.Println("error:", err)
			os.Exit(1)
		}
		st, _ := c.Status(ctx)
		fmt.Printf("got=%s\ndir=%s\npid=%d\nwatchdog=%d\n", query(t, url, "SELECT current_database()"), c.Dir, st.PID, c.watchdog)
		io.Copy(io.Discard, os.Stdin) // until the parent lets go
	}
	os.Exit(0) // as a process that ends without any cleanup of its own
}

// TestThrowawayEndsWithProcess runs a process that makes a throwaway
// cluster and exits: its watchdog must then stop the server and remove the
// folder.
func TestThrowawayEndsWithProcess(t *testing.T) {
	t.Parallel()
	cmd := exec.Command(os.Args[0], "-test.run=^TestHelperProcess$")
	cmd.Env = append(os.Environ(), "LOCALPG_HELPER=throwaway")
	stdin, err := cmd.StdinPipe()
	if err != nil {
		t.Fatal(err)
	}
	stdout, err := cmd.StdoutPipe()
	if err != nil {
		t.Fatal(err)
	}
	var stderr bytes.Buffer
	cmd.Stderr = &stderr
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	var dir string
	var pid, watchdog int
	sc := bufio.NewScanner(stdout)
	for watchdog == 0 && sc.Scan() {
		line := sc.Text()
		if v, ok := strings.CutPrefix(line, "dir="); ok {
			dir = v
		}
		fmt.Sscanf(line, "pid=%d", &pid)
		fmt.Sscanf(line, "watchdog=%d", &watchdog)
		if strings.HasPrefix(line, "error:") {
			t.Fatal(line)
		}
	}
	if dir == "" || pid == 0 || watchdog == 0 {
		cmd.Wait()
		t.Fatalf("helper printed no cluster\n%s", stderr.String())
	}
	if !alive(pid) {
		t.Fatalf("throwaway server %d not running while its process lives", pid)
	}
	// Hold the watchdog by a pidfd before letting the helper go, then wait
	// for the watchdog to end.
	wfd, err := unix.PidfdOpen(watchdog, 0)
	if err != nil {
		t.Fatalf("watchdog %d: %v", watchdog, err)
	}
	defer unix.Close(wfd)
	stdin.Close()
	if err := cmd.Wait(); err != nil {
		t.Fatalf("helper: %v\n%s", err, stderr.String())
	}
	for {
		_, err := unix.Poll([]unix.PollFd{{Fd: int32(wfd), Events: unix.POLLIN}}, -1)
		if err == nil {
			break
		}
		if !errors.Is(err, unix.EINTR) {
			t.Fatal(err)
		}
	}
	if _, err := os.Stat(dir); !errors.Is(err, os.ErrNotExist) {
		t.Errorf("throwaway folder %s still there after its process ended (%v)", dir, err)
	}
	if alive(pid) {
		t.Errorf("throwaway server %d still running after its process ended", pid)
	}
}

func TestFindBin(t *testing.T) {
	t.Parallel()
	root := t.TempDir()
	exe := func(dir string, names ...string) {
		if err := os.MkdirAll(dir, 0o755); err != nil {
			t.Fatal(err)
		}
		for _, n := range names {
			if err := os.WriteFile(filepath.Join(dir, n), []byte("#!/bin/sh\n"), 0o755); err != nil {
				t.Fatal(err)
			}
		}
	}
	_, err := findBin("", root, "")
	if !errors.Is(err, ErrNoBinaries) {
		t.Fatalf("no binaries: err %v, want ErrNoBinaries", err)
	}
	for _, hint := range []string{"apt install postgresql", "docker compose up -d", "--db"} {
		if !strings.Contains(err.Error(), hint) {
			t.Errorf("message %q does not say %q", err, hint)
		}
	}

	exe(filepath.Join(root, "9.6", "bin"), "initdb", "pg_ctl")
	exe(filepath.Join(root, "14", "bin"), "initdb", "pg_ctl")
	exe(filepath.Join(root, "16", "bin"), "initdb") // incomplete: no pg_ctl
	if got, _ := findBin("", root, ""); got != filepath.Join(root, "14", "bin") {
		t.Errorf("newest complete version: got %q, want 14", got)
	}
	if got, _ := findBin("", root, "9.6"); got != filepath.Join(root, "9.6", "bin") {
		t.Errorf("cluster's own version: got %q, want 9.6", got)
	}
	onPath := filepath.Join(t.TempDir(), "bin")
	exe(onPath, "initdb", "pg_ctl")
	if got, _ := findBin("/nonexistent:"+onPath, root, ""); got != onPath {
		t.Errorf("PATH: got %q, want %q", got, onPath)
	}
}

func TestCanReach(t *testing.T) {
	t.Parallel()
	base := t.TempDir()
	closed := filepath.Join(base, "closed")
	if err := os.MkdirAll(filepath.Join(closed, "cairn"), 0o700); err != nil {
		t.Fatal(err)
	}
	for _, d := range []string{filepath.Dir(base), base} {
		if err := os.Chmod(d, 0o711); err != nil {
			t.Fatal(err)
		}
	}
	stranger := &account{name: "stranger", uid: 54321, gid: 54321}
	err := stranger.canReach(filepath.Join(closed, "cairn"))
	if err == nil || !strings.Contains(err.Error(), "cannot enter "+closed) {
		t.Fatalf("closed folder: err %v, want 'cannot enter %s'", err, closed)
	}
	if err := os.Chmod(closed, 0o711); err != nil {
		t.Fatal(err)
	}
	if err := stranger.canReach(filepath.Join(closed, "cairn")); err != nil {
		t.Errorf("open folders: %v", err)
	}
}

func TestDefaultDir(t *testing.T) {
	t.Parallel()
	env := func(m map[string]string) func(string) string { return func(k string) string { return m[k] } }
	got, err := DefaultDir(env(map[string]string{"XDG_DATA_HOME": "/data", "HOME": "/home/ann"}))
	if err != nil || got != "/data/cairn" {
		t.Errorf("with XDG_DATA_HOME: %q, %v", got, err)
	}
	got, err = DefaultDir(env(map[string]string{"HOME": "/home/ann"}))
	want := "/home/ann/.local/share/cairn"
	if os.Geteuid() == 0 {
		want = "/var/lib/cairn"
	}
	if err != nil || got != want {
		t.Errorf("without XDG_DATA_HOME: %q, %v; want %q", got, err, want)
	}
}
