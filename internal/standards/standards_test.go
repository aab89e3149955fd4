package standards

import (
	"math"
	"testing"
)

func TestParseClass(t *testing.T) {
	for in, want := range map[string]Class{
		"first-I": FirstI, "FIRST-i": FirstI, "first-ii": FirstII, " Second-I ": SecondI,
		"second ii": SecondII, "second_II": SecondII, "THIRD": Third,
		"2nd-II": SecondII, "1st-i": FirstI, "3rd": Third, "Second order class I": SecondI,
	} {
		got, err := ParseClass(in)
		if err != nil || got != want {
			t.Errorf("ParseClass(%q) = %q, %v; want %q", in, got, err, want)
		}
	}
	for _, bad := range []string{"", "fourth", "first", "2nd-III", "first-III"} {
		if _, err := ParseClass(bad); err == nil {
			t.Errorf("ParseClass(%q) accepted", bad)
		}
	}
}

// FGCC 1984, "Standards and Specifications for Geodetic Control Networks",
// §3.5, field procedures of geodetic leveling: values from memory (see
// docs/references.md#accuracy-classes); this pins the table against that note.
func TestTableFromMemory(t *testing.T) {
	want := []struct {
		c                            Class
		section, loop, setup, acc, s float64
	}{
		{FirstI, 3, 4, 2, 4, 50},
		{FirstII, 4, 5, 5, 10, 60},
		{SecondI, 6, 6, 5, 10, 60},
		{SecondII, 8, 8, 10, 10, 70},
		{Third, 12, 12, 10, 10, 90},
	}
	for _, w := range want {
		got := For(w.c)
		if got.SectionMmSqrtKm != w.section || got.LoopMmSqrtKm != w.loop || got.MaxSetupImbalanceM != w.setup ||
			got.MaxSectionImbalanceM != w.acc || got.MaxSightM != w.s || got.MinGroundClearanceM != 0.5 {
			t.Errorf("For(%s) = %+v", w.c, got)
		}
	}
}

// Montana State University, ITCM 410 Lab 1 "Vertical Control Survey –
// Three-Wire Leveling" (read): allowable closure c·√(miles) with c = 0.012,
// 0.017, 0.025, 0.033, 0.050 ft for first-I to third. Derived: over one
// mile (1.609344 km) our section constants give those figures rounded to
// 0.001 ft.
func TestAllowableAgainstMSU(t *testing.T) {
	const mileM = 1609.344
	for c, wantFt := range map[Class]float64{FirstI: 0.012, FirstII: 0.017, SecondI: 0.025, SecondII: 0.033, Third: 0.050} {
		gotFt := For(c).AllowableSectionM(mileM) / 0.3048
		if math.Abs(gotFt-wantFt) > 0.0005 {
			t.Errorf("%s: allowable over one mile = %.4f ft, want %.3f ft (MSU ITCM 410)", c, gotFt, wantFt)
		}
	}
}

// US Army Engineer School, course EN0593, §4-3 (read): second-order class
// II allowable error 8.4 mm·√K. FGCC 1984 (from memory) gives 8 mm·√E; the
// two agree to within 0.5 mm·√km.
func TestAllowableAgainstEN0593(t *testing.T) {
	got := For(SecondII).AllowableLoopM(1000) * 1000
	if math.Abs(got-8.4) > 0.5 {
		t.Errorf("second-II over 1 km = %.2f mm, want about 8.4 mm (EN0593)", got)
	}
	// 4 km doubles it: allowable grows with the square root of length.
	if r := For(SecondII).AllowableLoopM(4000) / For(SecondII).AllowableLoopM(1000); math.Abs(r-2) > 1e-12 {
		t.Errorf("ratio over 4 km / 1 km = %v, want 2", r)
	}
	if For(Third).AllowableLoopM(0) != 0 {
		t.Error("allowable over no length is not 0")
	}
}

// NGS, "Standards & Requirements for Leveling", after FGCC 1984 (read):
// maximum b = S/√d of 0.5, 0.7, 1.0, 1.3, 2.0 mm/√km.
func TestAccuracyB(t *testing.T) {
	for c, want := range map[Class]float64{FirstI: 0.5, FirstII: 0.7, SecondI: 1.0, SecondII: 1.3, Third: 2.0} {
		if got := For(c).MaxAccuracyMmSqrtKm; got != want {
			t.Errorf("%s: b = %v, want %v (NGS)", c, got, want)
		}
	}
}

func TestForPanicsOnUnknown(t *testing.T) {
	defer func() {
		if recover() == nil {
			t.Error("For(\"fourth\") did not panic")
		}
	}()
	For("fourth")
}

// Common practice: stadia factor 100, constant 0 (SEG Encyclopedic
// Dictionary, "Stadia tables": factor 100 "often").
func TestStadia(t *testing.T) {
	if StadiaFactor != 100 || StadiaConstant != 0 || ThreeWireM != 0.003 {
		t.Errorf("stadia %v + %v, three-wire %v", StadiaFactor, StadiaConstant, ThreeWireM)
	}
}
