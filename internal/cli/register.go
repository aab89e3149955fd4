package cli

import (
	"context"
	"fmt"
	"os"
	"os/user"
	"strings"
	"time"

	"cairn/internal/register"
	"cairn/internal/store"
)

// cautions go with every height cairn gives out: in `height set --help`,
// the demo's output and reports.
const cautions = `Cautions: heights from this register need review by a licensed surveyor
before use. Check into two marks. Verify a mark's condition in the field
before relying on it. Local codes and regulations govern.`

// openRegister connects to the register f names.
func openRegister(ctx context.Context, f *Factory) (*register.Register, error) {
	pool, err := f.Pool(ctx)
	if err != nil {
		return nil, err
	}
	return register.New(pool), nil
}

// osUser is who runs cairn, the default for --by.
func osUser() string {
	if u, err := user.Current(); err == nil && u.Username != "" {
		return u.Username
	}
	if u := os.Getenv("USER"); u != "" {
		return u
	}
	return "unknown"
}

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

// parseInstant reads --as-of: RFC 3339 (2024-03-01T14:00:00Z), a local
// date and time (2024-03-01 14:00[:05]), or a date, meaning the end of that
// day in local time.
func parseInstant(s string) (time.Time, error) {
	s = strings.TrimSpace(s)
	if t, err := time.Parse(time.RFC3339Nano, s); err == nil {
		return t, nil
	}
	for _, layout := range []string{"2006-01-02 15:04:05", "2006-01-02T15:04:05", "2006-01-02 15:04", "2006-01-02T15:04"} {
		if t, err := time.ParseInLocation(layout, s, time.Local); err == nil {
			return t, nil
		}
	}
	if d, err := time.ParseInLocation("2006-01-02", s, time.Local); err == nil {
		return d.AddDate(0, 0, 1).Add(-time.Microsecond), nil
	}
	return time.Time{}, fmt.Errorf("%q is not a time: write 2024-03-01, 2024-03-01 14:00 or 2024-03-01T14:00:00Z", s)
}

func timeText(t time.Time) string { return t.UTC().Format("2006-01-02 15:04:05Z") }

func deref[T any](p *T) T {
	var zero T
	if p == nil {
		return zero
	}
	return *p
}

// printf writes a message for the person at the terminal on ErrOut, so
// that Out carries only data.
func (s *IOStreams) printf(format string, a ...any) { fmt.Fprintf(s.ErrOut, format, a...) }

// reportCautions ends a report read at a terminal with the cautions.
func reportCautions(ios *IOStreams, format Format) {
	if format == FormatTable && ios.IsTerminal {
		fmt.Fprintln(ios.ErrOut, "\n"+cautions)
	}
}
