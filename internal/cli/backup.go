package cli

import (
	"context"
	"errors"
	"fmt"
	"os"
	"runtime"
	"strings"

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

// restoreStaged restores file through a database made for it
// (backup.RestoreStaged), audited by restoreCheck before it takes the
// empty target's place; staged is false, with nothing done, when the role
// may not create a database.
func restoreStaged(ctx context.Context, f *Factory, url string, srv store.Server, file string) (staged bool, err error) {
	return backup.RestoreStaged(ctx, backup.StagedParams{
		URL: url, ServerVersion: srv.Version, Target: srv.Database, File: file, Jobs: restoreJobs(),
		Check: func(ctx context.Context, pool *pgxpool.Pool, staging string) (bool, error) {
			err := restoreCheck(ctx, f, pool, file, staging, srv.Database)
			var failed checksFailed
			return errors.As(err, &failed), err
		},
		// This process's sessions on the target, which a rename waits for.
		CloseSessions: f.Close,
	})
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
