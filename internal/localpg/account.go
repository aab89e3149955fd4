package localpg

import (
	"errors"
	"fmt"
	"os"
	"os/exec"
	"os/user"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"syscall"
	"time"
)

// ServerUser is the system user, made for cairn alone, that runs the
// cluster when cairn runs as root. It is not the "postgres" user of the
// system's own server: any process of that account (a COPY ... TO PROGRAM
// of the system server's superuser, say) could read and change a cluster
// it owned.
const ServerUser = "cairn-pg"

// MakeServerUserEnv names the variable that, set to 1, lets cairn (as
// root) make ServerUser when it is missing; otherwise it refuses and says
// how to make it.
const MakeServerUserEnv = "CAIRN_MAKE_SERVER_USER"

// useraddArgs are the arguments of useradd that make ServerUser: a system
// account with a group of its own, no home folder and no login shell.
var useraddArgs = []string{"--system", "--user-group", "--no-create-home", "--home-dir", "/nonexistent", "--shell", "/usr/sbin/nologin", ServerUser}

// MakeServerUserCommand is the command an administrator runs to make
// ServerUser.
var MakeServerUserCommand = "useradd " + strings.Join(useraddArgs, " ")

// account is the unprivileged user the server runs as.
type account struct {
	name     string
	home     string
	uid, gid int
	groups   []int
}

// runAs returns the user to run initdb and pg_ctl as: nil (this process's
// own user) unless this process is root, which PostgreSQL refuses. As
// root, ServerUser is made when it is missing and make is true; otherwise
// its absence is an error saying how to make it.
func runAs(mayMake bool) (*account, error) {
	if os.Geteuid() != 0 {
		return nil, nil
	}
	return serverAccount(ServerUser, mayMake)
}

// serverAccount returns the account of the server's user name, made when
// missing if mayMake.
func serverAccount(name string, mayMake bool) (*account, error) {
	a, err := lookupAccount(name)
	if err == nil || !mayMake {
		var unknown user.UnknownUserError
		if errors.As(err, &unknown) {
			return nil, fmt.Errorf("cairn runs as root, and PostgreSQL refuses to run as root: cairn runs its private server as the system user %s, made for it alone, which does not exist here; make it with\n  useradd %s\nor let cairn make it (%s=1), or run cairn as an ordinary user (see docs/database.md)",
				name, strings.Join(append(useraddArgs[:len(useraddArgs)-1:len(useraddArgs)-1], name), " "), MakeServerUserEnv)
		}
		return a, err
	}
	if err := MakeServerUser(); err != nil {
		return nil, err
	}
	return lookupAccount(ServerUser)
}

// EnsureServerUser makes ServerUser when this process is root and the user
// is missing; made says it did.
func EnsureServerUser() (made bool, err error) {
	if os.Geteuid() != 0 {
		return false, nil
	}
	if _, err := user.Lookup(ServerUser); err == nil {
		return false, nil
	}
	return true, MakeServerUser()
}

// MakeServerUser makes ServerUser with useradd unless it exists. Several
// processes may do so at once: useradd's own lock makes them take turns,
// and one that finds the user made by another succeeds.
func MakeServerUser() error {
	var last error
	for range 50 {
		if _, err := user.Lookup(ServerUser); err == nil {
			return nil
		}
		out, err := exec.Command("useradd", useraddArgs...).CombinedOutput()
		if err == nil {
			return nil
		}
		var ee *exec.ExitError
		if errors.As(err, &ee) && ee.ExitCode() == 9 { // name in use: made meanwhile
			return nil
		}
		last = fmt.Errorf("%w: %s", err, strings.TrimSpace(string(out)))
		if !errors.As(err, &ee) {
			break // no useradd at all
		}
		time.Sleep(100 * time.Millisecond) // another useradd holds the lock
	}
	return fmt.Errorf("make system user %s (%s): %v", ServerUser, MakeServerUserCommand, last)
}

// lookupAccount returns the account of the user named name.
func lookupAccount(name string) (*account, error) {
	u, err := user.Lookup(name)
	if err != nil {
		return nil, err
	}
	a := &account{name: u.Username, home: u.HomeDir}
	if a.uid, err = strconv.Atoi(u.Uid); err != nil {
		return nil, fmt.Errorf("user %s: uid %q: %w", name, u.Uid, err)
	}
	if a.gid, err = strconv.Atoi(u.Gid); err != nil {
		return nil, fmt.Errorf("user %s: gid %q: %w", name, u.Gid, err)
	}
	ids, err := u.GroupIds()
	if err != nil {
		return nil, fmt.Errorf("user %s: groups: %w", name, err)
	}
	for _, s := range ids {
		if g, err := strconv.Atoi(s); err == nil {
			a.groups = append(a.groups, g)
		}
	}
	if a.uid == 0 {
		return nil, fmt.Errorf("user %s is root; PostgreSQL needs an unprivileged user", name)
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
