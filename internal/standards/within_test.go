package standards

import (
	"math"
	"testing"
)

// TestWithinAtTheLimit: the one pass/fail rule, |value| ≤ limit + 10⁻⁹ m
// (cairn's rule, docs/methods.md "One pass/fail rule"), on both sides of the
// limit: exactly at it and the float64 rounding of a sum that equals it in
// decimals pass (0.1 + 0.2 + 0.1 is 0.4000000000000001); one unit of the
// last place of a reading (0.0001 m) inside passes and outside fails; so
// does anything more than the slack over.
func TestWithinAtTheLimit(t *testing.T) {
	const lim = 0.0094868329805051 // 12 mm·√0.625 km, third order over 625 m
	for _, c := range []struct {
		value, limit float64
		want         bool
	}{
		{lim, lim, true},
		{-lim, lim, true},
		{math.Nextafter(lim, 1), lim, true},
		{lim - 0.0001, lim, true},
		{lim + 0.0001, lim, false},
		{-(lim + 0.0001), lim, false},
		{lim + 2e-9, lim, false},
		{0.1 + 0.2 + 0.1, 0.4, true},
		{0.004, 0.004, true},
		{0.0041, 0.004, false},
		{50, 50, true},
		{50.1, 50, false},
		{0, 0, true},
		{math.NaN(), 1, false},
		{math.Inf(1), 1, false},
	} {
		if got := Within(c.value, c.limit); got != c.want {
			t.Errorf("Within(%.17g, %.17g) = %v, want %v", c.value, c.limit, got, c.want)
		}
	}
	// The rule's edge, in float64 as the checks compute it: |value| ≤
	// limit + SlackM passes, and the next float above fails.
	l := lim
	edge := l + SlackM
	if !Within(edge, l) || !Within(-edge, l) || Within(math.Nextafter(edge, 1), l) {
		t.Errorf("at limit + SlackM (%.17g): %v, %v; the next float: %v; want true, true, false",
			edge, Within(edge, l), Within(-edge, l), Within(math.Nextafter(edge, 1), l))
	}
}
