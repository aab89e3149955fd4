package units

import (
	"math"
	"testing"
)

func TestConvertExactSurveyFoot(t *testing.T) {
	// 1 usft = 1200/3937 m (Federal Register Vol. 85 No. 193, 2020, p. 62698).
	// 769.83 × 1200/3937 = 234.6449... m, so 234.645 m at the millimetre (derived).
	got, err := ConvertExact("769.83", USSurveyFoot, Metre, 3)
	if err != nil {
		t.Fatal(err)
	}
	if got != "234.645" {
		t.Fatalf("769.83 usft = %s m, want 234.645", got)
	}
	back, err := ConvertExact("769.83", USSurveyFoot, USSurveyFoot, 2)
	if err != nil || back != "769.83" {
		t.Fatalf("round trip gave %q, %v", back, err)
	}
}

func TestFootDefinitions(t *testing.T) {
	// International foot 0.3048 m exactly; the survey foot is longer by
	// 2 ppm (Federal Register Vol. 85 No. 193, 2020).
	if Foot.ToMetres(1) != 0.3048 {
		t.Fatalf("ft = %v m", Foot.ToMetres(1))
	}
	ppm := (USSurveyFoot.Metres() - Foot.Metres()) / Foot.Metres() * 1e6
	if math.Abs(ppm-2) > 0.01 {
		t.Fatalf("usft - ft = %.4f ppm, want 2", ppm)
	}
	for _, u := range All {
		if d := u.FromMetres(u.ToMetres(1234.5678)) - 1234.5678; math.Abs(d) > 1e-12 {
			t.Fatalf("%s round trip off by %g", u, d)
		}
	}
}

func TestParse(t *testing.T) {
	for in, want := range map[string]Unit{"m": Metre, "FT": Foot, "usft": USSurveyFoot, "meter": Metre} {
		if got, err := Parse(in); err != nil || got != want {
			t.Fatalf("Parse(%q) = %v, %v", in, got, err)
		}
	}
	if _, err := Parse("yards"); err == nil {
		t.Fatal("Parse(yards) succeeded")
	}
}

func TestRoundRatHalfAwayFromZero(t *testing.T) {
	for _, c := range []struct {
		in   string
		dec  int
		want string
	}{
		{"28.935", 2, "28.94"}, {"-28.935", 2, "-28.94"}, {"0.0004", 3, "0.000"}, {"12", 0, "12"}, {"0.05", 1, "0.1"},
	} {
		got, _ := ConvertExact(c.in, Metre, Metre, c.dec)
		if got != c.want {
			t.Errorf("round %s to %d = %s, want %s", c.in, c.dec, got, c.want)
		}
	}
}
