package cli

import (
	"context"
	"fmt"
	"strconv"

	"github.com/spf13/cobra"

	"cairn/internal/store"
)

// dbOptions are the options of the db subcommands.
type dbOptions struct {
	f      *Factory
	ctx    context.Context
	format Format
}

func newDBCmd(f *Factory, use, short string, runF, run func(*dbOptions) error) (*cobra.Command, *dbOptions) {
	opts := &dbOptions{f: f}
	cmd := &cobra.Command{
		Use:   use,
		Short: short,
		Args:  exactArgs(0, "no arguments"),
		RunE: func(cmd *cobra.Command, _ []string) error {
			opts.ctx = cmd.Context()
			return dispatch(opts, runF, run)
		},
	}
	return cmd, opts
}

func newCmdDBStart(f *Factory, runF func(*dbOptions) error) *cobra.Command {
	cmd, _ := newDBCmd(f, "start", "Start the embedded default and bring its schema up to date", runF, dbStartRun)
	return cmd
}

func newCmdDBStop(f *Factory, runF func(*dbOptions) error) *cobra.Command {
	cmd, _ := newDBCmd(f, "stop", "Stop the embedded default", runF, dbStopRun)
	return cmd
}

func newCmdDBMigrate(f *Factory, runF func(*dbOptions) error) *cobra.Command {
	cmd, _ := newDBCmd(f, "migrate", "Bring the register's schema up to date", runF, dbMigrateRun)
	return cmd
}

func newCmdDBStatus(f *Factory, runF func(*dbOptions) error) *cobra.Command {
	cmd, opts := newDBCmd(f, "status", "Say which server holds the register, its schema version and its size", runF, dbStatusRun)
	addOutputFlag(cmd, &opts.format)
	return cmd
}

// embeddedOnly refuses to manage a server cairn did not start.
func embeddedOnly(f *Factory, verb string) error {
	if src := f.Source(); !src.Embedded {
		return badInput("db %s manages only the embedded default, and the register is on the server named by %s", verb, src.From)
	}
	return nil
}

func dbStartRun(opts *dbOptions) error {
	if err := embeddedOnly(opts.f, "start"); err != nil {
		return err
	}
	if _, err := opts.f.Pool(opts.ctx); err != nil {
		return err
	}
	c, err := opts.f.Cluster()
	if err != nil {
		return err
	}
	fmt.Fprintf(opts.f.IO.ErrOut, "embedded default running in %s\n", c.Dir)
	return nil
}

func dbStopRun(opts *dbOptions) error {
	if err := embeddedOnly(opts.f, "stop"); err != nil {
		return err
	}
	c, err := opts.f.Cluster()
	if err != nil {
		return err
	}
	st, err := c.Status(opts.ctx)
	if err != nil {
		return err
	}
	if !st.Running {
		fmt.Fprintf(opts.f.IO.ErrOut, "embedded default in %s was not running\n", c.Dir)
		return nil
	}
	if err := c.Stop(opts.ctx); err != nil {
		return err
	}
	fmt.Fprintf(opts.f.IO.ErrOut, "embedded default in %s stopped\n", c.Dir)
	return nil
}

func dbMigrateRun(opts *dbOptions) error {
	pool, err := opts.f.Conn(opts.ctx)
	if err != nil {
		return err
	}
	before, _, err := store.SchemaVersion(opts.ctx, pool)
	if err != nil {
		return fmt.Errorf("read schema version: %w", err)
	}
	if _, err := opts.f.Pool(opts.ctx); err != nil {
		return err
	}
	after, _, err := store.SchemaVersion(opts.ctx, pool)
	if err != nil {
		return fmt.Errorf("read schema version: %w", err)
	}
	if after == before {
		fmt.Fprintf(opts.f.IO.ErrOut, "schema already at version %d, the latest\n", after)
	} else {
		fmt.Fprintf(opts.f.IO.ErrOut, "schema brought from version %d to %d\n", before, after)
	}
	return nil
}

// dbStatus is the report of `cairn db status`; unknown values are null.
type dbStatus struct {
	From           string  `json:"from"`
	Folder         *string `json:"folder"`
	Made           bool    `json:"made"`
	Running        bool    `json:"running"`
	Host           *string `json:"host"`
	Port           *uint16 `json:"port"`
	Database       *string `json:"database"`
	ServerVersion  *string `json:"server_version"`
	SchemaVersion  *int64  `json:"schema_version"`
	SchemaLatest   int64   `json:"schema_latest"`
	RegisterTables bool    `json:"register_tables"`
	Marks          *int64  `json:"marks"`
	HeightVersions *int64  `json:"height_versions"`
	// CountsEstimated: marks and height_versions are the planner's
	// estimates of a large register, not counted row by row.
	CountsEstimated bool `json:"counts_estimated"`
}

func dbStatusRun(opts *dbOptions) error {
	f, ctx := opts.f, opts.ctx
	src := f.Source()
	st := dbStatus{From: src.From, Made: true, Running: true}
	if src.Embedded {
		c, err := f.Cluster()
		if err != nil {
			return err
		}
		cs, err := c.Status(ctx)
		if err != nil {
			return err
		}
		st.Folder, st.Made, st.Running = &cs.Dir, cs.Exists, cs.Running
	}
	if st.Running {
		pool, err := f.Conn(ctx)
		if err != nil {
			return err
		}
		srv, err := store.ServerGet(ctx, pool)
		if err != nil {
			return err
		}
		st.Host, st.Port, st.Database, st.ServerVersion = &srv.Host, &srv.Port, &srv.Database, &srv.Version
		cur, latest, err := store.SchemaVersion(ctx, pool)
		if err != nil {
			return fmt.Errorf("read schema version: %w", err)
		}
		st.SchemaVersion, st.SchemaLatest = &cur, latest
		n, applied, err := store.RegisterCount(ctx, pool)
		if err != nil {
			return err
		}
		st.RegisterTables = applied
		if applied {
			st.Marks, st.HeightVersions, st.CountsEstimated = &n.Marks, &n.HeightVersions, n.Estimated
		}
	} else {
		latest, err := store.SchemaLatest()
		if err != nil {
			return err
		}
		st.SchemaLatest = latest
	}
	return render(f.IO, opts.format, st, func() Table { return st.table() })
}

func (st dbStatus) table() Table {
	t := Table{Headers: []string{"ITEM", "VALUE"}}
	t.AddRow("register", st.From)
	if st.Folder != nil {
		state := "running"
		switch {
		case !st.Made:
			state = "not yet made (cairn db start makes it)"
		case !st.Running:
			state = "stopped (cairn db start starts it)"
		}
		t.AddRow("folder", *st.Folder)
		t.AddRow("server", state)
	}
	if st.Host != nil {
		t.AddRow("host", *st.Host)
		t.AddRow("port", strconv.Itoa(int(*st.Port)))
		t.AddRow("database", *st.Database)
		t.AddRow("postgresql", *st.ServerVersion)
	}
	switch {
	case st.SchemaVersion == nil:
		t.AddRow("schema", fmt.Sprintf("unknown; latest is version %d", st.SchemaLatest))
	case *st.SchemaVersion < st.SchemaLatest:
		t.AddRow("schema", fmt.Sprintf("version %d of %d (cairn db migrate brings it up to date)", *st.SchemaVersion, st.SchemaLatest))
	default:
		t.AddRow("schema", fmt.Sprintf("version %d (the latest)", *st.SchemaVersion))
	}
	count := func(n *int64) string {
		switch {
		case n != nil && st.CountsEstimated:
			return "about " + strconv.FormatInt(*n, 10) + " (the planner's estimate)"
		case n != nil:
			return strconv.FormatInt(*n, 10)
		case st.SchemaVersion == nil:
			return "unknown"
		}
		return "schema not yet applied"
	}
	t.AddRow("marks", count(st.Marks))
	t.AddRow("height versions", count(st.HeightVersions))
	return t
}
