package cli

import (
	"errors"
	"fmt"
)

// Exit statuses of cairn.
const (
	ExitOK       = 0 // success
	ExitFailure  = 1 // the command could not do its work (database down, ...)
	ExitBadInput = 2 // bad flags, arguments or input files; nothing was written
	ExitChecks   = 3 // the work was done but a quality check failed
	ExitConflict = 4 // someone else changed the register first; nothing was written
)

// exitCoder is implemented by errors that choose their exit status. Packages
// outside cli implement it without importing cli.
type exitCoder interface{ ExitCode() int }

// flagError is a mistake in the command line itself.
type flagError struct{ err error }

func (e flagError) Error() string { return e.err.Error() }
func (e flagError) Unwrap() error { return e.err }
func (e flagError) ExitCode() int { return ExitBadInput }

// badInput makes an error with exit status 2.
func badInput(format string, a ...any) error {
	return flagError{fmt.Errorf(format, a...)}
}

// checksFailed is returned when a report was printed but checks failed.
type checksFailed struct{ n int }

func (e checksFailed) Error() string { return fmt.Sprintf("%d check(s) failed", e.n) }
func (e checksFailed) ExitCode() int { return ExitChecks }

// exitCode maps an error to the process's exit status.
func exitCode(err error) int {
	if err == nil {
		return ExitOK
	}
	var ec exitCoder
	if errors.As(err, &ec) {
		return ec.ExitCode()
	}
	return ExitFailure
}
