// Package backup copies a register out of PostgreSQL into one file and
// back, with the server's own pg_dump and pg_restore (custom format).
package backup

import (
	"bytes"
	"context"
	"errors"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"strings"

	"cairn/internal/localpg"
)

// major returns the major version of a server version text ("15.19" ->
// "15").
func major(serverVersion string) string {
	v, _, _ := strings.Cut(strings.TrimSpace(serverVersion), ".")
	v, _, _ = strings.Cut(v, " ")
	return v
}

// Dump writes the database at url, whole, to file in pg_dump's custom
// format, with the pg_dump of the server's major version when there is
// one. The dump is one snapshot of the database. It is written next to
// file and renamed into place only when complete and readable, so a
// failed backup leaves no file that passes for one. An existing file is
// refused.
func Dump(ctx context.Context, url, serverVersion, file string) error {
	if _, err := os.Lstat(file); err == nil {
		return fmt.Errorf("%s exists: name a new file", file)
	}
	dump, err := localpg.FindTool("pg_dump", major(serverVersion))
	if err != nil {
		return err
	}
	tmp := filepath.Join(filepath.Dir(file), "."+filepath.Base(file)+".partial")
	defer os.Remove(tmp)
	if err := runTool(ctx, dump, withDB(url, "--format=custom", "--no-password", "--file="+tmp)...); err != nil {
		return err
	}
	if err := List(ctx, tmp, serverVersion); err != nil {
		return fmt.Errorf("check the new backup: %w", err)
	}
	if err := os.Rename(tmp, file); err != nil {
		return fmt.Errorf("put backup in place: %w", err)
	}
	return nil
}

// List checks that file is a backup pg_restore can read.
func List(ctx context.Context, file, serverVersion string) error {
	restore, err := localpg.FindTool("pg_restore", major(serverVersion))
	if err != nil {
		return err
	}
	return runTool(ctx, restore, "--list", file)
}

// Restore loads file into the (empty) database at url in one
// transaction: it all arrives, or nothing does. Owners and privileges of
// the backup are not restored (the server restored into may have other
// roles); the caller grants the register's own afterwards.
func Restore(ctx context.Context, url, serverVersion, file string) error {
	if _, err := os.Stat(file); err != nil {
		return err
	}
	restore, err := localpg.FindTool("pg_restore", major(serverVersion))
	if err != nil {
		return err
	}
	return runTool(ctx, restore, append(withDB(url, "--single-transaction", "--exit-on-error", "--no-owner",
		"--no-privileges", "--no-password"), file)...)
}

// withDB adds the connection to args; "" leaves it to the PG* variables.
func withDB(url string, args ...string) []string {
	if url != "" {
		args = append(args, "--dbname="+url)
	}
	return args
}

// runTool runs a PostgreSQL program; its error carries the program's own
// message, named once by the program (its own lines start with its name
// already: "pg_restore: error: ...").
func runTool(ctx context.Context, prog string, args ...string) error {
	var stderr bytes.Buffer
	cmd := exec.CommandContext(ctx, prog, args...)
	cmd.Stderr = &stderr
	if err := cmd.Run(); err != nil {
		return toolError(filepath.Base(prog), strings.TrimSpace(stderr.String()), err)
	}
	return nil
}

// toolError is the error of program name that failed with err, having
// written msg on its error stream.
func toolError(name, msg string, err error) error {
	var ee *exec.ExitError
	switch {
	case !errors.As(err, &ee) || msg == "":
		return fmt.Errorf("%s: %w", name, err)
	case strings.HasPrefix(msg, name+":"):
		return errors.New(msg)
	}
	return fmt.Errorf("%s: %s", name, msg)
}
