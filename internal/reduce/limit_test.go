package reduce

import (
	"fmt"
	"math"
	"math/big"
	"strings"
	"testing"

	"cairn/internal/standards"
)

// loopBook writes a loop TC-1 → TC-2 → TC-3 → TC-1 of ten setups (three
// sections, none levelled back: a loop, not a double run) with every sight
// 50 m (a loop of 1.000 km, sights and imbalances within first-I's limits),
// all readings 1.5000 m except the last foresight, 1.5000 − m, so the loop
// misclosure (ΣBS − ΣFS against 0) is m exactly in decimals.
func loopBook(class, misclosure string) string {
	var b strings.Builder
	fmt.Fprintf(&b, "# units: m\n# class: %s\npoint,sight,middle,distance\n", class)
	pts := []string{"TC-1", "TP1", "TP2", "TP3", "TC-2", "TP4", "TP5", "TC-3", "TP6", "TP7", "TC-1"}
	m, _ := new(big.Rat).SetString(misclosure)
	last := new(big.Rat).Sub(big.NewRat(15, 10), m).FloatString(4)
	for i := 0; i+1 < len(pts); i++ {
		fs := "1.5000"
		if i+2 == len(pts) {
			fs = last
		}
		fmt.Fprintf(&b, "%s,BS,1.5000,50\n%s,FS,%s,50\n", pts[i], pts[i+1], fs)
	}
	return b.String()
}

// TestLoopMisclosureAtTheLimit closes a 1 km loop in each class with a
// misclosure exactly at its allowable, 0.1 mm (the last place of a reading)
// inside it and 0.1 mm over it. The allowable is the loop column,
// c·√E mm with c = 4, 5, 6, 8, 12 for first-I … third (FGCC 1984 §3.5 loop
// column, from memory: docs/references.md#accuracy-classes), so over
// E = 1 km it is c mm. The first-order rows tell the loop column from the
// section column (3 and 4 mm·√km there): a misclosure of 3.5 mm in first-I
// or 4.5 mm in first-II passes by the loop column and would fail by the
// section column. At the limit exactly it passes (standards.Within: the
// limit is inclusive), which a strict comparison would fail.
func TestLoopMisclosureAtTheLimit(t *testing.T) {
	cases := []struct {
		class standards.Class
		limit string // mm over 1 km
		also  []string
	}{
		{standards.FirstI, "4", []string{"0.0035"}},
		{standards.FirstII, "5", []string{"0.0045"}},
		{standards.SecondI, "6", nil},
		{standards.SecondII, "8", nil},
		{standards.Third, "12", nil},
	}
	for _, c := range cases {
		lim, _ := new(big.Rat).SetString(c.limit)
		lim.Quo(lim, big.NewRat(1000, 1))
		tenth := big.NewRat(1, 10000)
		at := lim.FloatString(4)
		inside := new(big.Rat).Sub(lim, tenth).FloatString(4)
		over := new(big.Rat).Add(lim, tenth).FloatString(4)
		want := map[string]bool{at: true, inside: true, over: false, "-" + at: true, "-" + over: false}
		for _, m := range c.also {
			want[m] = true
		}
		for m, pass := range want {
			r := reduce(t, parse(t, loopBook(string(c.class), m)), Options{})
			if len(r.Misclosures) != 1 || r.Misclosures[0].Kind != "loop" || r.Misclosures[0].LengthM != 1000 {
				t.Fatalf("%s: misclosures %+v, want one loop of 1000 m", c.class, r.Misclosures)
			}
			ms := r.Misclosures[0]
			wantAllow, _ := lim.Float64()
			if ms.AllowableM != wantAllow {
				t.Errorf("%s: allowable %v m over 1 km, want %s m", c.class, ms.AllowableM, lim.FloatString(4))
			}
			if ms.Pass != pass || r.Passed() != pass {
				t.Errorf("%s, misclosure %s m (computed %.17g m), allowable %s m: pass %v, run passed %v; want %v (failures %+v)",
					c.class, m, ms.MisclosureM, lim.FloatString(4), ms.Pass, r.Passed(), pass, r.Failures)
			}
			for _, f := range r.Failures {
				if f.Kind != CheckMisclosure {
					t.Errorf("%s, misclosure %s: unexpected failure %+v", c.class, m, f)
				}
			}
		}
	}
}

// TestClassLimitsAtTheLimit puts each first-I distance limit exactly at its
// value and 0.1 m over it (FGCC 1984 §3.5, from memory: sights at most
// 50 m, imbalance 2 m per setup and 4 m accumulated per section). A
// sight of 50.0 m, an imbalance of 2.0 m and an accumulated 4.0 m pass;
// 50.1, 2.1 and 4.1 m fail, on the line named.
func TestClassLimitsAtTheLimit(t *testing.T) {
	bookIn := func(class string, rows ...string) string {
		return "# units: m\n# class: " + class + "\npoint,sight,middle,distance\n" + strings.Join(rows, "\n") + "\n"
	}
	book := func(rows ...string) string { return bookIn("first-I", rows...) }
	cases := []struct {
		name string
		book string
		kind CheckKind
		line int // 0: passes
	}{
		{"sight at 50 m", book("TC-1,BS,1.5,50.0", "TC-2,FS,1.5,50.0", "TC-2,BS,1.5,50.0", "TC-1,FS,1.5,50.0"), "", 0},
		{"sight of 50.1 m", book("TC-1,BS,1.5,50.0", "TC-2,FS,1.5,50.0", "TC-2,BS,1.5,50.1", "TC-1,FS,1.5,50.0"), CheckSightLength, 6},
		// Second-II: sights at most 70 m (the same table's column).
		{"second-II sight at 70 m", bookIn("second-II", "TC-1,BS,1.5,70.0", "TC-2,FS,1.5,70.0", "TC-2,BS,1.5,70.0", "TC-1,FS,1.5,70.0"), "", 0},
		{"second-II sight of 70.1 m", bookIn("second-II", "TC-1,BS,1.5,70.0", "TC-2,FS,1.5,70.0", "TC-2,BS,1.5,70.1", "TC-1,FS,1.5,70.0"), CheckSightLength, 6},
		{"setup imbalance of 2.0 m", book("TC-1,BS,1.5,40.0", "TP1,FS,1.5,38.0", "TP1,BS,1.5,38.0", "TC-2,FS,1.5,38.0", "TC-2,BS,1.5,40.0", "TC-1,FS,1.5,40.0"), "", 0},
		{"setup imbalance of 2.1 m", book("TC-1,BS,1.5,40.1", "TP1,FS,1.5,38.0", "TP1,BS,1.5,38.0", "TC-2,FS,1.5,38.0", "TC-2,BS,1.5,40.0", "TC-1,FS,1.5,40.0"), CheckSetupImbalance, 5},
		{"section imbalance of 4.0 m", book("TC-1,BS,1.5,40.0", "TP1,FS,1.5,38.0", "TP1,BS,1.5,40.0", "TC-2,FS,1.5,38.0", "TC-2,BS,1.5,40.0", "TC-1,FS,1.5,40.0"), "", 0},
		{"section imbalance of 4.1 m", book("TC-1,BS,1.5,40.0", "TP1,FS,1.5,38.0", "TP1,BS,1.5,40.0", "TP2,FS,1.5,38.0", "TP2,BS,1.5,38.1", "TC-2,FS,1.5,38.0", "TC-2,BS,1.5,40.0", "TC-1,FS,1.5,40.0"), CheckSectionImbalance, 9},
	}
	for _, c := range cases {
		r := reduce(t, parse(t, c.book), Options{})
		var got []string
		for _, f := range r.Failures {
			got = append(got, fmt.Sprintf("%s line %d", f.Kind, f.Line))
		}
		want := "[]"
		if c.line != 0 {
			want = fmt.Sprintf("[%s line %d]", c.kind, c.line)
		}
		if fmt.Sprint(got) != want && !(want == "[]" && len(got) == 0) {
			t.Errorf("%s: failures %v, want %s", c.name, got, want)
		}
	}
}

// lineBook writes a first-I book along pts, one setup between each two
// consecutive points with sights of 50 m, every reading 1.5000 m but the
// foresight of setup i, 1.5000 − rise[i] m (rises in decimals, as written).
func lineBook(pts []string, rise map[int]string) string {
	var b strings.Builder
	b.WriteString("# units: m\n# class: first-I\npoint,sight,middle,distance\n")
	for i := 0; i+1 < len(pts); i++ {
		fs := "1.5000"
		if r, ok := rise[i]; ok {
			d, _ := new(big.Rat).SetString(r)
			fs = new(big.Rat).Sub(big.NewRat(15, 10), d).FloatString(4)
		}
		fmt.Fprintf(&b, "%s,BS,1.5000,50\n%s,FS,%s,50\n", pts[i], pts[i+1], fs)
	}
	return b.String()
}

// way returns from, nine turning points named after n, and to: ten setups
// of 100 m, a section of 1.000 km.
func way(from, n, to string) []string {
	pts := []string{from}
	for i := 1; i <= 9; i++ {
		pts = append(pts, fmt.Sprintf("TP%s%d", n, i))
	}
	return append(pts, to)
}

// TestDoubleRunAndConnectionAtTheLimit tells the first-I columns apart, at
// their limits, in the two comparisons of one observed difference with
// another (FGCC 1984 §3.5, from memory: docs/references.md#accuracy-classes):
//   - a section of 1.000 km levelled forward and back closes within the
//     section column, 3 mm·√K (K = 1 km: 3.0 mm passes, 3.1 mm fails),
//     not the loop column's 4 mm;
//   - a check connection between two published marks 1.000 km apart is
//     judged by the profile's check-connection constant, the loop column
//     (cairn's choice, docs/methods.md): 4.0 mm passes, 3.5 mm passes (it
//     would fail by the section column), 4.1 mm fails.
func TestDoubleRunAndConnectionAtTheLimit(t *testing.T) {
	for closure, pass := range map[string]bool{"0.0030": true, "-0.0030": true, "0.0031": false, "-0.0031": false} {
		pts := append(way("TC-1", "A", "TC-2"), way("TC-2", "B", "TC-1")[1:]...)
		// Forward +0.5 m; back −0.5 m + closure.
		back, _ := new(big.Rat).SetString(closure)
		back.Sub(back, big.NewRat(1, 2))
		r := reduce(t, parse(t, lineBook(pts, map[int]string{0: "0.5", 10: back.FloatString(4)})), Options{})
		if len(r.DoubleRuns) != 1 {
			t.Fatalf("closure %s: double runs %+v, want one", closure, r.DoubleRuns)
		}
		d := r.DoubleRuns[0]
		if d.OneWayM != 1000 || math.Abs(d.AllowableM-0.003) > 1e-15 || d.Pass != pass {
			t.Errorf("closure %s: %+v; want one way 1000 m, allowable 0.003 m, pass %v", closure, d, pass)
		}
		for _, f := range r.Failures {
			if f.Kind != CheckDoubleRun {
				t.Errorf("closure %s: unexpected failure %+v", closure, f)
			}
		}
	}
	for diff, pass := range map[string]bool{"0.0040": true, "0.0035": true, "-0.0040": true, "0.0041": false, "-0.0041": false} {
		d, _ := new(big.Rat).SetString(diff)
		rise := new(big.Rat).Add(big.NewRat(1, 2), d).FloatString(4)
		r := reduce(t, parse(t, lineBook(way("TC-1", "A", "TC-2"), map[int]string{0: rise})), Options{Published: map[string]float64{"TC-1": 10, "TC-2": 10.5}})
		if len(r.Connections) != 1 {
			t.Fatalf("difference %s: connections %+v, want one", diff, r.Connections)
		}
		c := r.Connections[0]
		if c.LengthM != 1000 || math.Abs(c.AllowableM-0.004) > 1e-15 || c.Pass != pass {
			t.Errorf("difference %s: %+v; want 1000 m, allowable 0.004 m, pass %v", diff, c, pass)
		}
	}
}
