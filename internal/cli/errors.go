package cli

import (
	"errors"
	"fmt"
	"strings"

	"github.com/spf13/cobra"

	"cairn/internal/levelbook"
	"cairn/internal/register"
)

// Exit statuses of cairn.
const (
	ExitOK       = 0 // success
	ExitFailure  = 1 // the command could not do its work (database down, ...)
	ExitBadInput = 2 // bad flags, arguments or input files; nothing was written
	ExitChecks   = 3 // the work was done but a quality check failed
	ExitConflict = 4 // someone else changed the register first; nothing was written
)

// flagError is a mistake in the command line itself: a bad flag, argument
// or input file, or an unknown command. Its exit status is 2.
type flagError struct{ err error }

func (e flagError) Error() string { return e.err.Error() }
func (e flagError) Unwrap() error { return e.err }

// badInput makes an error with exit status 2.
func badInput(format string, a ...any) error {
	return flagError{fmt.Errorf(format, a...)}
}

// checksFailed is returned when a report was printed but checks failed.
// Its exit status is 3.
type checksFailed struct{ n int }

func (e checksFailed) Error() string { return fmt.Sprintf("%d check(s) failed", e.n) }

// exitCode maps an error to the process's exit status. It is the one place
// that does: the domain packages return typed errors and know nothing of
// exit statuses.
func exitCode(err error) int {
	var (
		fe  flagError
		ie  *register.InputError
		le  *levelbook.Error
		ume *register.UnknownMarksError
		are *register.AlreadyRecordedError
		soe *register.SameObservationsError
		rve *register.RunVoidedError
		cfe *register.ChecksFailedError
		pce *register.PublishChecksError
		nde *register.NotDraftError
		dme *register.DraftMismatchError
		cf  checksFailed
		ce  *register.ConflictError
		imp *register.ImportError
	)
	switch {
	case err == nil:
		return ExitOK
	case errors.As(err, &fe), errors.As(err, &ie), errors.As(err, &le),
		errors.As(err, &ume), errors.As(err, &are), errors.As(err, &soe), errors.As(err, &cfe),
		errors.As(err, &rve), errors.As(err, &pce), errors.As(err, &nde), errors.As(err, &dme),
		errors.As(err, &imp):
		// A refused book (unknown marks, already recorded, the same
		// observations as a run, failed checks without
		// --accept-failed-checks) and a voided run named are bad input:
		// nothing was written. So is a refused publication (failed checks
		// not accepted), and publishing or discarding an adjustment no
		// longer a draft, or a draft that does not follow from its stored
		// inputs: a request that can never succeed.
		return ExitBadInput
	case errors.As(err, &cf):
		return ExitChecks
	case errors.As(err, &ce):
		return ExitConflict
	}
	return ExitFailure
}

// finish ends a run of cairn: it prints err, if any, on ios.ErrOut as its
// user is to read it (a report whose checks failed has said so already),
// and returns the exit status. It is the one place that prints errors.
func finish(ios *IOStreams, err error) int {
	if err != nil && !errors.As(err, new(checksFailed)) {
		fmt.Fprintln(ios.ErrOut, "cairn: "+err.Error())
	}
	return exitCode(err)
}

// commandError is an error of the command cmd as its user is to read it:
// the domain's errors in the command line's terms (see errorMessage).
type commandError struct {
	cmd *cobra.Command
	err error
}

func (e *commandError) Error() string { return errorMessage(e.cmd, e.err) }
func (e *commandError) Unwrap() error { return e.err }

// fieldFlags names, by command path, the flag that gives a register field
// where the two are spelt differently; every other field is its flag's
// name.
var fieldFlags = map[string]map[string]string{
	"cairn adjust": {"sigma": "sigma-mm-per-sqrt-km"},
}

// errorMessage renders err, returned by the command cmd, for its user:
//
//   - a register.InputError names its field as the flag of cmd that gives
//     it (field "reason" of `height set` is "--reason: ..."; see
//     fieldFlags), or by its plain name when cmd has no such flag (an
//     argument, say);
//   - a register.UnknownMarksError advises `cairn mark add` or --new-marks;
//   - a register.ChecksFailedError advises --accept-failed-checks with
//     --reason;
//   - a register.SameObservationsError advises `cairn run void` when the
//     run holding the observations is wrong;
//   - a register.PublishChecksError advises --accept-failed-checks with
//     --accept-reason.
//
// The rest of the message is err's own.
func errorMessage(cmd *cobra.Command, err error) string {
	msg := err.Error()
	var inner *commandError
	if errors.As(err, &inner) || cmd == nil {
		return msg // rendered already (a command run by another), or no command
	}
	var ie *register.InputError
	if errors.As(err, &ie) {
		msg = strings.Replace(msg, ie.Error(), fieldName(cmd, ie.Field)+": "+ie.Msg, 1)
	}
	var ume *register.UnknownMarksError
	if errors.As(err, &ume) {
		msg = strings.Replace(msg, ume.Error(), ume.Problem()+
			"; add them with `cairn mark add`, or record with "+flagOr(cmd, "new-marks", "new marks")+
			" to create them; nothing was written", 1)
	}
	var soe *register.SameObservationsError
	if errors.As(err, &soe) {
		msg = strings.Replace(msg, soe.Error(), fmt.Sprintf("%s: the same field work is recorded once, whatever the file looks like; "+
			"if run %d is wrong, void it first (cairn run void %d --reason ...); nothing was written", soe.Problem(), soe.Run.ID, soe.Run.ID), 1)
	}
	var cfe *register.ChecksFailedError
	if errors.As(err, &cfe) {
		msg = strings.Replace(msg, cfe.Error(), cfe.Error()+"\nto record it anyway, give "+
			flagOr(cmd, "accept-failed-checks", "acceptance of failed checks")+" with "+
			flagOr(cmd, "reason", "a reason")+" saying why", 1)
	}
	var pce *register.PublishChecksError
	if errors.As(err, &pce) {
		msg = strings.Replace(msg, pce.Error(), pce.Error()+"\nto publish it anyway, give "+
			flagOr(cmd, "accept-failed-checks", "acceptance of failed checks")+" with "+
			flagOr(cmd, "accept-reason", "a reason")+" saying why the failed checks are accepted", 1)
	}
	return msg
}

// fieldName is how a register field is named to the user of cmd: as the
// flag that gives it ("--reason"), or plainly when no flag of cmd does.
func fieldName(cmd *cobra.Command, field string) string {
	name, ok := fieldFlags[cmd.CommandPath()][field]
	if !ok {
		name = field
	}
	return flagOr(cmd, name, field)
}

// flagOr is "--name" when cmd has the flag name, else plain.
func flagOr(cmd *cobra.Command, name, plain string) string {
	if cmd.Flags().Lookup(name) != nil {
		return "--" + name
	}
	return plain
}
