// Package cli is cairn's command line: cobra commands, one file per command
// group, each parsing its flags into an options struct and handing the work
// to a run function; rendering as table, json or csv.
package cli

import (
	"context"
	"fmt"
	"io"
	"os"
	"os/signal"
	"strings"
	"syscall"

	"github.com/spf13/cobra"
)

// Version is set at build time with -ldflags "-X cairn/internal/cli.Version=...".
var Version = "0.1.0-dev"

// Main runs cairn with the given arguments and returns the exit status.
func Main(args []string) int {
	ios := SystemStreams()
	f := NewFactory(ios, Version)
	defer f.Close()
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
	defer stop()
	err := Execute(ctx, f, args)
	if os.Getenv("CAIRN_REPORT_PEAK_MEMORY") != "" {
		reportPeakMemory(ios.ErrOut)
	}
	st := finish(ios, err)
	ios.Flush()
	return st
}

// Execute runs the root command over f with args; tests call it directly.
// An error comes back wrapped with the command that ran, so that its
// message names that command's flags (see errorMessage); errors.As and
// exitCode see through the wrapping.
func Execute(ctx context.Context, f *Factory, args []string) error {
	defer f.IO.Flush()
	root := NewRootCmd(f)
	root.SetArgs(args)
	root.SetIn(f.IO.In)
	root.SetOut(f.IO.Out)
	root.SetErr(f.IO.ErrOut)
	cmd, err := root.ExecuteContextC(ctx)
	if err == nil {
		return nil
	}
	// Finding the command fails only when the first argument names no
	// command of the root (cobra's legacy argument check, which the root
	// gets as it has no Args of its own): a mistake in the command line.
	if _, _, ferr := root.Find(args); ferr != nil {
		err = flagError{err}
	}
	return &commandError{cmd: cmd, err: err}
}

// NewRootCmd builds the `cairn` command and all its subcommands.
func NewRootCmd(f *Factory) *cobra.Command {
	root := &cobra.Command{
		Use:   "cairn",
		Short: "A register of benchmarks, level circuits and published heights",
		Long: `cairn keeps the register of a survey office's vertical control: the
benchmarks in the ground, the condition reports on them, every level circuit
run over them with its field book kept word for word, the adjustments made
from those circuits, and every height ever published, with its reason and
its origin. Nothing published is ever overwritten: a new height is a new
version, and any past answer can be asked for again.

The register lives in PostgreSQL. Name a server with --db or
CAIRN_DATABASE_URL (or the usual PG* variables); with none named, cairn runs
a private PostgreSQL of its own under your data folder.

Heights from cairn are used to build drains, roads and floor levels. Every
result needs review by a licensed surveyor before use; check into two marks,
verify a mark's condition in the field before relying on it, and follow the
codes and regulations that govern your work.`,
		Version:       f.Version,
		SilenceErrors: true,
		SilenceUsage:  true,
		// Every command refuses text the register could not keep exactly.
		PersistentPreRunE: checkText,
	}
	root.PersistentFlags().StringVar(&f.DatabaseURL, "db", "", "PostgreSQL connection URL of the register (default: $CAIRN_DATABASE_URL, PG* variables, or the embedded default)")
	root.SetFlagErrorFunc(func(c *cobra.Command, err error) error {
		return flagError{fmt.Errorf("%w (see 'cairn %s --help')", err, strings.TrimPrefix(c.CommandPath(), "cairn "))}
	})
	// Commands register here: groups with their subcommands, one file a
	// group; leaf commands one line each.
	root.AddCommand(
		commandGroup(&cobra.Command{Use: "db", Short: "Start, stop, inspect and migrate the register's database", Long: dbLong},
			newCmdDBStart(f, nil), newCmdDBStop(f, nil), newCmdDBStatus(f, nil), newCmdDBMigrate(f, nil), newCmdDBRoles(f, nil)),
		commandGroup(&cobra.Command{Use: "datum", Short: "Vertical datums heights refer to"},
			newCmdDatumAdd(f, nil), newCmdDatumList(f, nil)),
		commandGroup(&cobra.Command{Use: "mark", Short: "Benchmarks: add, show, list, report their condition"},
			newCmdMarkAdd(f, nil), newCmdMarkShow(f, nil), newCmdMarkList(f, nil), newCmdMarkCondition(f, nil),
			newCmdMarkEdit(f, nil), newCmdMarkAlias(f, nil), newCmdMarkRetire(f, nil), newCmdMarkReplace(f, nil),
			newCmdMarkPhoto(f, nil)),
		commandGroup(&cobra.Command{Use: "height", Short: "Published heights of benchmarks: record and look up"},
			newCmdHeightSet(f, nil), newCmdHeightWithdraw(f, nil), newCmdHeightShow(f, nil), newCmdHeightList(f, nil)),
		newCmdHistory(f, nil),
		commandGroup(&cobra.Command{Use: "audit", Short: "Check the register's history for tampering"},
			newCmdAuditVerify(f, nil), newCmdAuditHead(f, nil),
			commandGroup(&cobra.Command{Use: "key", Short: "Keys that sign the register's statements"}, newCmdAuditKeyNew(f, nil))),
		newCmdDemo(f, nil),
		commandGroup(&cobra.Command{Use: "run <command>", Short: "Level runs: check and record field books", Long: runLong},
			newCmdRunCheck(f, nil), newCmdRunRecord(f, nil), newCmdRunList(f, nil), newCmdRunShow(f, nil), newCmdRunVoid(f, nil)),
		newCmdAdjust(f, nil),
		newCmdPublish(f, nil),
		newCmdDiscard(f, nil),
		commandGroup(&cobra.Command{Use: "adjustment", Short: "Adjustments made: list them, show one"},
			newCmdAdjustmentList(f, nil), newCmdAdjustmentShow(f, nil)),
		newCmdTrace(f, nil),
		newCmdImport(f, nil),
		newCmdExport(f, nil),
		newCmdStandards(f),
		newCmdStale(f, nil),
		newCmdDatasheet(f, nil),
		newCmdPack(f, nil),
		newCmdBackup(f, nil),
		newCmdRestore(f, nil),
		newCmdServe(f, nil),
	)
	return root
}

// dbLong is the help of `cairn db`.
const dbLong = `Manage the database that holds the register.

With no database named (--db, CAIRN_DATABASE_URL or the PG* variables),
cairn keeps the register in a private PostgreSQL of its own, in your data
folder; "db start" and "db stop" start and stop that one. Every command
starts it when needed, so "db start" is seldom necessary.`

// runLong is the help of `cairn run`.
const runLong = `Level runs are the circuits a crew levels over the marks, each written in a
level book (see docs/levelbook.md).`

// exactArgs is cobra.ExactArgs with a bad-input exit status.
func exactArgs(n int, names string) cobra.PositionalArgs {
	return func(cmd *cobra.Command, args []string) error {
		if len(args) != n {
			return badInput("%s wants %s (got %d argument(s))", commandName(cmd), names, len(args))
		}
		return nil
	}
}

// minArgs is cobra.MinimumNArgs with a bad-input exit status.
func minArgs(n int, names string) cobra.PositionalArgs {
	return func(cmd *cobra.Command, args []string) error {
		if len(args) < n {
			return badInput("%s wants %s", commandName(cmd), names)
		}
		return nil
	}
}

// commandName is cmd's path without the root's name ("run record"): every
// error is printed after "cairn: " already.
func commandName(cmd *cobra.Command) string {
	return strings.TrimPrefix(cmd.CommandPath(), cmd.Root().Name()+" ")
}

// reportPeakMemory writes the process's peak resident memory (VmHWM of
// /proc/self/status, Linux) to w, for tests that bound memory. It is read
// from the process itself because the rusage a parent gets for a child
// started with vfork-like clone also counts the parent's memory.
func reportPeakMemory(w io.Writer) {
	b, err := os.ReadFile("/proc/self/status")
	if err != nil {
		return
	}
	for _, line := range strings.Split(string(b), "\n") {
		if rest, ok := strings.CutPrefix(line, "VmHWM:"); ok {
			fmt.Fprintf(w, "cairn: peak resident memory %s\n", strings.TrimSpace(rest))
		}
	}
}

// dispatch hands a leaf command's options to runF when a test gives one
// (to see what the flags parsed into), else to run, which does the work.
func dispatch[O any](opts *O, runF, run func(*O) error) error {
	if runF != nil {
		return runF(opts)
	}
	return run(opts)
}

// commandGroup is cmd holding the subcommands subs, and doing nothing of
// its own (cobra prints its help).
func commandGroup(cmd *cobra.Command, subs ...*cobra.Command) *cobra.Command {
	cmd.AddCommand(subs...)
	return cmd
}

// runE is the RunE of a leaf command whose flags fill its options with
// nothing left to check: it keeps the command's context in *ctx and
// dispatches.
func runE[O any](ctx *context.Context, opts *O, runF, run func(*O) error) func(*cobra.Command, []string) error {
	return func(cmd *cobra.Command, _ []string) error {
		*ctx = cmd.Context()
		return dispatch(opts, runF, run)
	}
}
