package register

import (
	"math/rand/v2"
	"testing"
	"time"
)

// appendCanonicalTime writes what Go's own layout does
// (time.Time.AppendFormat with canonicalTime, the reference), for
// instants spread over years 0 to 9999 at random microseconds, the edges
// of days, months, years and leap years, times not in UTC, and years
// outside four digits (left to AppendFormat).
func TestAppendCanonicalTimeAsLayout(t *testing.T) {
	east := time.FixedZone("UTC+13:45", 13*3600+45*60)
	check := func(at time.Time) {
		t.Helper()
		want := at.UTC().AppendFormat(nil, canonicalTime)
		if got := appendCanonicalTime([]byte("x"), at); string(got) != "x"+string(want) {
			t.Errorf("%v: %q, want %q", at, got, "x"+string(want))
		}
	}
	for _, at := range []time.Time{
		time.Date(2000, 1, 1, 0, 0, 0, 0, time.UTC),
		time.Date(1999, 12, 31, 23, 59, 59, 999999000, time.UTC),
		time.Date(2024, 2, 29, 12, 30, 45, 123456000, time.UTC),
		time.Date(1900, 2, 28, 23, 59, 59, 1000, time.UTC),
		time.Date(0, 1, 1, 0, 0, 0, 0, time.UTC),
		time.Date(9999, 12, 31, 23, 59, 59, 999999000, time.UTC),
		time.Date(10000, 1, 1, 0, 0, 0, 0, time.UTC),
		time.Date(-1, 6, 1, 0, 0, 0, 0, time.UTC),
		time.Date(2024, 1, 1, 5, 0, 0, 7000, east),
		time.Date(1987, 3, 1, 0, 0, 0, 500, time.UTC), // below a microsecond: cut, not rounded
	} {
		check(at)
	}
	rng := rand.New(rand.NewPCG(15, 3))
	lo := time.Date(0, 1, 1, 0, 0, 0, 0, time.UTC).UnixMicro()
	hi := time.Date(9999, 12, 31, 23, 59, 59, 999999000, time.UTC).UnixMicro()
	for range 100000 {
		check(time.UnixMicro(lo + rng.Int64N(hi-lo+1)))
	}
}
