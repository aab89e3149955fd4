package cli

import (
	"context"
	"crypto/sha256"
	"encoding/hex"
	"fmt"
	"log/slog"
	"net"
	"os"
	"strings"
	"time"

	"github.com/spf13/cobra"

	"cairn/internal/register"
	"cairn/internal/store"
	"cairn/internal/web"
)

// serveOptions are the inputs of `cairn serve`.
type serveOptions struct {
	f                *Factory
	ctx              context.Context
	listen           string
	tiles            string
	statement        string
	allowWriter      bool
	statementTimeout time.Duration
	maxConns         int32
	grace            time.Duration
	// ready, when set, is told the address served once the site answers
	// (tests).
	ready func(addr string)
}

func newCmdServe(f *Factory, runF func(*serveOptions) error) *cobra.Command {
	opts := &serveOptions{f: f}
	cmd := &cobra.Command{
		Use:   "serve [--listen 127.0.0.1:8080] [--db URL] [--tiles URL] [--statement FILE]",
		Short: "Serve the register read-only on the web: pages and an OGC API – Features service",
		Long: `Serve the register read-only over HTTP: pages to look marks up (by
designation or alias, or near a point), each mark's datasheet with the
history of its heights and every doubt in a banner, and an OGC API –
Features (Part 1: Core) service of the marks in GeoJSON and HTML, for GIS
clients. Every page takes ?as_of=2019-06-01 to show what was in force then,
and carries the cautions and the register state (docs/web.md).

The site only reads. Connect it as a role that cannot write (a login
member of cairn_reader, see cairn db roles): serve asks the database which
of the register's tables the role may write to and refuses to start if
any, unless --allow-writer is given on purpose. Its sessions are read-only
too, and every statement is bounded by --statement-timeout.

--statement FILE shows an audit statement (made by cairn audit head) in
the footer: signed or not, its commit, head and time and its file's
SHA-256; without it the footer says there is no signed statement. A
statement whose commit this register's chain does not have with the same
head is refused (the whole proof is cairn audit verify --against FILE).

/map draws the marks near a point on a map (Leaflet, in the binary); the
map has no background unless --tiles gives a tile URL template, so it
needs no other server. The site may read a streaming replica (a hot
standby) while the office writes to the primary (docs/web.md, "Served
from a replica").

The server stops gracefully on SIGINT or SIGTERM. One line of JSON per
request goes to stderr (the access log).

` + cautions,
		Example: `  cairn serve --db 'postgres://cairn_web@db.example/cairn' --listen 127.0.0.1:8080
  cairn serve --statement statement.json
  cairn serve --tiles 'https://{s}.tiles.example.org/{z}/{x}/{y}.png'`,
		Args: exactArgs(0, "no arguments"),
		RunE: func(cmd *cobra.Command, args []string) error {
			opts.ctx = cmd.Context()
			if opts.statementTimeout <= 0 {
				return badInput("--statement-timeout must be more than zero")
			}
			if _, err := web.ParseTiles(opts.tiles); err != nil {
				return badInput("--tiles: %v", err)
			}
			if opts.maxConns < 0 {
				return badInput("--max-conns must be zero (the driver's default) or more")
			}
			return dispatch(opts, runF, serveRun)
		},
	}
	fl := cmd.Flags()
	fl.StringVar(&opts.listen, "listen", "127.0.0.1:8080", "address and port to listen on")
	fl.StringVar(&opts.tiles, "tiles", "", "URL template of the map's tile layer, with {z}, {x} and {y} (and {s} for subdomains); none by default, so the map needs no other server")
	fl.StringVar(&opts.statement, "statement", "", "an audit statement FILE (cairn audit head) to show in the footer")
	fl.BoolVar(&opts.allowWriter, "allow-writer", false, "serve even though the role connected can write to the register (not for a public site)")
	fl.DurationVar(&opts.statementTimeout, "statement-timeout", 5*time.Second, "longest a database statement of a request may run")
	fl.Int32Var(&opts.maxConns, "max-conns", 0, "most database connections (0: the driver's default, the larger of 4 and the number of CPUs)")
	fl.DurationVar(&opts.grace, "grace", 10*time.Second, "how long requests under way may take to finish at shutdown")
	return cmd
}

func serveRun(opts *serveOptions) error {
	ctx, ios := opts.ctx, opts.f.IO
	var st *web.Statement
	var stmt register.Statement
	if opts.statement != "" {
		data, err := os.ReadFile(opts.statement)
		if err != nil {
			return badInput("statement: %v", err)
		}
		var signed bool
		if stmt, signed, err = register.ParseStatement(data, ""); err != nil {
			return badInput("statement %s: %v", opts.statement, err)
		}
		sum := sha256.Sum256(data)
		st = &web.Statement{Seq: stmt.Seq, Head: stmt.Head, LatestCommit: stmt.LatestCommit, MadeAt: stmt.MadeAt, SHA256: hex.EncodeToString(sum[:]), Signed: signed}
	}
	url, _, err := opts.f.urls(ctx)
	if err != nil {
		return err
	}
	pool, err := store.OpenWith(ctx, url, store.PoolOptions{StatementTimeout: opts.statementTimeout, ReadOnly: true,
		MaxConns: opts.maxConns, ApplicationName: "cairn serve", NoJIT: true})
	if err != nil {
		return fmt.Errorf("open register (%s): %w", opts.f.Source().From, err)
	}
	defer pool.Close()
	cur, latest, err := store.SchemaVersion(ctx, pool)
	if err != nil {
		return fmt.Errorf("read the register's schema version: %w", err)
	}
	if cur != latest {
		return badInput("the register's schema is at version %d and this cairn's at %d: bring it up to date first (cairn db migrate, as its owner)", cur, latest)
	}
	reg := register.New(pool)
	if opts.statement != "" {
		if err := reg.StatementOfThisRegister(ctx, stmt); err != nil {
			return badInput("statement %s: %v", opts.statement, err)
		}
	}
	log := slog.New(slog.NewJSONHandler(ios.ErrOut, nil))
	role, privs, err := reg.WritePrivileges(ctx)
	if err != nil {
		return err
	}
	if len(privs) > 0 {
		shown := privs
		if len(shown) > 6 {
			shown = append(shown[:6:6], fmt.Sprintf("and %d more", len(privs)-6))
		}
		if !opts.allowWriter {
			return badInput("role %s can write to the register (%s): serve it as a role that only reads (a login member of cairn_reader, see cairn db roles), or give --allow-writer on purpose",
				role, strings.Join(shown, ", "))
		}
		ios.printf("WARNING: serving as role %s, which CAN WRITE to the register (%s); --allow-writer was given. Do not put this site on a public network.\n",
			role, strings.Join(shown, ", "))
		log.Warn("serving as a role that can write to the register", "role", role, "privileges", len(privs))
	}
	ln, err := net.Listen("tcp", opts.listen)
	if err != nil {
		return badInput("listen: %v", err)
	}
	srv := web.New(web.Config{Register: reg, Statement: st, Tiles: opts.tiles, Version: opts.f.Version, Logger: log})
	ios.printf("serving the register read-only on http://%s/ as role %s (stop with Ctrl-C)\n", ln.Addr(), role)
	ios.Flush()
	if opts.ready != nil {
		opts.ready(ln.Addr().String())
	}
	return srv.Run(ctx, ln, opts.grace)
}
