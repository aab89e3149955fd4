package cli

import (
	"archive/zip"
	"context"
	"errors"
	"fmt"
	"io/fs"
	"os"
	"path/filepath"
	"strings"

	"github.com/spf13/cobra"

	"cairn/internal/demo"
	"cairn/internal/localpg"
	"cairn/internal/register"
	"cairn/internal/store"
)

// demoDatabase is the database `cairn demo` builds, dropped and made anew
// each run.
const demoDatabase = "cairn_demo"

// demoOptions are the inputs of `cairn demo`.
type demoOptions struct {
	f    *Factory
	ctx  context.Context
	name string // the demo database
	// url prints the demo register's URL instead of building it.
	url bool
	// pack is the file the demo's job pack is written to ("": demoPack
	// in cairn's data folder).
	pack string
}

// The demo's job pack: a site at the Mere River bridge (TC-0412), the
// marks within 1 km, heights in US survey feet, written as demoPack in
// cairn's data folder unless --pack names another file.
const (
	demoPack       = "demo-pack-mere-river-bridge.zip"
	demoPackSite   = "41.6205,-97.9586"
	demoPackRadius = "1km"
)

func newCmdDemo(f *Factory, runF func(*demoOptions) error) *cobra.Command {
	opts := &demoOptions{f: f}
	cmd := &cobra.Command{
		Use:   "demo",
		Short: "Build a small invented register to look around in",
		Long: `Build a small register of the invented Tallis County (the town of Orrin Bay
on the Mere River) and show it with cairn's own commands.

It holds ` + demoContents + ` Every name, position, height
and citation in it is invented.

The demo lives in its own database, ` + demoDatabase + `, on the server cairn would
use (with none named, cairn's private PostgreSQL). It is dropped and built
anew on each run; your own register is not touched. To look around in it
with any command, name it: --url prints its URL, for --db or
CAIRN_DATABASE_URL:

  export CAIRN_DATABASE_URL="$(cairn demo --url)"
  cairn mark show TC-0412

Last it writes a job pack for a site in it, the Mere River bridge (cairn pack
--near ` + demoPackSite + ` --within ` + demoPackRadius + ` --unit usft), to ` + demoPack + ` in
cairn's data folder (or the file --pack names), made anew each run, and
lists its files.`,
		Args: exactArgs(0, "no arguments"),
		RunE: func(cmd *cobra.Command, args []string) error {
			opts.ctx = cmd.Context()
			if opts.name != demoDatabase && !strings.HasPrefix(opts.name, demoDatabase+"_") {
				return badInput("name: the demo database's name must be %s or start with %s_ (it is dropped and made anew)", demoDatabase, demoDatabase)
			}
			return dispatch(opts, runF, demoRun)
		},
	}
	cmd.Flags().BoolVar(&opts.url, "url", false, "print the demo register's URL (for --db or CAIRN_DATABASE_URL) and build nothing")
	cmd.Flags().StringVar(&opts.pack, "pack", "", "write the demo's job pack to FILE (default: "+demoPack+" in cairn's data folder)")
	cmd.Flags().StringVar(&opts.name, "name", demoDatabase, "name of the demo database (dropped and made anew)")
	_ = cmd.Flags().MarkHidden("name")
	return cmd
}

// demoRun builds the demo register and shows it.
func demoRun(opts *demoOptions) error {
	ctx, f, name := opts.ctx, opts.f, opts.name
	src := f.Source()
	server := src.URL
	var url string
	packPath := opts.pack
	if packPath == "" && !opts.url {
		dir, err := localpg.DefaultDir(os.Getenv)
		if err != nil {
			return err
		}
		packPath = filepath.Join(dir, demoPack)
	}
	if src.Embedded {
		c, err := f.Cluster()
		if err != nil {
			return err
		}
		if opts.pack == "" && !opts.url {
			packPath = filepath.Join(c.Dir, demoPack)
		}
		// The demo is the first command of the README: as root, on a
		// machine new to cairn, it makes the system user of cairn's
		// private server, and says so.
		if made, err := localpg.EnsureServerUser(); err != nil {
			return err
		} else if made {
			fmt.Fprintf(f.IO.ErrOut, "cairn runs as root: made the system user %s, which runs cairn's private PostgreSQL (%s)\n",
				localpg.ServerUser, localpg.MakeServerUserCommand)
		}
		if server, err = c.Start(ctx); err != nil {
			return err
		}
		// The demo's tables are made by the owner; it is looked at, as
		// any register of the embedded default, by the everyday role.
		url = c.UserURL(name)
	} else {
		var err error
		if url, err = store.WithDatabase(server, name); err != nil {
			return err
		}
	}
	admin, err := store.WithDatabase(server, name)
	if err != nil {
		return err
	}
	if opts.url {
		fmt.Fprintln(f.IO.Out, url)
		return nil
	}
	if err := store.DatabaseRecreate(ctx, server, name); err != nil {
		return fmt.Errorf("demo: %w", err)
	}
	pool, err := store.Open(ctx, admin)
	if err != nil {
		return fmt.Errorf("demo: %w", err)
	}
	defer pool.Close()
	if err := store.Migrate(ctx, pool); err != nil {
		return fmt.Errorf("demo: create the register's tables: %w", err)
	}
	if err := demo.Build(ctx, register.New(pool)); err != nil {
		return err
	}

	// Show it with cairn's own commands, on the demo database.
	out := f.IO.Out
	ios := &IOStreams{In: f.IO.In, Out: out, ErrOut: out, IsTerminal: true}
	df := NewFactory(ios, f.Version)
	defer df.Close()
	fmt.Fprintf(out, "Built the demo register of the invented Tallis County in database %s (%s).\n", name, src.From)
	steps := []struct{ title, args string }{
		{"The benchmarks", "mark list"},
		{"Their current heights", "height list"},
		{"The history of " + demo.HistoryMark, "history " + demo.HistoryMark},
		{"TC-0412 as it stood on 2020-06-01, its 2019 height in force", "height show TC-0412 --datum NAVD88 --as-of 2020-06-01"},
		{"The disturbed mark, as cairn shows it", "height show TC-0415"},
		{"The level runs recorded", "run list"},
		{"The north loop as recorded", "run show 1"},
	}
	if published, err := register.New(pool).AdjustmentList(ctx, register.AdjustmentListParams{Status: store.StatusPublished}); err != nil {
		return err
	} else if len(published) > 0 {
		steps = append(steps, []struct{ title, args string }{
			{"The adjustments of the demo runs", "adjustment list"},
			{"The history of " + demo.TraceMark + ", now from an adjustment", "history " + demo.TraceMark},
			{"Where " + demo.TraceMark + "'s height comes from", "trace " + demo.TraceMark},
		}...)
	}
	steps = append(steps, []struct{ title, args string }{
		{"A mark reset in place: its heights from before the reset", "history " + demo.ResetMark},
		{"A mark retired and the one that replaced it", "mark show " + demo.ReplacedMark},
	}...)
	for _, step := range steps {
		fmt.Fprintf(out, "\n== %s (cairn %s)\n", step.title, step.args)
		if err := Execute(ctx, df, append([]string{"--db", url}, strings.Fields(step.args)...)); err != nil {
			return fmt.Errorf("demo: cairn %s: %w", step.args, err)
		}
	}
	if err := demoWritePack(ctx, df, url, packPath); err != nil {
		return err
	}
	fmt.Fprintf(out, "\nAll names, positions, heights and citations above are invented.\n\n%s\n", cautions)
	fmt.Fprintf(out, "\nLook at it again with, for example:\n  cairn --db '%s' mark show %s\n  cairn --db '%s' history %s\n",
		redact(url), demo.HistoryMark, redact(url), demo.HistoryMark)
	fmt.Fprintf(out, "or make it the register every command reads, for this shell:\n  export CAIRN_DATABASE_URL=\"$(cairn demo --url)\"\n")
	return nil
}

// demoWritePack writes the demo's job pack to path (made anew) and lists
// its files, with the command that made it.
func demoWritePack(ctx context.Context, df *Factory, url, path string) error {
	out := df.IO.Out
	args := []string{"pack", "--near", demoPackSite, "--within", demoPackRadius, "--unit", "usft", "--out", path}
	fmt.Fprintf(out, "\n== A job pack for the Mere River bridge site (cairn %s)\n", strings.Join(args, " "))
	if err := os.MkdirAll(filepath.Dir(path), 0o755); err != nil {
		return fmt.Errorf("demo: the pack's folder: %w", err)
	}
	if err := os.Remove(path); err != nil && !errors.Is(err, fs.ErrNotExist) {
		return fmt.Errorf("demo: the last run's pack: %w", err)
	}
	if err := Execute(ctx, df, append([]string{"--db", url}, args...)); err != nil {
		return fmt.Errorf("demo: cairn pack: %w", err)
	}
	zr, err := zip.OpenReader(path)
	if err != nil {
		return fmt.Errorf("demo: read the pack back: %w", err)
	}
	defer zr.Close()
	fmt.Fprintf(out, "%s holds:\n", path)
	for _, zf := range zr.File {
		fmt.Fprintf(out, "  %-26s %8d bytes\n", zf.Name, zf.UncompressedSize64)
	}
	return nil
}

// demoContents says what the demo register holds; TestDemoHelpSaysWhatItBuilds
// holds it to what demo.Build makes.
const demoContents = `two datums; twelve benchmarks with their descriptions,
one of them created by recording a field book (its condition unverified);
condition reports, one mark disturbed and one reported not found in 2023
and recovered in 2024; heights from outside publications, one mark with
several versions in two units; two field books recorded as runs; and two
adjustments of them, published. Then one mark reset in place after a
flood, its old heights kept as before the reset, and one mark destroyed by
road works, retired and replaced by a new one.`

// redact hides a password in a URL for printing.
func redact(url string) string {
	if i := strings.Index(url, "://"); i >= 0 {
		if at := strings.Index(url[i+3:], "@"); at >= 0 {
			userinfo := url[i+3 : i+3+at]
			if u, _, ok := strings.Cut(userinfo, ":"); ok {
				return url[:i+3] + u + ":xxxxx" + url[i+3+at:]
			}
		}
	}
	return url
}
