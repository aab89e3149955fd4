package cli

import (
	"fmt"
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
func warnLoudly(ios *IOStreams, text string) {
	rule := strings.Repeat("!", 72)
	fmt.Fprintln(ios.ErrOut, "\n"+rule+"\n"+text+"\n"+rule)
}

// condition returns the latest condition's name, "unknown" if none.
func condition(m store.Mark) string {
	if m.Latest == nil {
		return "unknown"
	}
	return m.Latest.Condition
}
