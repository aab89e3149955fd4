package localpg

import (
	"context"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"sync"
	"syscall"
)

// watchdogScript waits until its standard input closes, then stops the
// server ($0 is pg_ctl, $1 the data folder) and removes the cluster's
// folders ($2, $3).
const watchdogScript = `read -r _ || true
"$0" stop -D "$1" -m immediate -w -s >/dev/null 2>&1
rm -rf "$2" "$3"`

var (
	watchMu sync.Mutex
	// watchPipes keeps the write ends of the watchdogs' pipes open for the
	// life of the process; they close only when the process ends.
	watchPipes []*os.File
)

// Throwaway makes a new cluster in a fresh temporary folder, starts it and
// returns it with the owner's URL for its cairn database. It has the
// owner alone: no EverydayUser, no register roles. It is made for speed, not
// durability: nothing is flushed to disk. The cluster lives as long
// as this process: a watchdog, in a session of its own so that a Ctrl-C
// does not reach it, reads a pipe whose other end only this process holds;
// when the process ends, however it ends, the pipe closes and the watchdog
// stops the server and removes its folder.
func Throwaway(ctx context.Context) (*Cluster, string, error) {
	dir, err := os.MkdirTemp("", "cairn-pg-")
	if err != nil {
		return nil, "", fmt.Errorf("make throwaway cluster folder: %w", err)
	}
	c := New(dir)
	c.scratch = true
	// A throwaway cluster is asked for by tests and by developers: as
	// root, it makes the server's user when missing.
	c.MakeServerUser = true
	fail := func(err error) (*Cluster, string, error) {
		_ = c.Stop(context.WithoutCancel(ctx))
		os.RemoveAll(c.Dir)
		os.RemoveAll(c.SocketDir())
		return nil, "", err
	}
	run, err := runAs(c.MakeServerUser)
	if err != nil {
		return fail(err)
	}
	if err := c.prepareDir(run); err != nil {
		return fail(err)
	}
	bin, err := c.binDir()
	if err != nil {
		return fail(err)
	}
	if err := c.watch(bin, run); err != nil {
		return fail(err)
	}
	url, err := c.Start(ctx)
	if err != nil {
		return fail(err)
	}
	return c, url, nil
}

// watch starts the watchdog of a throwaway cluster.
func (c *Cluster) watch(bin string, run *account) error {
	r, w, err := os.Pipe()
	if err != nil {
		return fmt.Errorf("start cluster watchdog: %w", err)
	}
	defer r.Close()
	cmd := exec.Command("/bin/sh", "-c", watchdogScript, filepath.Join(bin, "pg_ctl"), c.dataDir(), c.Dir, c.SocketDir())
	cmd.Dir = "/"
	// No output: a watchdog holding this process's stdout or stderr open
	// after it ends would make `go test` wait for it.
	cmd.Stdin = r
	cmd.SysProcAttr = &syscall.SysProcAttr{Setsid: true}
	if run != nil {
		cmd.SysProcAttr.Credential = run.credential()
	}
	if err := cmd.Start(); err != nil {
		w.Close()
		return fmt.Errorf("start cluster watchdog: %w", err)
	}
	c.watchdog = cmd.Process.Pid
	watchMu.Lock()
	watchPipes = append(watchPipes, w)
	watchMu.Unlock()
	return nil
}
