package reduce

import (
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"cairn/internal/levelbook"
)

// spotBook is testdata/books/orrin-bay-spot-heights.csv with its
// intermediate sight on TC-0420 (line 17) read as is.
func spotBook(t *testing.T, is string) *levelbook.Book {
	t.Helper()
	data, err := os.ReadFile(filepath.Join(books, "orrin-bay-spot-heights.csv"))
	if err != nil {
		t.Fatal(err)
	}
	s := strings.Replace(string(data), "TC-0420,,IS,1.7010,", "TC-0420,,IS,"+is+",", 1)
	return parse(t, s)
}

// Spot heights by the height-of-instrument method (HI = H + BS, H = HI −
// IS; Ghilani & Wolf, "Elementary Surveying", differential leveling),
// from TC-0420 held at 10.0000 m:
//
//	setup 1: HI = 10.0000 + 1.5000 = 11.5000; FL-1 = 11.5000 − 2.1000 = 9.4000
//	         TP1 = 11.5000 − 1.2000 = 10.3000
//	setup 2: HI = 10.3000 + 1.4000 = 11.7000; INV-3 = 11.7000 − 3.0550 = 8.6450
//
// The intermediate sight on TC-0420 from setup 2 gives 11.7000 − 1.7010 =
// 9.9990 m, 1.0 mm below its held height, over 30 + 30 + 40 + 20 = 120 m
// levelled from TC-0420; second-order class I allows 6 mm·√K (FGCC 1984,
// from memory), 6 · √0.120 = 2.078 mm: it passes. Read as 1.7030 it gives
// 9.9970 m, 3.0 mm below: it fails.
func TestSpotHeightsAndHeldSight(t *testing.T) {
	const tol = 1e-9
	r := reduce(t, spotBook(t, "1.7010"), Options{Hold: map[string]float64{"TC-0420": 10}})
	want := map[string]float64{"FL-1": 9.4, "INV-3": 8.645}
	if len(r.SpotHeights) != 2 {
		t.Fatalf("spot heights %+v", r.SpotHeights)
	}
	for _, s := range r.SpotHeights {
		if math.Abs(s.HeightM-want[s.Point]) > tol {
			t.Errorf("%s = %.6f m, want %.4f", s.Point, s.HeightM, want[s.Point])
		}
	}
	if len(r.HeldSights) != 1 {
		t.Fatalf("held sights %+v", r.HeldSights)
	}
	hs := r.HeldSights[0]
	if hs.Line != 17 || hs.Point != "TC-0420" || math.Abs(hs.HeightM-9.999) > tol || math.Abs(hs.DifferenceM+0.001) > tol ||
		math.Abs(hs.LengthM-120) > tol || math.Abs(hs.AllowableM-0.006*math.Sqrt(0.120)) > tol || !hs.Pass {
		t.Errorf("held sight %+v", hs)
	}
	if !r.Passed() || r.Summary != "All checks passed." || !r.AllChecksMade {
		t.Errorf("passed %v, summary %q, failures %+v", r.Passed(), r.Summary, r.Failures)
	}
	for _, c := range r.Checks {
		if c.Kind == CheckHeldSight && (c.Checked != 1 || c.Failed != 0 || c.NotMade != "") {
			t.Errorf("held-sight check %+v", c)
		}
	}

	r = reduce(t, spotBook(t, "1.7030"), Options{Hold: map[string]float64{"TC-0420": 10}})
	if r.Passed() || len(r.Failures) != 1 || r.Failures[0].Kind != CheckHeldSight || r.Failures[0].Line != 17 ||
		r.Failures[0].Message != "intermediate sight gives 9.9970 m, -0.0030 m from the held height 10.0000 m: more than the allowable 0.0021 m over 120.0 m" {
		t.Errorf("failures %+v", r.Failures)
	}
	if r.Summary != "1 check(s) failed." {
		t.Errorf("summary %q", r.Summary)
	}

	// A spot height cannot be held: it is not a mark.
	if _, err := Reduce(spotBook(t, "1.7010"), Options{Hold: map[string]float64{"FL-1": 9.4}}); err == nil ||
		err.Error() != "cannot hold FL-1: it is a spot height (line 13), not a mark" {
		t.Errorf("holding a spot height: %v", err)
	}
}

// A book with no class never passes "all checks": the summary names the
// checks not made and why; a check with nothing to apply to (three wires,
// intermediate sights on held marks) is not counted missing.
func TestSummaryNamesChecksNotMade(t *testing.T) {
	b := spotBook(t, "1.7010")
	b.Meta.Class = ""
	r := reduce(t, b, Options{})
	if !r.Passed() || r.AllChecksMade ||
		r.Summary != "1 check made and passed; not made: distances booked, sight lengths, setup imbalance, section imbalance, misclosure (no class)." {
		t.Errorf("summary %q (passed %v)", r.Summary, r.Passed())
	}
	r = reduce(t, b, Options{Hold: map[string]float64{"TC-0420": 10}})
	if r.Summary != "1 check made and passed; not made: distances booked, sight lengths, setup imbalance, section imbalance, misclosure, held-mark sights (no class)." {
		t.Errorf("summary held %q", r.Summary)
	}
	// A class but no distances: the sight lengths cannot be checked.
	nd := parse(t, "# units: m\n# class: third\npoint,sight,middle\nA,BS,1.0\nTP1,FS,1.2\nTP1,BS,1.1\nA,FS,0.9\n")
	r = reduce(t, nd, Options{})
	if r.Summary != "5 check(s) failed. Not made: sight lengths, setup imbalance, section imbalance (no distances)." {
		t.Errorf("summary without distances %q", r.Summary)
	}
}
