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

// warnDoubts prints the loud warning for a mark's doubts on stderr, one
// line for each, and returns the lines (nil for none).
func warnDoubts(ios *IOStreams, ds register.Doubts) []string {
	var lines []string
	for _, d := range ds {
		lines = append(lines, d.Warning())
	}
	if len(lines) > 0 {
		warnLoudly(ios, strings.Join(lines, "\n"))
	}
	return lines
}

// doubtsJSON is ds for machine output: always a list, empty for none.
func doubtsJSON(ds register.Doubts) register.Doubts {
	if ds == nil {
		return register.Doubts{}
	}
	return ds
}

// doubtCell is ds for a table's DOUBT column: the doubts' words, after
// "!! " on a terminal, or "" for none.
func doubtCell(ios *IOStreams, ds register.Doubts) string {
	switch {
	case len(ds) == 0:
		return ""
	case ios.IsTerminal:
		return "!! " + ds.Words()
	}
	return ds.Words()
}

// warnListed says on stderr, below a listing on a terminal, how many of
// the rows listed are in doubt.
func warnListed(ios *IOStreams, format Format, n, of int, what string) {
	if n == 0 || format == FormatJSON {
		return
	}
	warnLoudly(ios, fmt.Sprintf("WARNING: %d of the %d %s listed are in doubt (the DOUBT column): do not rely on them until the doubt is resolved; cairn trace tells why", n, of, what))
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
