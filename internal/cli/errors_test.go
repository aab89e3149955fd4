package cli

import (
	"context"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/spf13/cobra"

	"cairn/internal/levelbook"
	"cairn/internal/pgtest"
	"cairn/internal/reduce"
	"cairn/internal/register"
	"cairn/internal/store"
)

// The one mapping from errors to exit statuses, for the domain's typed
// errors bare and wrapped, and for cli's own.
func TestExitCodeOfTypedErrors(t *testing.T) {
	t.Parallel()
	checks := &register.ChecksFailedError{File: "b.csv", Result: &reduce.Result{}}
	for _, c := range []struct {
		name string
		err  error
		want int
	}{
		{"nil", nil, ExitOK},
		{"plain", errors.New("connection refused"), ExitFailure},
		{"flag error", badInput("--kind: no"), ExitBadInput},
		{"input error", &register.InputError{Field: "reason", Msg: "say why"}, ExitBadInput},
		{"bad book", &levelbook.Error{File: "b.csv", Line: 3, Msg: "not a number"}, ExitBadInput},
		{"unknown marks", &register.UnknownMarksError{File: "b.csv", Marks: []register.UnknownMark{{Designation: "TC-0412", Line: 4}}}, ExitBadInput},
		{"already recorded", &register.AlreadyRecordedError{File: "b.csv", Run: store.Run{ID: 3}}, ExitBadInput},
		{"checks failed of run record", checks, ExitBadInput},
		{"checks failed of a report", checksFailed{2}, ExitChecks},
		{"conflict", &register.ConflictError{Err: store.ErrConflict}, ExitConflict},
		{"wrapped input error", fmt.Errorf("record b.csv: %w", &register.InputError{Field: "by", Msg: "say who"}), ExitBadInput},
		{"wrapped conflict", fmt.Errorf("set height: %w", &register.ConflictError{Err: store.ErrConflict}), ExitConflict},
		{"connection lost before a refusal", &register.ConnectionLostError{Err: &register.InputError{Field: "hold", Msg: "x"}}, ExitBadInput},
		{"rendered for a command", &commandError{cmd: &cobra.Command{Use: "x"}, err: checksFailed{1}}, ExitChecks},
	} {
		if got := exitCode(c.err); got != c.want {
			t.Errorf("%s: exit %d, want %d", c.name, got, c.want)
		}
	}
}

// Every bad book of the test data is bad input: run check exits 2 naming
// the file (the exit status levelbook's own tests once asserted).
func TestBadBooksExitBadInput(t *testing.T) {
	t.Parallel()
	files, err := filepath.Glob(testBooks + "bad/*.csv")
	if err != nil || len(files) < 5 {
		t.Fatalf("bad books: %v, %v", files, err)
	}
	for _, file := range files {
		out, _, code := execRun(t, "run", "check", file)
		if code != ExitBadInput || out != "" {
			t.Errorf("%s: exit %d, stdout %q; want 2 and nothing", file, code, out)
		}
	}
	_, err = levelbook.ReadFile(filepath.Join(t.TempDir(), "nope.csv"))
	if exitCode(err) != ExitBadInput {
		t.Errorf("a missing book: exit %d, want 2 (%v)", exitCode(err), err)
	}
}

// Cobra's own refusals are bad input: an unknown command (recognised by
// the command tree, not its message), an unknown flag, a bad flag value,
// the wrong number of arguments.
func TestCommandLineMistakesExitBadInput(t *testing.T) {
	t.Parallel()
	for _, c := range []struct {
		args []string
		want string
	}{
		{[]string{"hieght", "show", "TC-0412"}, `unknown command "hieght" for "cairn"`},
		{[]string{"histroy"}, "Did you mean this?\n\thistory"},
		{[]string{"--nope"}, "unknown flag: --nope"},
		{[]string{"mark", "list", "--nope"}, "unknown flag: --nope (see 'cairn mark list --help')"},
		{[]string{"height", "list", "-o", "xml"}, `unknown output format "xml"`},
		{[]string{"mark", "add", "TC-0500", "--lat", "north"}, `invalid argument "north" for "--lat"`},
		{[]string{"history"}, "history wants a DESIGNATION (got 0 argument(s))"},
		{[]string{"stale", "now"}, "stale wants no arguments (got 1 argument(s))"},
	} {
		ios, _, out, errOut := TestStreams(false)
		f := NewFactory(ios, "test")
		f.Getenv = func(string) string { return "" }
		err := Execute(context.Background(), f, c.args)
		if exitCode(err) != ExitBadInput || err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%v: exit %d, error %v; want exit 2 saying %q", c.args, exitCode(err), err, c.want)
		}
		if out.Len() != 0 || errOut.Len() != 0 {
			t.Errorf("%v: printed %q and %q; cobra's printing is silenced", c.args, out, errOut)
		}
		if f.pool != nil || f.connErr != nil {
			t.Errorf("%v: a mistake in the command line opened the database", c.args)
		}
	}
	// A command group named without its subcommand still prints its help.
	ios, _, out, _ := TestStreams(false)
	if err := Execute(context.Background(), NewFactory(ios, "test"), []string{"mark"}); err != nil || !strings.Contains(out.String(), "Available Commands") {
		t.Errorf("cairn mark: %v, %q", err, out)
	}
}

// An InputError's field is named as the running command's flag when it
// has one, through the fieldFlags map when the flag is spelt otherwise,
// and plainly otherwise; the rest of a wrapped message stays as it is.
func TestErrorMessageNamesTheCommandsFlag(t *testing.T) {
	t.Parallel()
	cmd := &cobra.Command{Use: "set"}
	cmd.Flags().String("reason", "", "")
	adjust := &cobra.Command{Use: "adjust"}
	(&cobra.Command{Use: "cairn"}).AddCommand(adjust)
	for _, name := range []string{"sigma-mm-per-sqrt-km", "by", "distribute", "reason"} {
		adjust.Flags().String(name, "", "")
	}
	record := &cobra.Command{Use: "record"}
	record.Flags().Bool("new-marks", false, "")
	record.Flags().Bool("accept-failed-checks", false, "")
	record.Flags().String("reason", "", "")
	other := &cobra.Command{Use: "check"}
	unknown := &register.UnknownMarksError{File: "b.csv", Marks: []register.UnknownMark{{Designation: "TC-0412", Line: 16}}}
	failed := &register.ChecksFailedError{File: "b.csv", Result: &reduce.Result{Failures: []reduce.Failure{{Line: 13, Kind: "three_wire", Subject: "TC-0417", Message: "10 mm"}}}}
	for _, c := range []struct {
		name string
		cmd  *cobra.Command
		err  error
		want string
	}{
		{"a flag", cmd, &register.InputError{Field: "reason", Msg: "say why"}, "--reason: say why"},
		{"a flag spelt otherwise", adjust, &register.InputError{Field: "sigma", Msg: "must be positive"}, "--sigma-mm-per-sqrt-km: must be positive"},
		{"the author on adjust", adjust, &register.InputError{Field: "by", Msg: "say who makes the adjustment"}, "--by: say who makes the adjustment"},
		{"the distribution on adjust", adjust, &register.InputError{Field: "distribute", Msg: "by setups"}, "--distribute: by setups"},
		{"a flag of adjust", adjust, &register.InputError{Field: "reason", Msg: "say why"}, "--reason: say why"},
		{"a field not mapped elsewhere", cmd, &register.InputError{Field: "sigma", Msg: "must be positive"}, "sigma: must be positive"},
		{"an argument", cmd, &register.InputError{Field: "designation", Msg: "no mark"}, "designation: no mark"},
		{"wrapped", cmd, fmt.Errorf("set height: %w", &register.InputError{Field: "reason", Msg: "say why"}), "set height: --reason: say why"},
		{"another error", cmd, errors.New("reason: as it was"), "reason: as it was"},
		{"unknown marks on run record", record, unknown,
			"b.csv: 1 mark is not in the register: TC-0412 (line 16); add them with `cairn mark add`, or record with --new-marks to create them; nothing was written"},
		{"failed checks on run record", record, failed,
			"b.csv: 1 check(s) failed, nothing was recorded:\n  line 13: three_wire: TC-0417: 10 mm\nto record it anyway, give --accept-failed-checks with --reason saying why"},
		{"unknown marks elsewhere", other, unknown,
			"b.csv: 1 mark is not in the register: TC-0412 (line 16); add them with `cairn mark add`, or record with new marks to create them; nothing was written"},
	} {
		if got := (&commandError{cmd: c.cmd, err: c.err}).Error(); got != c.want {
			t.Errorf("%s:\n got %q\nwant %q", c.name, got, c.want)
		}
	}
	// The register's own messages name no flag.
	for _, err := range []error{unknown, failed} {
		if strings.Contains(err.Error(), "--") {
			t.Errorf("register message names a flag: %q", err)
		}
	}
}

// Through the commands, on a real register: the register's fields come
// out as the flags of the command that was run.
func TestRegisterFieldsShownAsFlags(t *testing.T) {
	t.Parallel()
	db := newTestDB(t)
	cairn(t, db, "datum", "add", "NAVD88", "--name", "North American Vertical Datum of 1988")
	cairn(t, db, "mark", "add", "TC-0412", "--type", "bronze disk")
	for _, c := range []struct {
		args []string
		want string
	}{
		{[]string{"datum", "add", "NGVD29"}, "cairn: --name: a datum needs its full name\n"},
		{[]string{"mark", "add", "TC-0413", "--lat", "41.6"}, "cairn: --lat: give both a latitude and a longitude, or neither\n"},
		{[]string{"height", "set", "--in-force-from", inForceNow(), "TC-0412", "769.83", "--unit", "usft", "--datum", "NAVD88", "--reason", "r"}, "cairn: --source: cite the publication the height comes from\n"},
		{[]string{"height", "set", "--in-force-from", inForceNow(), "TC-0412", "769.83", "--unit", "usft", "--datum", "NAVD88", "--source", "s", "--reason", " "}, "cairn: --reason: say why this height is being recorded\n"},
		{[]string{"height", "show", "TC-0412", "--datum", "NAVD89"}, `cairn: --datum: no datum "NAVD89" in the register (did you mean NAVD88?)` + "\n"},
		{[]string{"history", "TC-0421"}, `cairn: designation: no mark "TC-0421" in the register (did you mean TC-0412?)` + "\n"},
	} {
		ios, _, _, errOut := TestStreams(false)
		code := mainWith(ios, append([]string{"--db", db}, c.args...))
		if code != ExitBadInput || errOut.String() != c.want {
			t.Errorf("%v: exit %d, stderr %q; want 2 and %q", c.args, code, errOut, c.want)
		}
	}
}

// newTestDB is a fresh migrated register for one test.
func newTestDB(t *testing.T) string {
	t.Helper()
	return pgtest.New(t).URL
}

// cairn runs cairn on the register at url and fails the test on any exit
// status but 0.
func cairn(t *testing.T, url string, args ...string) (stdout string) {
	t.Helper()
	ios, _, out, errOut := TestStreams(false)
	if code := mainWith(ios, append([]string{"--db", url}, args...)); code != ExitOK {
		t.Fatalf("cairn %s: exit %d: %s", strings.Join(args, " "), code, errOut)
	}
	return out.String()
}

// mainWith runs cairn over ios as Main does, printing the error on
// ios.ErrOut, and returns the exit status.
func mainWith(ios *IOStreams, args []string) int {
	f := NewFactory(ios, "test")
	defer f.Close()
	f.Getenv = os.Getenv
	return finish(ios, Execute(context.Background(), f, args))
}
