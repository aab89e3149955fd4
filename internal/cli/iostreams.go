package cli

import (
	"bytes"
	"io"
	"os"

	"golang.org/x/term"
)

// IOStreams carries every input and output of a command: data on Out,
// messages and warnings on ErrOut.
type IOStreams struct {
	In     io.Reader
	Out    io.Writer
	ErrOut io.Writer
	// IsTerminal says whether Out is a terminal: tables then get headers and
	// aligned columns; otherwise rows are tab-separated.
	IsTerminal bool
	// ErrIsTerminal says whether ErrOut is a terminal (progress indications).
	ErrIsTerminal bool
}

// SystemStreams returns the process's standard streams.
func SystemStreams() *IOStreams {
	return &IOStreams{
		In:            os.Stdin,
		Out:           os.Stdout,
		ErrOut:        os.Stderr,
		IsTerminal:    term.IsTerminal(int(os.Stdout.Fd())),
		ErrIsTerminal: term.IsTerminal(int(os.Stderr.Fd())),
	}
}

// TestStreams returns streams backed by buffers, for tests.
func TestStreams(terminal bool) (ios *IOStreams, in, out, errOut *bytes.Buffer) {
	in, out, errOut = &bytes.Buffer{}, &bytes.Buffer{}, &bytes.Buffer{}
	return &IOStreams{In: in, Out: out, ErrOut: errOut, IsTerminal: terminal}, in, out, errOut
}
