package units

import (
	"errors"
	"math"
	"math/big"
	"strings"
	"testing"
)

// feet and foot name no one foot: refused wherever a unit is read, with
// both feet named and defined (Federal Register Vol. 85 No. 193, 2020:
// ft = 0.3048 m, usft = 1200/3937 m).
func TestParseRefusesFeet(t *testing.T) {
	for _, in := range []string{"feet", "foot", "Feet", " FOOT "} {
		_, err := Parse(in)
		var ae *AmbiguousError
		if !errors.As(err, &ae) {
			t.Fatalf("Parse(%q) = %v, want an AmbiguousError", in, err)
		}
		for _, want := range []string{"ambiguous", "ft", "0.3048 m", "usft", "1200/3937 m"} {
			if !strings.Contains(err.Error(), want) {
				t.Errorf("Parse(%q): %q does not say %q", in, err, want)
			}
		}
		if _, err := ParseLength("2 " + in); !errors.As(err, &ae) {
			t.Errorf("ParseLength(2 %s) = %v, want an AmbiguousError", in, err)
		}
	}
	if _, err := Parse(""); !errors.Is(err, ErrNoUnit) {
		t.Fatalf("Parse(\"\") = %v, want ErrNoUnit", err)
	}
}

// ParseLength against the exact definitions: international foot 0.3048 m
// and US survey foot 1200/3937 m (Federal Register Vol. 85 No. 193, 5
// October 2020, p. 62698), international mile 5,280 ft = 1609.344 m
// (NIST Handbook 44, 2024, Appendix C; the 5,280 ft from memory, the
// product derived from the foot as read).
func TestParseLengthExact(t *testing.T) {
	usft, _ := new(big.Rat).Mul(big.NewRat(3000, 1), big.NewRat(1200, 3937)).Float64()
	for _, c := range []struct {
		in   string
		want float64
	}{
		{"2mi", 3218.688}, {"2 mi", 3218.688}, {"1MI", 1609.344}, {"0.5 mi", 804.672},
		{"500m", 500}, {"1.5 km", 1500}, {"2KM", 2000},
		{"1000ft", 304.8}, {"3000 usft", usft}, {"3000usft", 914.4018288036576}, // 3,600,000/3937 = 914.401828803657607… m (derived),
	} {
		got, err := ParseLength(c.in)
		if err != nil || got != c.want {
			t.Errorf("ParseLength(%q) = %v, %v; want %v m", c.in, got, err, c.want)
		}
	}
	// 1 mi is 5280 ft, and 2 ppm shorter than 5280 usft (derived).
	mi, _ := ParseLength("1mi")
	ft, _ := ParseLength("5280ft")
	us, _ := ParseLength("5280usft")
	if mi != ft || math.Abs((us-mi)/mi*1e6-2) > 0.01 {
		t.Fatalf("1 mi = %v m, 5280 ft = %v m, 5280 usft = %v m", mi, ft, us)
	}
	for _, in := range []string{"2", "2 yd", "-1km", "0m", "1e3m", "NaNm", "1/2mi", "1001km", strings.Repeat("9", 400) + "m", "km"} {
		if v, err := ParseLength(in); err == nil {
			t.Errorf("ParseLength(%q) = %v, want an error", in, v)
		}
	}
	if _, err := ParseLength("1001km"); err == nil || !strings.Contains(err.Error(), "at most 1000000 m") {
		t.Errorf("1001 km: %v", err)
	}
	if _, err := ParseLength(strings.Repeat("9", 400) + "m"); err == nil || !strings.Contains(err.Error(), "400 digits") {
		t.Errorf("400 digits: %v", err)
	}
}

// The plausible range (common practice, docs/references.md#plausible-range):
// its ends are accepted, anything beyond them or not finite refused.
func TestBounds(t *testing.T) {
	for _, v := range []float64{MinHeightM, 0, 8849, MaxHeightM} {
		if err := CheckHeightM(v); err != nil {
			t.Errorf("height %v: %v", v, err)
		}
	}
	for _, v := range []float64{-500.001, 9000.001, 9500, math.NaN(), math.Inf(1), 1e308} {
		var re *RangeError
		if err := CheckHeightM(v); !errors.As(err, &re) {
			t.Errorf("height %v accepted", v)
		}
	}
	if err := CheckHeightM(9500); err == nil || err.Error() != "a height of 9500 m is implausible: cairn accepts -500 m to 9000 m" {
		t.Errorf("9500 m: %v", err)
	}
	for _, v := range []float64{9500, -9500, 0} {
		if err := CheckDifferenceM(v); err != nil {
			t.Errorf("difference %v: %v", v, err)
		}
	}
	for _, v := range []float64{9500.001, 1e308, math.NaN(), math.Inf(-1)} {
		if err := CheckDifferenceM(v); err == nil {
			t.Errorf("difference %v accepted", v)
		}
	}
	for _, v := range []float64{1e-9, MaxLengthM} {
		if err := CheckLengthM(v); err != nil {
			t.Errorf("length %v: %v", v, err)
		}
	}
	for _, v := range []float64{0, -1, MaxLengthM + 1, math.NaN(), math.Inf(1)} {
		if err := CheckLengthM(v); err == nil {
			t.Errorf("length %v accepted", v)
		}
	}
	if err := CheckDigits(strings.Repeat("1", 16)); err == nil {
		t.Error("16 digits accepted")
	}
	if err := CheckDigits("-29527.559055"); err != nil {
		t.Error(err)
	}
}
