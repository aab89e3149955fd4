package register

import (
	"fmt"
	"math/big"
	"math/rand/v2"
	"testing"
)

// shownResult's words for a value are those of the rational the value
// parses to, written with its decimals by math/big (Rat.SetString and
// Rat.FloatString, the reference) and formatted with fmt, whether the
// value takes the short way (plainDecimal) or not: values already in that
// form, with other counts of decimals, leading zeros, signs, negative
// zeros, exponents, and not numbers at all.
func TestShownResultAsRational(t *testing.T) {
	want := func(value, unit string, decimals int, class string) string {
		if r, ok := new(big.Rat).SetString(value); ok {
			value = r.FloatString(decimals)
		}
		s := fmt.Sprintf("%s %s, %d decimals", value, unit, decimals)
		if class != "" {
			s += ", class " + class
		}
		return s
	}
	values := []string{"769.83", "769.830", "0769.83", "-12.500", "-0.000", "-0", "0", "0.000", "+1.50", "1e3", "1.5e-1",
		"100", "100.", ".5", "", "-", "abc", "12.3x", "-00.10", "9999999999.999999"}
	rng := rand.New(rand.NewPCG(15, 4))
	for range 2000 {
		d := rng.IntN(7)
		whole := rng.Int64N(100000) - 50000
		v := fmt.Sprintf("%d", whole)
		if d > 0 {
			v += fmt.Sprintf(".%0*d", d, rng.Int64N(1_000_000)%pow10(d))
		}
		values = append(values, v)
	}
	for _, v := range values {
		for d := range 7 {
			if got, w := shownResult(v, "m", d, "B"), want(v, "m", d, "B"); got != w {
				t.Errorf("%q with %d decimals: %q, want %q", v, d, got, w)
			}
		}
	}
	if got, w := shownResult("1.25", "usft", 2, ""), want("1.25", "usft", 2, ""); got != w {
		t.Errorf("without a class: %q, want %q", got, w)
	}
}

func pow10(n int) int64 {
	p := int64(1)
	for range n {
		p *= 10
	}
	return p
}
