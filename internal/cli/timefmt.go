package cli

import (
	"fmt"
	"strings"
	"time"
)

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

// parseAsOf reads the --as-of flag: nil when it is not given.
func parseAsOf(s string) (*time.Time, error) {
	if s == "" {
		return nil, nil
	}
	t, err := parseInstant(s)
	if err != nil {
		return nil, badInput("as-of: %v", err)
	}
	return &t, nil
}

// timeText is an instant as tables show it, in UTC to the second.
func timeText(t time.Time) string { return t.UTC().Format("2006-01-02 15:04:05Z") }

// parseKnownAt reads the --known-at flag: nil when it is not given.
func parseKnownAt(s string) (*time.Time, error) {
	if s == "" {
		return nil, nil
	}
	t, err := parseInstant(s)
	if err != nil {
		return nil, badInput("known-at: %v", err)
	}
	return &t, nil
}

// parseInForce reads --in-force-from: RFC 3339, a local date and time, or
// a date, meaning the start of that day in local time (a version in force
// from a date is in force on that date, as --as-of of the same date asks).
func parseInForce(s string) (*time.Time, error) {
	s = strings.TrimSpace(s)
	if s == "" {
		return nil, badInput("--in-force-from is required: give the date the height came in force, as its source gives it (2019-03-04; the date an authority published it or it took effect)")
	}
	if d, err := time.ParseInLocation("2006-01-02", s, time.Local); err == nil {
		return &d, nil
	}
	t, err := parseInstant(s)
	if err != nil {
		return nil, badInput("in-force-from: %v", err)
	}
	return &t, nil
}

// asOfUsage is the usage of an --as-of flag whose command does what.
func asOfUsage(what string) string {
	return what + " in force at this time (a date: the end of that day), by the time each came in force"
}

// knownAtUsage is the usage of a --known-at flag whose command does what.
func knownAtUsage(what string) string {
	return what + " as the register knew them at this time: only versions committed by then (alone: in force then, as known then)"
}
