package cli

import (
	"fmt"
	"io"
	"strings"

	"cairn/internal/register"
	"cairn/internal/store"
)

// warnCondition prints the loud warning for a mark in bad condition on
// stderr, and returns it (or "").
func warnCondition(ios *IOStreams, m store.Mark) string {
	w := register.Warning(m)
	if w != "" {
		warnLoudly(ios, w)
	}
	return w
}

// warnLoudly writes a warning about a mark's condition on stderr between
// two rules, so that it cannot be missed among the rows.
func warnLoudly(ios *IOStreams, text string) { writeLoudly(ios.ErrOut, text) }

// warnInReport writes a warning of a report into the report, on Out,
// between two rules; when Out is not a terminal (the report goes to a file
// or a program) the warning is repeated on ErrOut, so that the person who
// ran the command still sees it.
func warnInReport(ios *IOStreams, text string) {
	writeLoudly(ios.Out, text)
	if !ios.IsTerminal {
		writeLoudly(ios.ErrOut, text)
	}
}

func writeLoudly(w io.Writer, text string) {
	rule := strings.Repeat("!", 72)
	fmt.Fprintln(w, "\n"+rule+"\n"+text+"\n"+rule)
}

// condition returns the latest condition's name, "unknown" if none.
func condition(m store.Mark) string {
	if m.Latest == nil {
		return register.Unknown
	}
	return m.Latest.Condition
}
