package adjust

import (
	"math"
	"strings"
	"testing"

	"cairn/internal/units"
)

// A distance-proportional adjustment of a level circuit closing on BM1.
// Source: docs/references.md, worked example 1 (inputs read from a published
// sample problem of a level-circuit adjustment; answers derived: misclosure
// 728.486 − 728.730 = −0.244 m over 30.500 km, +0.008 m/km).
func TestProportionalDistanceWorkedExample(t *testing.T) {
	const bm1 = 728.730
	rows := []struct {
		point            string
		cumKm, computedM float64
		correctionM      float64 // published to the millimetre
		adjustedM        float64
	}{
		{"BM1", 0, 728.730, 0, 728.730},
		{"BM2", 5.245, 783.213, 0.042, 783.255},
		{"BM3", 11.271, 891.764, 0.090, 891.854},
		{"BM4", 17.718, 843.195, 0.142, 843.337},
		{"BM5", 21.964, 739.708, 0.176, 739.884},
		{"BM6", 25.247, 702.956, 0.202, 703.158},
		{"BM1", 30.500, 728.486, 0.244, 728.730},
	}
	var st []Station
	for i, r := range rows {
		st = append(st, Station{Point: r.point, RiseM: r.computedM - bm1, DistanceM: r.cumKm * 1000, Setups: float64(i)})
	}
	sol, err := Proportional(ProportionalInput{Stations: st, HeldM: map[string]float64{"BM1": bm1}, Decimals: 3})
	if err != nil {
		t.Fatal(err)
	}
	if len(sol.Stretches) != 1 || math.Abs(sol.Stretches[0].MisclosureM-(-0.244)) > 1e-9 {
		t.Fatalf("stretches %+v, want one with misclosure -0.244 m", sol.Stretches)
	}
	for i, r := range rows {
		got := sol.Stations[i]
		if math.Abs(got.CorrectionM-r.correctionM) > 0.0005 {
			t.Errorf("%s: correction %.4f m, published %.3f m", r.point, got.CorrectionM, r.correctionM)
		}
		if got.Published != units.Format(r.adjustedM, 3) {
			t.Errorf("%s: adjusted %s m, published %.3f m", r.point, got.Published, r.adjustedM)
		}
	}
	// The correction at the closing mark is minus the misclosure (the rule
	// of the method, common practice).
	closing := sol.Stations[len(rows)-1]
	if math.Abs(closing.CorrectionM+sol.Stretches[0].MisclosureM) > 1e-12 {
		t.Fatalf("closing correction %.6f, misclosure %.6f", closing.CorrectionM, sol.Stretches[0].MisclosureM)
	}
}

// A per-setup distribution on a line between two held marks, with
// intermediate sights. Source: Universiti Sains Malaysia, civil engineering
// lecture notes "Ukur Aras" (levelling), height-of-collimation example with
// adjustment (docs/references.md, worked example 2: OBM1 = 29.23 and OBM2 = 29.66
// held, misclosure +10 mm over 5 setups). The page rounds F to 28.93 although
// 28.935 would round to 28.94, so compare at the millimetre before rounding.
func TestProportionalSetupsWorkedExample(t *testing.T) {
	rows := []struct {
		point      string
		setups     float64
		side       bool
		computedM  float64
		adjustMM   float64
		adjustedRL float64 // the page's adjusted RL, to 0.01 m
	}{
		{"OBM1", 0, false, 29.230, 0, 29.23},
		{"A", 1, true, 29.515, -2, 29.51},
		{"B", 1, false, 29.231, -2, 29.23},
		{"C", 2, true, 29.877, -4, 29.87},
		{"D", 2, false, 31.196, -4, 31.19},
		{"E", 3, false, 29.007, -6, 29.00},
		{"CP", 4, false, 29.052, -8, 29.04},
		{"F", 5, true, 28.945, -10, 28.93},
		{"G", 5, true, 28.836, -10, 28.83},
		{"OBM2", 5, false, 29.670, -10, 29.66},
	}
	var st []Station
	for _, r := range rows {
		st = append(st, Station{Point: r.point, RiseM: r.computedM - 29.230, Setups: r.setups, SideShot: r.side, DistanceM: r.setups * 40})
	}
	sol, err := Proportional(ProportionalInput{
		Stations: st, HeldM: map[string]float64{"OBM1": 29.23, "OBM2": 29.66},
		Distribution: BySetups, Decimals: 3,
	})
	if err != nil {
		t.Fatal(err)
	}
	if m := sol.Stretches[0].MisclosureM; math.Abs(m-0.010) > 1e-9 {
		t.Fatalf("misclosure %.4f m, want +0.010", m)
	}
	for i, r := range rows {
		got := sol.Stations[i]
		if math.Abs(got.CorrectionM*1000-r.adjustMM) > 1e-6 {
			t.Errorf("%s: correction %.3f mm, published %.0f mm", r.point, got.CorrectionM*1000, r.adjustMM)
		}
		if math.Abs(got.AdjustedM-r.adjustedRL) > 0.0051 {
			t.Errorf("%s: adjusted %.4f m, published %.2f m", r.point, got.AdjustedM, r.adjustedRL)
		}
	}
}

// Each stretch between consecutive held marks is adjusted on its own, and
// exact observations need no correction (invariant).
func TestProportionalStretches(t *testing.T) {
	truth := map[string]float64{"TC-0101": 10, "TC-0102": 11.5, "TC-0103": 9.25, "TC-0104": 12, "TC-0105": 12.75}
	order := []string{"TC-0101", "TC-0102", "TC-0103", "TC-0104", "TC-0105"}
	var st []Station
	for i, p := range order {
		st = append(st, Station{Point: p, RiseM: truth[p] - truth[order[0]], DistanceM: float64(i) * 500, Setups: float64(2 * i)})
	}
	// Exact observations: every correction is zero.
	held := map[string]float64{"TC-0101": 10, "TC-0103": 9.25, "TC-0105": 12.75}
	sol, err := Proportional(ProportionalInput{Stations: st, HeldM: held, Decimals: 3})
	if err != nil {
		t.Fatal(err)
	}
	if len(sol.Stretches) != 2 {
		t.Fatalf("%d stretches, want 2", len(sol.Stretches))
	}
	for _, r := range sol.Stations {
		if math.Abs(r.AdjustedM-truth[r.Point]) > 1e-12 {
			t.Errorf("%s adjusted %.6f, true %.6f", r.Point, r.AdjustedM, truth[r.Point])
		}
	}
	// Shift the second held mark by 6 mm: only the first stretch changes.
	held["TC-0103"] = 9.256
	sol, err = Proportional(ProportionalInput{Stations: st, HeldM: held, Decimals: 3})
	if err != nil {
		t.Fatal(err)
	}
	if m := sol.Stretches[0].MisclosureM; math.Abs(m+0.006) > 1e-12 {
		t.Fatalf("first stretch misclosure %.4f, want -0.006", m)
	}
	if got := sol.Stations[1].CorrectionM; math.Abs(got-0.003) > 1e-12 {
		t.Errorf("TC-0102 correction %.4f, want +0.003 (half way)", got)
	}
	if m := sol.Stretches[1].MisclosureM; math.Abs(m-0.006) > 1e-12 {
		t.Fatalf("second stretch misclosure %.4f, want +0.006", m)
	}
	if got := sol.Stations[3].CorrectionM; math.Abs(got+0.003) > 1e-12 {
		t.Errorf("TC-0104 correction %.4f, want -0.003", got)
	}
}

func TestProportionalRefusesOpenRuns(t *testing.T) {
	st := []Station{{Point: "TC-0201"}, {Point: "TC-0202", RiseM: 1, DistanceM: 100, Setups: 1}, {Point: "TC-0203", RiseM: 2, DistanceM: 200, Setups: 2}}
	if _, err := Proportional(ProportionalInput{Stations: st, HeldM: map[string]float64{"TC-0201": 5}}); err == nil || !strings.Contains(err.Error(), "close on held control") {
		t.Fatalf("one held mark on a line: %v", err)
	}
	_, err := Proportional(ProportionalInput{Stations: st, HeldM: map[string]float64{"TC-0201": 5, "TC-0202": 6}})
	if err == nil || !strings.Contains(err.Error(), "TC-0203") {
		t.Fatalf("a mark beyond the held ones: %v", err)
	}
}

// TestPublishedHalfWayRoundsUp: a mark whose adjusted height is exactly
// 0.5055 m publishes 0.506 m under the half-away-from-zero rule
// (docs/adjustments.md, "Precision of a published height"), by both
// methods; the float 0.5055 lies just below the half, so rounding the float
// itself would publish 0.505 (units.TestRoundHalfAwayExact). The line
// A → P → B closes exactly, so P's correction is 0 and its adjusted height
// is its computed one; by least squares P is a spur from A.
func TestPublishedHalfWayRoundsUp(t *testing.T) {
	st := []Station{{Point: "A"}, {Point: "P", RiseM: 0.5055, DistanceM: 100, Setups: 1}, {Point: "B", RiseM: 1, DistanceM: 200, Setups: 2}}
	sol, err := Proportional(ProportionalInput{Stations: st, HeldM: map[string]float64{"A": 0, "B": 1}, Unit: units.Metre, Decimals: 3})
	if err != nil {
		t.Fatal(err)
	}
	if p := sol.Stations[1]; p.AdjustedM != 0.5055 || p.Published != "0.506" {
		t.Errorf("proportional: P adjusted %v m, published %s m; want 0.5055 and 0.506", p.AdjustedM, p.Published)
	}
	length := 100.0
	d, err := ComputeDraft(DraftInput{Method: MethodLeastSquares,
		Runs: []DraftRun{{ID: 1, Class: "third", Sections: []DraftSection{{Seq: 1, From: "A", To: "P", DhM: 0.5055, LengthM: &length, Setups: 1}}}},
		Held: []DraftHeld{{Point: "A", HeightM: 0, Unit: units.Metre}}, Network: NetworkOptions{}.WithDefaults()})
	if err != nil {
		t.Fatal(err)
	}
	for _, m := range d.Marks {
		if m.Point == "P" && (m.AdjustedM != 0.5055 || m.Value != "0.506") {
			t.Errorf("least squares: P adjusted %v m, published %s m; want 0.5055 and 0.506", m.AdjustedM, m.Value)
		}
	}
}
