package cli

import (
	"context"
	"crypto/rand"
	"encoding/hex"
	"errors"
	"fmt"
	"os"
	"runtime"
	"strings"

	"github.com/jackc/pgx/v5"
	"github.com/jackc/pgx/v5/pgxpool"
	"github.com/spf13/cobra"

	"cairn/internal/backup"
	"cairn/internal/register"
	"cairn/internal/store"
)

// backupOptions are the options of backup and restore.
type backupOptions struct {
	f    *Factory
	ctx  context.Context
	file string
	key  string
}

// statementFile is where backup writes the statement of a dump, and
// restore looks for it.
func statementFile(dump string) string { return dump + ".statement.json" }

func newCmdBackup(f *Factory, runF func(*backupOptions) error) *cobra.Command {
	opts := &backupOptions{f: f}
	cmd := &cobra.Command{
		Use:   "backup FILE",
		Short: "Copy the whole register into one file",
		Long: `Copy the whole register, every table and every version of its history, into
FILE, with PostgreSQL's pg_dump (custom format) of the server's version. The
copy is one consistent snapshot; others may go on working meanwhile. FILE
must not exist; it appears only once the copy is complete and readable.

Beside it, FILE.statement.json is a statement of the register's head taken
just before the copy ("cairn audit head"; signed with --key FILE or the file
CAIRN_AUDIT_KEY names), which restore checks. A register whose chain does not
verify is not backed up (exit 3): audit it first.

Keep the copies somewhere other than the server. "cairn restore FILE" loads
one into an empty database.`,
		Example: `  cairn backup register-2024-05-14.dump`,
		Args:    exactArgs(1, "a FILE to write"),
		RunE: func(cmd *cobra.Command, args []string) error {
			opts.ctx, opts.file = cmd.Context(), args[0]
			return dispatch(opts, runF, backupRun)
		},
	}
	cmd.Flags().StringVar(&opts.key, "key", "", "sign the statement with the Ed25519 key in FILE (default: the file CAIRN_AUDIT_KEY names)")
	return cmd
}

func backupRun(opts *backupOptions) error {
	pool, err := opts.f.Pool(opts.ctx)
	if err != nil {
		return err
	}
	srv, err := store.ServerGet(opts.ctx, pool)
	if err != nil {
		return err
	}
	n, _, err := store.RegisterCount(opts.ctx, pool)
	if err != nil {
		return err
	}
	url, err := opts.f.AdminURL(opts.ctx)
	if err != nil {
		return err
	}
	sf := statementFile(opts.file)
	if _, err := os.Lstat(sf); err == nil {
		return badInput("%s exists: name a new file", sf)
	}
	stmt, err := makeStatement(opts.ctx, register.New(pool), opts.key, opts.f)
	if err != nil {
		return err
	}
	if err := backup.Dump(opts.ctx, url, srv.Version, opts.file); err != nil {
		if strings.Contains(err.Error(), "exists: name a new file") {
			return badInput("%v", err)
		}
		return fmt.Errorf("back up register: %w", err)
	}
	if err := writeNewFile(sf, stmt.Encode()); err != nil {
		return fmt.Errorf("write the statement of %s: %w", opts.file, err)
	}
	opts.f.IO.printf("backed up %d mark(s) and %d height version(s) to %s\n", n.Marks, n.HeightVersions, opts.file)
	opts.f.IO.printf("statement of commit %d (%s) in %s\n", stmt.Seq, stmt.Head, sf)
	return nil
}

func newCmdRestore(f *Factory, runF func(*backupOptions) error) *cobra.Command {
	opts := &backupOptions{f: f}
	return &cobra.Command{
		Use:   "restore FILE",
		Short: "Load a backup into an empty database and audit it",
		Long: `Load FILE, made by "cairn backup", into the database named by --db (or the
embedded default), which must be empty: create a new database for it.

The backup is loaded into a new database made for the restore beside it
(cairn_restore_..., of the same encoding, locale and owner), over several
connections at once (pg_restore --jobs, one a CPU); its schema is brought up
to date, the register's roles get their privileges again (cairn db roles),
and the whole register is audited as "cairn audit verify" does: every chain
of height versions, the commit chain of every table, every book parsed and
reduced again, every published adjustment computed again, and the schema
compared with its migrations; when FILE.statement.json (written by backup) is
beside FILE, the restored register is verified against it. Only then does it
take the empty database's place (the empty one renamed away and dropped, the
new one renamed to its name), so the database named holds the whole register
or stays empty. A load that fails drops the new database: nothing is left
behind. If anything does not verify, the restore is refused with the breaks
listed and exit status 3; the restored copy is kept under its own name, for
inspection, and is not fit for use; the database named stays empty.

A role that may not create databases loads the backup into the database
named itself, in one transaction, on one connection, and audits it there.
`,
		Example: `  createdb register_restored
  cairn --db postgres://localhost/register_restored restore register-2024-05-14.dump`,
		Args: exactArgs(1, "a backup FILE"),
		RunE: func(cmd *cobra.Command, args []string) error {
			opts.ctx, opts.file = cmd.Context(), args[0]
			return dispatch(opts, runF, restoreRun)
		},
	}
}

func restoreRun(opts *backupOptions) error {
	f, ctx := opts.f, opts.ctx
	pool, err := f.Admin(ctx)
	if err != nil {
		return err
	}
	empty, err := store.DatabaseEmpty(ctx, pool)
	if err != nil {
		return err
	}
	if !empty {
		srv, _ := store.ServerGet(ctx, pool)
		return badInput("database %q is not empty: restore into a new, empty database", srv.Database)
	}
	srv, err := store.ServerGet(ctx, pool)
	if err != nil {
		return err
	}
	url, err := f.AdminURL(ctx)
	if err != nil {
		return err
	}
	if err := backup.List(ctx, opts.file, srv.Version); err != nil {
		return badInput("%s is not a backup cairn can read: %v", opts.file, err)
	}
	staged, err := restoreStaged(ctx, f, url, srv, opts.file)
	if staged || err != nil {
		return err
	}
	// The role may not create a database to load into: one transaction
	// into the empty database itself, on one connection.
	fmt.Fprintf(f.IO.ErrOut, "cairn: the role may not create a database to load into: the backup is loaded in one transaction, on one connection\n")
	if err := backup.Restore(ctx, url, srv.Version, opts.file); err != nil {
		return fmt.Errorf("restore %s: %w", opts.file, err)
	}
	if _, err := f.Pool(ctx); err != nil {
		return err
	}
	return restoreCheck(ctx, f, pool, opts.file, srv.Database, srv.Database)
}

// restoreJobs is how many connections a restore loads over.
var restoreJobs = func() int { return min(max(runtime.NumCPU(), 2), 8) }

// restoreStaged loads file into a new database made for it (the encoding,
// locale and owner of the empty target's), over several connections at
// once (backup.RestoreJobs), brings its schema up to date, gives the
// register's roles their privileges and audits it (restoreCheck); only
// when everything verifies does it take the place of the empty target
// (renamed away, the new one renamed to its name, the empty one dropped).
// A load that fails drops the new database: nothing is left behind, and
// the target stays as it was. A register that does not verify is kept
// under the new database's own name, for inspection, and the target stays
// empty. staged is false, with nothing done, when the role may not create
// a database.
func restoreStaged(ctx context.Context, f *Factory, url string, srv store.Server, file string) (staged bool, err error) {
	target := srv.Database
	conn, err := pgx.Connect(ctx, url)
	if err != nil {
		return false, fmt.Errorf("connect to server: %w", err)
	}
	defer conn.Close(context.WithoutCancel(ctx))
	settings, err := store.DatabaseSettingsGet(ctx, conn, target)
	if err != nil {
		return false, err
	}
	b := make([]byte, 6)
	if _, err := rand.Read(b); err != nil {
		return false, err
	}
	staging := "cairn_restore_" + hex.EncodeToString(b)
	if err := store.DatabaseCreateLike(ctx, conn, staging, settings); err != nil {
		if errors.Is(err, store.ErrPermission) {
			return false, nil
		}
		return true, err
	}
	keep := false
	defer func() {
		if keep {
			return
		}
		// On a session of its own: conn may be closed by now.
		c, derr := pgx.Connect(context.WithoutCancel(ctx), url)
		if derr == nil {
			derr = store.DatabaseDrop(context.WithoutCancel(ctx), c, staging)
			c.Close(context.WithoutCancel(ctx))
		}
		if derr != nil {
			err = errors.Join(err, fmt.Errorf("the database made for the restore, %q, could not be dropped: drop it: %w", staging, derr))
		}
	}()
	stagingURL, err := store.WithDatabase(url, staging)
	if err != nil {
		return true, err
	}
	if err := backup.RestoreJobs(ctx, stagingURL, srv.Version, file, restoreJobs()); err != nil {
		return true, fmt.Errorf("restore %s: nothing is left behind (database %q, made for the load, is dropped; database %q is as it was): %w", file, staging, target, err)
	}
	pool, err := store.Open(ctx, stagingURL)
	if err != nil {
		return true, err
	}
	defer pool.Close()
	if err := store.Migrate(ctx, pool); err != nil {
		return true, fmt.Errorf("bring the restored register's schema up to date: %w", err)
	}
	if err := restoreCheck(ctx, f, pool, file, staging, target); err != nil {
		var failed checksFailed
		if errors.As(err, &failed) {
			keep = true
		}
		return true, err
	}
	pool.Close()
	if settings.Owner != "" {
		var me string
		if err := conn.QueryRow(ctx, "SELECT current_user").Scan(&me); err != nil {
			return true, err
		}
		if me != settings.Owner {
			if err := store.DatabaseSetOwner(ctx, conn, staging, settings.Owner); err != nil {
				return true, fmt.Errorf("the restored register verifies, but it cannot be given database %q's owner, so it is not put in its place: %w", target, err)
			}
		}
	}
	conn.Close(ctx)
	f.Close() // this process's sessions on the target, which a rename waits for
	if err := swapDatabases(ctx, url, stagingURL, staging, target); err != nil {
		return true, err
	}
	keep = true // it is the target now
	return true, nil
}

// swapDatabases puts database staging in the place of the empty database
// target: target renamed away, staging renamed to target's name, the
// renamed empty one dropped. A step that fails undoes the ones before it.
// No session may be connected to either.
func swapDatabases(ctx context.Context, url, stagingURL, staging, target string) error {
	away := staging + "_empty"
	awayURL, err := store.WithDatabase(url, away)
	if err != nil {
		return err
	}
	// Each rename is made from a session on another database than the one
	// renamed, and closed before that database is renamed in turn.
	onDB := func(u string, fn func(*pgx.Conn) error) error {
		c, err := pgx.Connect(ctx, u)
		if err != nil {
			return err
		}
		defer c.Close(context.WithoutCancel(ctx))
		return fn(c)
	}
	if err := onDB(stagingURL, func(c *pgx.Conn) error { return store.DatabaseRename(ctx, c, target, away) }); err != nil {
		return fmt.Errorf("the restored register verifies, but database %q cannot be set aside for it (close the sessions connected to it and restore again): %w", target, err)
	}
	err = onDB(awayURL, func(c *pgx.Conn) error {
		empty, err := store.DatabaseEmpty(ctx, c)
		if err == nil && !empty {
			err = fmt.Errorf("database %q was written to during the restore: the restored register is not put in its place", target)
		}
		if err == nil {
			err = store.DatabaseRename(ctx, c, staging, target)
		}
		return err
	})
	if err != nil {
		if uerr := onDB(stagingURL, func(c *pgx.Conn) error { return store.DatabaseRename(context.WithoutCancel(ctx), c, away, target) }); uerr != nil {
			err = fmt.Errorf("%w; and database %q could not be given its name back from %q: %v", err, target, away, uerr)
		}
		return err
	}
	if err := onDB(url, func(c *pgx.Conn) error { return store.DatabaseDrop(ctx, c, away) }); err != nil {
		return fmt.Errorf("the register is restored as %q; the empty database it replaced, %q, is left: drop it: %w", target, away, err)
	}
	return nil
}

// restoreCheck gives the register's roles their privileges on the
// restored register at pool (database name, to become target) and audits
// it whole, against the statement beside file when there is one.
func restoreCheck(ctx context.Context, f *Factory, pool *pgxpool.Pool, file, name, target string) error {
	missing, err := store.RolesApply(ctx, pool)
	if err != nil {
		return err
	}
	if len(missing) > 0 {
		fmt.Fprintf(f.IO.ErrOut, "roles %s are missing on this server: run cairn db roles as a role that may create them\n", strings.Join(missing, ", "))
	}
	n, _, err := store.RegisterCount(ctx, pool)
	if err != nil {
		return err
	}
	f.IO.printf("restored %d mark(s) and %d height version(s) from %s\n", n.Marks, n.HeightVersions, file)
	reg := register.New(pool)
	useSchemaCache(reg, false)
	rep, err := reg.AuditVerify(ctx)
	if err != nil {
		return fmt.Errorf("audit the restored register: %w", err)
	}
	kept := fmt.Sprintf("database %q is kept as restored, for inspection", name)
	if name != target {
		kept += fmt.Sprintf(" (database %q is left empty)", target)
	}
	if err := renderAudit(f.IO, FormatTable, rep); err != nil {
		f.IO.printf("cairn: the restore of %s is refused: the restored register does not verify (%d break(s) above); %s: drop it once examined, and restore an earlier backup\n",
			file, rep.Count(), kept)
		return err
	}
	sf := statementFile(file)
	if _, err := os.Stat(sf); err != nil {
		f.IO.printf("no statement %s beside the backup: the commit chain is checked on its own\n", sf)
		sf = ""
	}
	if _, _, err := verifyAgainst(ctx, f, reg, sf, ""); err != nil {
		f.IO.printf("cairn: the restore of %s is refused: the restored register does not hold against its statement or its commit chain; %s: do not use it\n",
			file, kept)
		return err
	}
	return nil
}

// writeNewFile writes data to file, which must not exist.
func writeNewFile(file string, data []byte) error {
	fh, err := os.OpenFile(file, os.O_WRONLY|os.O_CREATE|os.O_EXCL, 0o644)
	if err != nil {
		return err
	}
	if _, err := fh.Write(data); err != nil {
		fh.Close()
		os.Remove(file)
		return err
	}
	return fh.Close()
}
