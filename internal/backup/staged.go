package backup

import (
	"context"
	"crypto/rand"
	"encoding/hex"
	"errors"
	"fmt"

	"github.com/jackc/pgx/v5"
	"github.com/jackc/pgx/v5/pgxpool"

	"cairn/internal/store"
)

// StagedParams are a restore through a database made for it.
type StagedParams struct {
	// URL reaches the empty target database as a role that may create
	// databases; ServerVersion is its server's (for pg_restore).
	URL, ServerVersion string
	// Target is the empty database's name; File the backup.
	Target, File string
	// Jobs is how many connections load the backup at once.
	Jobs int
	// Check gives the restored register at pool (the database named
	// staging) its roles' privileges and audits it; inspect says to keep
	// a register that does not verify, for inspection.
	Check func(ctx context.Context, pool *pgxpool.Pool, staging string) (inspect bool, err error)
	// CloseSessions, if set, closes the caller's own sessions on the
	// target before it is renamed away (a rename waits for them).
	CloseSessions func()
}

// RestoreStaged loads p.File into a new database made for it (the
// encoding, locale and owner of the empty target's), over p.Jobs
// connections at once (RestoreJobs), brings its schema up to date and has
// p.Check give the register's roles their privileges and audit it; only
// when everything verifies does it take the place of the empty target
// (renamed away, the new one renamed to its name, the empty one dropped).
// A load that fails drops the new database: nothing is left behind, and
// the target stays as it was. A register that does not verify (p.Check
// says to keep it for inspection) is kept under the new database's own
// name, and the target stays empty. staged is false, with nothing done, when the role may not create
// a database.
func RestoreStaged(ctx context.Context, p StagedParams) (staged bool, err error) {
	url, target, file := p.URL, p.Target, p.File
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
	if err := RestoreJobs(ctx, stagingURL, p.ServerVersion, file, p.Jobs); err != nil {
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
	if inspect, err := p.Check(ctx, pool, staging); err != nil {
		keep = inspect
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
	if p.CloseSessions != nil {
		p.CloseSessions()
	}
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
