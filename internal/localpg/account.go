package localpg

import (
	"fmt"
	"os"
	"os/user"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"syscall"
)

// ServerUser is the unprivileged system user that runs the cluster when
// cairn runs as root.
const ServerUser = "postgres"

// account is the unprivileged user the server runs as.
type account struct {
	name     string
	home     string
	uid, gid int
	groups   []int
}

// runAs returns the user to run initdb and pg_ctl as: nil (this process's
// own user) unless this process is root, which PostgreSQL refuses.
func runAs() (*account, error) {
	if os.Geteuid() != 0 {
		return nil, nil
	}
	u, err := user.Lookup(ServerUser)
	if err != nil {
		return nil, fmt.Errorf("cairn runs as root, and PostgreSQL refuses to run as root; it runs its private server as the unprivileged user %q, which does not exist here (installing PostgreSQL makes it), or run cairn as an ordinary user: %w", ServerUser, err)
	}
	a := &account{name: u.Username, home: u.HomeDir}
	if a.uid, err = strconv.Atoi(u.Uid); err != nil {
		return nil, fmt.Errorf("user %s: uid %q: %w", ServerUser, u.Uid, err)
	}
	if a.gid, err = strconv.Atoi(u.Gid); err != nil {
		return nil, fmt.Errorf("user %s: gid %q: %w", ServerUser, u.Gid, err)
	}
	ids, err := u.GroupIds()
	if err != nil {
		return nil, fmt.Errorf("user %s: groups: %w", ServerUser, err)
	}
	for _, s := range ids {
		if g, err := strconv.Atoi(s); err == nil {
			a.groups = append(a.groups, g)
		}
	}
	if a.uid == 0 {
		return nil, fmt.Errorf("user %s is root; PostgreSQL needs an unprivileged user", ServerUser)
	}
	return a, nil
}

func (a *account) credential() *syscall.Credential {
	groups := make([]uint32, len(a.groups))
	for i, g := range a.groups {
		groups[i] = uint32(g)
	}
	return &syscall.Credential{Uid: uint32(a.uid), Gid: uint32(a.gid), Groups: groups}
}

// canReach checks that a can enter every folder on the way to dir, so the
// server can open its own files.
func (a *account) canReach(dir string) error {
	for d := filepath.Dir(dir); ; d = filepath.Dir(d) {
		fi, err := os.Stat(d)
		if err != nil {
			return fmt.Errorf("check folder %s: %w", d, err)
		}
		st := fi.Sys().(*syscall.Stat_t)
		perm := fi.Mode().Perm()
		var ok bool
		switch {
		case int(st.Uid) == a.uid:
			ok = perm&0o100 != 0
		case int(st.Gid) == a.gid || slices.Contains(a.groups, int(st.Gid)):
			ok = perm&0o010 != 0
		default:
			ok = perm&0o001 != 0
		}
		if !ok {
			return fmt.Errorf("the private server runs as user %s (cairn runs as root), which cannot enter %s (mode %04o) on the way to %s; choose a cluster folder it can reach, e.g. with XDG_DATA_HOME (see docs/database.md)", a.name, d, perm, dir)
		}
		if d == "/" || d == "." {
			return nil
		}
	}
}

// binDir finds the folder of initdb and pg_ctl: c.BinDir if set; else the
// binaries of the cluster's own major version under /usr/lib/postgresql
// when the cluster exists; else PATH; else the newest of
// /usr/lib/postgresql/*/bin.
func (c *Cluster) binDir() (string, error) {
	if c.BinDir != "" {
		return c.BinDir, nil
	}
	var want string
	if v, err := os.ReadFile(filepath.Join(c.dataDir(), "PG_VERSION")); err == nil {
		want = strings.TrimSpace(string(v))
	}
	return findBin(os.Getenv("PATH"), "/usr/lib/postgresql", want)
}

// findBin looks for a folder with both initdb and pg_ctl: under
// root/<want>/bin when want is set, then on path, then the newest version
// under root/*/bin.
func findBin(path, root, want string) (string, error) {
	return findBinOf([]string{"initdb", "pg_ctl"}, path, root, want)
}

// FindTool returns the path of PostgreSQL client program name (pg_dump,
// pg_restore, ...), looked for as initdb and pg_ctl are: under
// /usr/lib/postgresql/<major>/bin first when major is set (a client of the
// server's own version), then on PATH, then the newest version there.
func FindTool(name, major string) (string, error) {
	dir, err := findBinOf([]string{name}, os.Getenv("PATH"), "/usr/lib/postgresql", major)
	if err != nil {
		return "", fmt.Errorf("find %s: %w", name, err)
	}
	return filepath.Join(dir, name), nil
}

// findBinOf looks for a folder holding every program in names.
func findBinOf(names []string, path, root, want string) (string, error) {
	has := func(dir string) bool {
		for _, name := range names {
			fi, err := os.Stat(filepath.Join(dir, name))
			if err != nil || fi.IsDir() || fi.Mode()&0o111 == 0 {
				return false
			}
		}
		return true
	}
	if want != "" && has(filepath.Join(root, want, "bin")) {
		return filepath.Join(root, want, "bin"), nil
	}
	for _, dir := range filepath.SplitList(path) {
		if dir == "" {
			continue
		}
		if has(dir) {
			// Follow a link such as /usr/local/bin/pg_ctl to the real folder,
			// where the server binary lives too.
			if real, err := filepath.EvalSymlinks(filepath.Join(dir, names[len(names)-1])); err == nil {
				return filepath.Dir(real), nil
			}
			return dir, nil
		}
	}
	matches, _ := filepath.Glob(filepath.Join(root, "*", "bin"))
	best, bestV := "", -1.0
	for _, m := range matches {
		v, err := strconv.ParseFloat(filepath.Base(filepath.Dir(m)), 64)
		if err == nil && v > bestV && has(m) {
			best, bestV = m, v
		}
	}
	if best == "" {
		return "", ErrNoBinaries
	}
	return best, nil
}
