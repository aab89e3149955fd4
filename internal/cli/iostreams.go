package cli

import (
	"bufio"
	"bytes"
	"fmt"
	"io"
	"os"
	"strings"
	"time"

	"github.com/schollz/progressbar/v3"
	"golang.org/x/term"
)

// IOStreams carries every input and output of a command: data on Out,
// messages and warnings on ErrOut, answers to questions on In.
type IOStreams struct {
	In     io.Reader
	Out    io.Writer
	ErrOut io.Writer
	// IsTerminal says whether Out is a terminal: tables then get headers and
	// aligned columns; otherwise rows are tab-separated.
	IsTerminal bool
	// ErrIsTerminal says whether ErrOut is a terminal (progress indications).
	ErrIsTerminal bool
	// InIsTerminal says whether In is a terminal.
	InIsTerminal bool

	// canPrompt, when set, overrides the terminal test of CanPrompt.
	canPrompt *bool
	// rawErr is ErrOut before hidden characters are made visible, for the
	// progress line's own cursor movements (nil: ErrOut).
	rawErr io.Writer
}

// newStreams makes the streams of a command: on a terminal, and always on
// the error stream, hidden characters are made visible (visible.go).
func newStreams(in io.Reader, out, errOut io.Writer, terminal bool) *IOStreams {
	s := &IOStreams{In: in, Out: out, ErrOut: &visibleWriter{w: errOut}, IsTerminal: terminal, rawErr: errOut}
	if terminal {
		s.Out = &visibleWriter{w: out}
	}
	return s
}

// Flush writes what the streams hold back: the start of a character split
// across writes whose end never came (visibleWriter).
func (s *IOStreams) Flush() {
	for _, w := range []io.Writer{s.Out, s.ErrOut} {
		if v, ok := w.(*visibleWriter); ok {
			_ = v.Flush()
		}
	}
}

// progressOut is the raw error stream, for a progress line.
func (s *IOStreams) progressOut() io.Writer {
	if s.rawErr != nil {
		return s.rawErr
	}
	return s.ErrOut
}

// SystemStreams returns the process's standard streams.
func SystemStreams() *IOStreams {
	s := newStreams(os.Stdin, os.Stdout, os.Stderr, term.IsTerminal(int(os.Stdout.Fd())))
	s.ErrIsTerminal = term.IsTerminal(int(os.Stderr.Fd()))
	s.InIsTerminal = term.IsTerminal(int(os.Stdin.Fd()))
	return s
}

// TestStreams returns streams backed by buffers, for tests. terminal sets
// IsTerminal only; tests set the other terminal flags as they need.
func TestStreams(terminal bool) (ios *IOStreams, in, out, errOut *bytes.Buffer) {
	in, out, errOut = &bytes.Buffer{}, &bytes.Buffer{}, &bytes.Buffer{}
	return newStreams(in, out, errOut, terminal), in, out, errOut
}

// CanPrompt says whether a question can be asked and answered: In and
// ErrOut are terminals, unless SetCanPrompt has said otherwise.
func (s *IOStreams) CanPrompt() bool {
	if s.canPrompt != nil {
		return *s.canPrompt
	}
	return s.InIsTerminal && s.ErrIsTerminal
}

// SetCanPrompt overrides the terminal test of CanPrompt, for tests that
// answer questions through In.
func (s *IOStreams) SetCanPrompt(v bool) { s.canPrompt = &v }

// Confirm asks question on ErrOut and reads a yes or no from In; anything
// but y or yes is no. The caller checks CanPrompt first.
func (s *IOStreams) Confirm(question string) bool {
	fmt.Fprintf(s.ErrOut, "%s [y/N] ", question)
	line, _ := bufio.NewReader(s.In).ReadString('\n')
	switch strings.ToLower(strings.TrimSpace(line)) {
	case "y", "yes":
		return true
	}
	return false
}

// printf writes a message for the person at the terminal on ErrOut, so
// that Out carries only data.
func (s *IOStreams) printf(format string, a ...any) { fmt.Fprintf(s.ErrOut, format, a...) }

// Bar is a progress bar for long work (schollz/progressbar), drawn on the
// error stream of a terminal. A nil *Bar draws nothing: every method may
// be called on what StartBar returned, whatever the streams are.
type Bar struct {
	pb   *progressbar.ProgressBar
	done bool
}

// StartBar starts a bar of total steps (less than 0: not known, a
// spinner with the count) described by what, its rate in unit per second. It is the one place that
// decides whether a bar is drawn: only when ErrOut is a terminal, so that
// a bar never reaches a file, a pipe or a test's buffer, and never the
// data on Out. Commands with machine output (-o json) do not ask.
func (s *IOStreams) StartBar(total int64, what, unit string) *Bar {
	if !s.ErrIsTerminal {
		return nil
	}
	return &Bar{pb: progressbar.NewOptions64(total,
		progressbar.OptionSetWriter(s.progressOut()),
		progressbar.OptionSetDescription(what),
		progressbar.OptionShowCount(),
		progressbar.OptionShowIts(),
		progressbar.OptionSetItsString(unit),
		progressbar.OptionSetWidth(30),
		progressbar.OptionThrottle(100*time.Millisecond),
		progressbar.OptionSetPredictTime(true),
		progressbar.OptionClearOnFinish(),
		progressbar.OptionSetRenderBlankState(true),
	)}
}

// Add advances the bar by n steps.
func (b *Bar) Add(n int) {
	if b != nil {
		_ = b.pb.Add(n)
	}
}

// Describe changes the words before the bar.
func (b *Bar) Describe(what string) {
	if b != nil && !b.done {
		b.pb.Describe(what)
	}
}

// Finish clears the bar from the terminal; again, it does nothing.
func (b *Bar) Finish() {
	if b != nil && !b.done {
		b.done = true
		_ = b.pb.Finish()
		_ = b.pb.Clear()
	}
}
