package units

import (
	"fmt"
	"math/big"
	"strings"
	"unicode"
)

// LengthUnits are the units ParseLength reads, in a stable order: the
// units of heights and the kilometre and the international mile.
var LengthUnits = []string{"m", "km", "ft", "usft", "mi"}

// Exact lengths of the distance-only units in metres. The international
// mile is 5,280 international feet, 1609.344 m exactly (NIST Handbook 44,
// 2024, Appendix C; docs/references.md#units).
var (
	kilometre = big.NewRat(1000, 1)
	mile      = new(big.Rat).Mul(big.NewRat(5280, 1), Foot.ratio())
)

// lengthRatio returns the exact length in metres of one unit of a
// distance, read case-insensitively; feet and foot are refused through
// Parse.
func lengthRatio(code string) (*big.Rat, error) {
	switch strings.ToLower(code) {
	case "km":
		return kilometre, nil
	case "mi", "mile", "miles":
		return mile, nil
	}
	u, err := Parse(code)
	if err != nil {
		if _, amb := err.(*AmbiguousError); amb || err == ErrNoUnit {
			return nil, err
		}
		return nil, fmt.Errorf("unknown unit %q (want %s)", code, strings.Join(LengthUnits, ", "))
	}
	return u.ratio(), nil
}

// ParseLength reads a distance with its unit, such as "2mi", "500 m",
// "1.5km" or "3000 usft", and returns it in metres: a finite length more
// than 0 and at most MaxLengthM (CheckLengthM). The unit is one of
// LengthUnits; the number is at most MaxDigits digits.
func ParseLength(s string) (float64, error) {
	t := strings.TrimSpace(s)
	i := strings.IndexFunc(t, func(r rune) bool { return unicode.IsLetter(r) || r == '\'' })
	if i < 0 {
		return 0, fmt.Errorf("%s needs a unit: %s (e.g. 2km)", Brief(s), strings.Join(LengthUnits, ", "))
	}
	num, code := strings.TrimSpace(t[:i]), strings.TrimSpace(t[i:])
	ratio, err := lengthRatio(code)
	if err != nil {
		return 0, err
	}
	if err := CheckDigits(num); err != nil {
		return 0, err
	}
	r, ok := new(big.Rat).SetString(num)
	if !ok || strings.ContainsAny(num, "/eE") {
		return 0, fmt.Errorf("%s is not a distance (e.g. 2km)", Brief(s))
	}
	m, _ := r.Mul(r, ratio).Float64()
	if err := CheckLengthM(m); err != nil {
		return 0, err
	}
	return m, nil
}
