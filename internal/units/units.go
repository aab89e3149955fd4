// Package units converts lengths between the metre, the international foot
// and the US survey foot, with the exact definitions, and rounds values for
// publication.
//
// Sources:
//
//	international foot = 0.3048 m exactly
//	US survey foot     = 1200/3937 m exactly
//
// Federal Register Vol. 85 No. 193, 5 October 2020, pp. 62698-62708,
// "Deprecation of the United States (U.S.) Survey Foot" (NIST, NOAA/NGS).
package units

import (
	"errors"
	"fmt"
	"math"
	"math/big"
	"strconv"
	"strings"
)

// Unit is a unit of length in which heights and readings are written.
type Unit string

// The units cairn knows.
const (
	Metre        Unit = "m"
	Foot         Unit = "ft"   // international foot, 0.3048 m
	USSurveyFoot Unit = "usft" // US survey foot, 1200/3937 m
)

// All lists the units in a stable order, for help texts and errors.
var All = []Unit{Metre, Foot, USSurveyFoot}

// Parse reads a unit code. It accepts the canonical codes and a few
// unambiguous spellings ("metre", "meter", "us-ft", "ussft"),
// case-insensitively. It is the one place a unit is read: "feet" and
// "foot" are refused as ambiguous (an *AmbiguousError), since a height in
// feet may be in either foot and the two part by 2 ppm, 3 mm in 1,500 m;
// an empty unit is ErrNoUnit.
func Parse(s string) (Unit, error) {
	switch t := strings.ToLower(strings.TrimSpace(s)); t {
	case "":
		return "", ErrNoUnit
	case "m", "metre", "metres", "meter", "meters":
		return Metre, nil
	case "ft", "ift", "intl-ft":
		return Foot, nil
	case "usft", "us-ft", "ussft", "survey-ft", "us survey foot":
		return USSurveyFoot, nil
	case "feet", "foot", "f", "'":
		return "", &AmbiguousError{Given: s}
	}
	return "", fmt.Errorf("unknown unit %q (want m, ft or usft)", s)
}

// ErrNoUnit is an empty unit.
var ErrNoUnit = errors.New("no unit given (want m, ft or usft)")

// AmbiguousError is a unit that could be either foot.
type AmbiguousError struct{ Given string }

func (e *AmbiguousError) Error() string {
	return fmt.Sprintf("%q is ambiguous: write ft for the international foot (0.3048 m) or usft for the US survey foot (1200/3937 m)", e.Given)
}

// String returns the canonical code.
func (u Unit) String() string { return string(u) }

// Name returns the unit's name in words.
func (u Unit) Name() string {
	switch u {
	case Metre:
		return "metre"
	case Foot:
		return "international foot"
	case USSurveyFoot:
		return "US survey foot"
	}
	return string(u)
}

// ratio returns the exact length of one unit in metres as a fraction.
func (u Unit) ratio() *big.Rat {
	switch u {
	case Metre:
		return big.NewRat(1, 1)
	case Foot:
		return big.NewRat(3048, 10000)
	case USSurveyFoot:
		return big.NewRat(1200, 3937)
	}
	panic("units: unknown unit " + string(u))
}

// Metres returns the length of one unit in metres, as the nearest float64.
func (u Unit) Metres() float64 {
	f, _ := u.ratio().Float64()
	return f
}

// ToMetres converts v in unit u to metres.
func (u Unit) ToMetres(v float64) float64 {
	switch u {
	case Metre:
		return v
	case Foot:
		return v * 0.3048
	case USSurveyFoot:
		return v * 1200 / 3937
	}
	panic("units: unknown unit " + string(u))
}

// FromMetres converts v metres to unit u.
func (u Unit) FromMetres(v float64) float64 {
	switch u {
	case Metre:
		return v
	case Foot:
		return v / 0.3048
	case USSurveyFoot:
		return v * 3937 / 1200
	}
	panic("units: unknown unit " + string(u))
}

// DefaultDecimals is the number of decimals a height in unit u is usually
// published to: 0.001 m or 0.01 ft (common practice).
func (u Unit) DefaultDecimals() int {
	if u == Metre {
		return 3
	}
	return 2
}

// ConvertExact converts a decimal string value from unit from to unit to with
// exact rational arithmetic and returns it rounded half away from zero to
// decimals places, as a decimal string.
func ConvertExact(value string, from, to Unit, decimals int) (string, error) {
	r, ok := new(big.Rat).SetString(strings.TrimSpace(value))
	if !ok {
		return "", fmt.Errorf("not a number: %q", value)
	}
	r.Mul(r, from.ratio())
	r.Quo(r, to.ratio())
	return RoundRat(r, decimals), nil
}

// RoundRat formats r rounded half away from zero to decimals places.
func RoundRat(r *big.Rat, decimals int) string {
	scale := new(big.Int).Exp(big.NewInt(10), big.NewInt(int64(decimals)), nil)
	num := new(big.Int).Mul(r.Num(), scale)
	den := r.Denom()
	q, m := new(big.Int).QuoRem(num, den, new(big.Int))
	// Half away from zero: compare 2|m| with den.
	m.Abs(m).Lsh(m, 1)
	if m.Cmp(den) >= 0 {
		if num.Sign() < 0 {
			q.Sub(q, big.NewInt(1))
		} else {
			q.Add(q, big.NewInt(1))
		}
	}
	neg := q.Sign() < 0
	s := new(big.Int).Abs(q).String()
	if decimals > 0 {
		if len(s) <= decimals {
			s = strings.Repeat("0", decimals-len(s)+1) + s
		}
		s = s[:len(s)-decimals] + "." + s[len(s)-decimals:]
	}
	if neg {
		s = "-" + s
	}
	return s
}

// Decimal returns the exact value of the shortest decimal that reads back
// as v (strconv.FormatFloat(v, 'g', -1, 64)): the number a person reads
// when v is printed in full. It is what cairn rounds for publication, not
// v's binary value: 1.005 is stored as 1.00499999999999989…, which a person
// reads, and cairn rounds, as 1.005. v must be finite.
func Decimal(v float64) *big.Rat {
	r, ok := new(big.Rat).SetString(strconv.FormatFloat(v, 'g', -1, 64))
	if !ok {
		panic(fmt.Sprintf("units: Decimal of %v", v))
	}
	return r
}

// Format writes v with exactly decimals places, rounded half away from
// zero, and never "-0.000". It is the one rounding of a value to publish or
// print: the shortest decimal that reads back as v (Decimal) is rounded
// exactly (RoundRat), so a value half-way between two steps rounds by the
// rule, not by the noise of its binary form (1.005 to two places is 1.01,
// 0.5055 to three is 0.506). A NaN or an infinity is written as fmt writes
// it.
func Format(v float64, decimals int) string {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return fmt.Sprintf("%.*f", decimals, v)
	}
	if out, ok := roundShortest(v, decimals); ok {
		return out
	}
	return RoundRat(Decimal(v), decimals)
}

// roundShortest is RoundRat(Decimal(v), decimals) by the digits of the
// shortest decimal that reads back as v (strconv's 'e' form), rounded
// half away from zero on those digits: that decimal is exact, so the part
// dropped is at least half a step exactly when its first digit is 5 or
// more. It makes no big numbers (a listing formats millions of values);
// ok is false for a value it leaves to RoundRat (more than 40 decimals,
// or an exponent beyond ±40).
func roundShortest(v float64, decimals int) (string, bool) {
	if decimals < 0 || decimals > 40 {
		return "", false
	}
	var buf [32]byte
	e := strconv.AppendFloat(buf[:0], v, 'e', -1, 64) // -d.ddde±XX
	neg := e[0] == '-'
	if neg {
		e = e[1:]
	}
	mant, exp, _ := strings.Cut(string(e), "e")
	x, err := strconv.Atoi(exp)
	if err != nil || x < -40 || x > 40 {
		return "", false
	}
	digits := strings.Replace(mant, ".", "", 1) // value = 0.digits × 10^(x+1)
	point := x + 1                              // digits before the decimal point
	// The digits kept: those before the point and decimals after it.
	keep := point + decimals
	var out []byte
	switch {
	case keep < 0:
		out = []byte{'0'}
	case keep >= len(digits):
		out = append([]byte(digits), strings.Repeat("0", keep-len(digits))...)
	default:
		out = []byte(digits[:keep])
		if digits[keep] >= '5' {
			i := len(out) - 1
			for ; i >= 0 && out[i] == '9'; i-- {
				out[i] = '0'
			}
			if i >= 0 {
				out[i]++
			} else {
				out = append([]byte{'1'}, out...)
				point++
			}
		}
		if len(out) == 0 {
			out = []byte{'0'}
		}
	}
	// out holds the scaled integer q = round(v × 10^decimals), its digits
	// as RoundRat prints them.
	q := strings.TrimLeft(string(out), "0")
	if q == "" {
		q = "0"
	}
	zero := q == "0"
	if decimals > 0 {
		if len(q) <= decimals {
			q = strings.Repeat("0", decimals-len(q)+1) + q
		}
		q = q[:len(q)-decimals] + "." + q[len(q)-decimals:]
	}
	if neg && !zero {
		q = "-" + q
	}
	return q, true
}

// FormatIn writes a length of m metres in unit u with exactly decimals
// places: the shortest decimal that reads back as m, converted to u exactly
// (as ConvertExact converts) and rounded half away from zero. In metres it is
// Format.
func FormatIn(m float64, u Unit, decimals int) string {
	if u == Metre || math.IsNaN(m) || math.IsInf(m, 0) {
		return Format(u.FromMetres(m), decimals)
	}
	r := Decimal(m)
	return RoundRat(r.Quo(r, u.ratio()), decimals)
}
