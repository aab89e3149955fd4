package units

import (
	"fmt"
	"math"
	"strconv"
	"strings"
)

// The range of what cairn will read, store or publish (common practice;
// docs/references.md#plausible-range). A height below MinHeightM or above
// MaxHeightM is no benchmark on Earth: the lowest dry land is about 430 m
// below sea level and the highest summit about 8,849 m above it, and the
// range keeps a margin round both. A length (a section, a sight, a
// search radius, a standard deviation) is positive, finite and at most
// MaxLengthM: no level line runs 1,000 km between two marks.
const (
	MinHeightM = -500.0
	MaxHeightM = 9000.0
	MaxLengthM = 1_000_000.0
	// MaxDifferenceM bounds a height difference: that between the lowest
	// and the highest height allowed.
	MaxDifferenceM = MaxHeightM - MinHeightM
)

// MaxDigits is the most digits a number cairn reads as text may have
// (before and after the point together): a height to the micrometre in
// feet needs 11, and a float64 carries about 15 or 16 significant digits.
const MaxDigits = 15

// RangeError is a value outside its plausible range, or not a finite
// number. Callers wrap it with the file, line and field, or the flag.
type RangeError struct {
	// What is "height", "height difference" or "length".
	What string
	// Value is in metres.
	Value float64
	// Min and Max are the bounds in metres.
	Min, Max float64
}

func (e *RangeError) Error() string {
	if math.IsNaN(e.Value) || math.IsInf(e.Value, 0) {
		return fmt.Sprintf("the %s is not a finite number (%v)", e.What, e.Value)
	}
	switch e.What {
	case "length":
		return fmt.Sprintf("a length must be more than 0 and at most %s m (%s km), not %s m", fmtM(e.Max), fmtM(e.Max/1000), fmtM(e.Value))
	case "height difference":
		return fmt.Sprintf("a height difference of %s m is implausible: it must lie within ±%s m (the range of heights cairn accepts, %s m to %s m)",
			fmtM(e.Value), fmtM(e.Max), fmtM(MinHeightM), fmtM(MaxHeightM))
	}
	return fmt.Sprintf("a %s of %s m is implausible: cairn accepts %s m to %s m", e.What, fmtM(e.Value), fmtM(e.Min), fmtM(e.Max))
}

// fmtM writes a number of metres briefly (at most 6 decimals, no
// trailing zeros; huge values in exponent form).
func fmtM(v float64) string {
	if math.Abs(v) >= 1e9 {
		return strconv.FormatFloat(v, 'g', 4, 64)
	}
	s := strconv.FormatFloat(v, 'f', 6, 64)
	s = strings.TrimRight(strings.TrimRight(s, "0"), ".")
	if s == "-0" {
		s = "0"
	}
	return s
}

// CheckHeightM returns a *RangeError unless v metres is a finite height
// within MinHeightM to MaxHeightM.
func CheckHeightM(v float64) error {
	if !(v >= MinHeightM && v <= MaxHeightM) {
		return &RangeError{What: "height", Value: v, Min: MinHeightM, Max: MaxHeightM}
	}
	return nil
}

// CheckDifferenceM returns a *RangeError unless v metres is a finite
// height difference of at most MaxDifferenceM either way.
func CheckDifferenceM(v float64) error {
	if !(math.Abs(v) <= MaxDifferenceM) {
		return &RangeError{What: "height difference", Value: v, Min: -MaxDifferenceM, Max: MaxDifferenceM}
	}
	return nil
}

// CheckLengthM returns a *RangeError unless v metres is a finite length
// more than 0 and at most MaxLengthM.
func CheckLengthM(v float64) error {
	if !(v > 0 && v <= MaxLengthM) {
		return &RangeError{What: "length", Value: v, Min: 0, Max: MaxLengthM}
	}
	return nil
}

// CheckDigits refuses a decimal number written with more than MaxDigits
// digits; the message quotes at most the first 20 characters of s.
func CheckDigits(s string) error {
	n := 0
	for _, r := range s {
		if r >= '0' && r <= '9' {
			n++
		}
	}
	if n > MaxDigits {
		return fmt.Errorf("%s has %d digits, too many for a measurement (at most %d)", Brief(s), n, MaxDigits)
	}
	return nil
}

// Brief quotes s, cut to its first 20 characters when longer.
func Brief(s string) string {
	if len(s) > 20 {
		return strconv.Quote(s[:20]) + "…"
	}
	return strconv.Quote(s)
}
