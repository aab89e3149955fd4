package standards

import "math"

// SlackM is the float64 rounding that a comparison with a limit forgives,
// in metres: 10⁻⁹ m (cairn's rule). A misclosure or a length is summed from
// decimal readings in binary floating point, so one exactly at its limit
// can come out a few units of 10⁻¹⁶ m over it (0.1 + 0.2 is
// 0.30000000000000004); the sums of a book of some thousands of readings
// of a few metres stay far below 10⁻¹². The slack is 10⁵ times smaller than
// the finest reading a level book carries (0.0001 m), so no excess that a
// reading can show passes.
const SlackM = 1e-9

// Within reports whether a value (a misclosure, a difference, a length or
// an imbalance, in metres) is within its limit: the one pass/fail rule of
// every check of a run and of an adjustment,
//
//	|value| ≤ limit + SlackM.
//
// A value exactly at its limit passes; a NaN never does.
func Within(value, limitM float64) bool {
	return math.Abs(value) <= limitM+SlackM
}
