package web

import (
	"fmt"
	"math"
	"net/url"
	"strconv"
	"strings"
	"time"

	"cairn/internal/store"
)

// paramError is a query parameter the site cannot answer: 400, naming
// the parameter (OGC API – Features /req/core/query-param-invalid and
// /req/core/query-param-unknown).
type paramError struct {
	Param string
	Msg   string
}

func (e *paramError) Error() string { return "parameter " + e.Param + ": " + e.Msg }

func badParam(param, format string, a ...any) error {
	return &paramError{Param: param, Msg: fmt.Sprintf(format, a...)}
}

// checkParams refuses a parameter the resource does not define, and one
// given twice.
func checkParams(q url.Values, allowed ...string) error {
	for k, vs := range q {
		known := false
		for _, a := range allowed {
			known = known || a == k
		}
		if !known {
			return badParam(k, "unknown here (this resource takes %s)", strings.Join(allowed, ", "))
		}
		if len(vs) > 1 {
			return badParam(k, "given %d times; give it once", len(vs))
		}
	}
	return nil
}

// parseInstant reads as_of or datetime: an RFC 3339 date-time, or a
// date, meaning the end of that day in UTC (what was in force on that
// date). A server has no user's time zone, so the site's dates are UTC's.
func parseInstant(param, s string) (*time.Time, error) {
	s = strings.TrimSpace(s)
	if s == "" {
		return nil, nil
	}
	if t, err := time.Parse(time.RFC3339Nano, s); err == nil {
		return &t, nil
	}
	if d, err := time.Parse("2006-01-02", s); err == nil {
		t := d.AddDate(0, 0, 1).Add(-time.Microsecond)
		return &t, nil
	}
	if param == "datetime" && strings.Contains(s, "/") {
		return nil, badParam(param, "%q is an interval: the register answers an instant only, the heights in force then (2019-06-01 or 2019-06-01T12:00:00Z)", s)
	}
	return nil, badParam(param, "%q is not a date or time: write 2019-06-01 or 2019-06-01T12:00:00Z", s)
}

// asOfParam reads the instant a request asks about: as_of, or (on the
// API's items) datetime; both given must agree.
func asOfParam(q url.Values) (*time.Time, error) {
	a, err := parseInstant("as_of", q.Get("as_of"))
	if err != nil {
		return nil, err
	}
	d, err := parseInstant("datetime", q.Get("datetime"))
	if err != nil {
		return nil, err
	}
	switch {
	case a != nil && d != nil && !a.Equal(*d):
		return nil, badParam("datetime", "as_of and datetime ask about different instants; give one")
	case a != nil:
		return a, nil
	}
	return d, nil
}

// parseNumber reads one finite number of a parameter.
func parseNumber(param, s string) (float64, error) {
	v, err := strconv.ParseFloat(strings.TrimSpace(s), 64)
	if err != nil || math.IsNaN(v) || math.IsInf(v, 0) {
		return 0, badParam(param, "%q is not a number", s)
	}
	return v, nil
}

// parseBBox reads bbox: four numbers, west,south,east,north in WGS 84
// longitude and latitude (OGC API – Features /req/core/fc-bbox-definition;
// CRS84), or six with heights, whose heights are not a filter the register
// has (refused).
func parseBBox(s string) (*store.BBox, error) {
	if s == "" {
		return nil, nil
	}
	parts := strings.Split(s, ",")
	if len(parts) == 6 {
		return nil, badParam("bbox", "six numbers (with heights): the register's positions have no ellipsoidal height; give four, west,south,east,north")
	}
	if len(parts) != 4 {
		return nil, badParam("bbox", "%d numbers: give four, west,south,east,north in degrees", len(parts))
	}
	var v [4]float64
	for i, p := range parts {
		var err error
		if v[i], err = parseNumber("bbox", p); err != nil {
			return nil, err
		}
	}
	b := &store.BBox{West: v[0], South: v[1], East: v[2], North: v[3]}
	switch {
	case b.South < -90 || b.South > 90 || b.North < -90 || b.North > 90:
		return nil, badParam("bbox", "latitudes %v and %v: each must be -90 to 90", b.South, b.North)
	case b.West < -180 || b.West > 180 || b.East < -180 || b.East > 180:
		return nil, badParam("bbox", "longitudes %v and %v: each must be -180 to 180", b.West, b.East)
	case b.South > b.North:
		return nil, badParam("bbox", "the south edge %v is north of the north edge %v", b.South, b.North)
	}
	return b, nil
}

// parseLimit reads limit: 1 to MaxLimit, DefaultLimit when not given
// (/req/core/fc-limit-definition). A value above the maximum is refused
// rather than cut, so that a client never takes a short page for all.
func parseLimit(s string) (int, error) {
	if s == "" {
		return DefaultLimit, nil
	}
	n, err := strconv.Atoi(strings.TrimSpace(s))
	if err != nil {
		return 0, badParam("limit", "%q is not a whole number", s)
	}
	if n < 1 || n > MaxLimit {
		return 0, badParam("limit", "%d: give 1 to %d", n, MaxLimit)
	}
	return n, nil
}

// checkFormat refuses an f that names no encoding the resource has.
func checkFormat(q url.Values, allowed []format) error {
	f := q.Get("f")
	if f == "" {
		return nil
	}
	var names []string
	for _, a := range allowed {
		if string(a) == f {
			return nil
		}
		names = append(names, string(a))
	}
	return badParam("f", "%q: this resource is served as %s", f, strings.Join(names, " or "))
}
