package adjust

import (
	"math"
	"math/rand/v2"
	"slices"
	"testing"

	"cairn/internal/units"
)

func lenp(m float64) *float64 { return &m }

// A mark sighted only by an intermediate sight, carried from the adjusted
// section, gets by least squares weighted by length the height the
// network gives when the sight's turning point is made a point of it: the
// invariant behind adjust.Draft.sides (corrections of sections in series
// in proportion to their lengths). The loop A–B–C–A is held at A; section
// A–B is two setups through TP, the sight on S taken from the second.
func TestSideShotMatchesNetworkWithTurningPoint(t *testing.T) {
	// A → TP 150 m, +0.200; TP → B 250 m, +0.310; B → C 300 m, −0.150;
	// C → A 400 m, −0.355 (misclosure +5 mm). S: from TP's instrument,
	// backsight 100 m of the 250: +0.100 above TP.
	sides := []DraftSide{{Point: "S", Line: 9, Section: 1, DhM: 0.200 + 0.100, AlongM: lenp(150 + 100), AlongSetups: 1.5}}
	in := DraftInput{Method: MethodLeastSquares, Network: NetworkOptions{}.WithDefaults(), Unit: units.Metre,
		Held: []DraftHeld{{Point: "A", HeightM: 100, Unit: units.Metre}},
		Runs: []DraftRun{{ID: 1, Class: "third", Sides: sides, Sections: []DraftSection{
			{Seq: 1, From: "A", To: "B", DhM: 0.510, LengthM: lenp(400), Setups: 2},
			{Seq: 2, From: "B", To: "C", DhM: -0.150, LengthM: lenp(300), Setups: 1},
			{Seq: 3, From: "C", To: "A", DhM: -0.355, LengthM: lenp(400), Setups: 1},
		}}}}
	d, err := ComputeDraft(in)
	if err != nil {
		t.Fatal(err)
	}
	var got *MarkResult
	for i := range d.Marks {
		if d.Marks[i].Point == "S" {
			got = &d.Marks[i]
		}
	}
	if got == nil || len(d.Stats.Sides) != 1 || d.Stats.Sides[0].From != "A" {
		t.Fatalf("marks %+v sides %+v", d.Marks, d.Stats.Sides)
	}
	// The same network with TP a point and the sight to S from its
	// instrument: A–TP 150 m, TP–B 250 m; S from TP's instrument shares
	// the first 100 m of TP–B.
	net := NewNetwork(4)
	net.AddSection(Section{From: "A", To: "TP", DhM: 0.200, LengthKm: 0.150})
	net.AddSection(Section{From: "TP", To: "B", DhM: 0.310, LengthKm: 0.250})
	net.AddSection(Section{From: "B", To: "C", DhM: -0.150, LengthKm: 0.300})
	net.AddSection(Section{From: "C", To: "A", DhM: -0.355, LengthKm: 0.400})
	net.AddHeld(HeldMark{Point: "A", HeightM: 100})
	sol, err := SolveNetwork(net, NetworkOptions{}.WithDefaults())
	if err != nil {
		t.Fatal(err)
	}
	var tp, b float64
	for _, p := range sol.Points {
		switch p.Point {
		case "TP":
			tp = p.HeightM
		case "B":
			b = p.HeightM
		}
	}
	// The instrument at TP's setup stands 100 m of 250 along TP–B.
	want := tp + 0.100 + (100.0/250)*((b-tp)-0.310)
	if math.Abs(got.AdjustedM-want) > 1e-9 {
		t.Errorf("S = %.6f m, the network with TP gives %.6f m", got.AdjustedM, want)
	}
}

// Sections of two runs levelled the other way between the same marks are
// compared; the closure 4.1 mm over K = 0.25 km fails second-II's 4 mm
// (8 mm·√K, FGCC 1984 §3.5 from memory; derived). A third run's section
// the same way as the first is not a double run.
func TestDoubleRunsBetweenRuns(t *testing.T) {
	in := DraftInput{Method: MethodLeastSquares, Network: NetworkOptions{}.WithDefaults(), Unit: units.Metre,
		Held: []DraftHeld{{Point: "A", HeightM: 100, Unit: units.Metre}},
		Runs: []DraftRun{
			{ID: 1, Class: "second-II", Sections: []DraftSection{{Seq: 1, From: "A", To: "B", DhM: 0.5, LengthM: lenp(250), Setups: 2}}},
			{ID: 2, Class: "second-II", Sections: []DraftSection{{Seq: 1, From: "B", To: "A", DhM: -0.4959, LengthM: lenp(250), Setups: 2}}},
			{ID: 3, Class: "second-II", Sections: []DraftSection{{Seq: 1, From: "A", To: "B", DhM: 0.5, LengthM: lenp(250), Setups: 2}}},
		}}
	d, err := ComputeDraft(in)
	if err != nil {
		t.Fatal(err)
	}
	if len(d.Stats.DoubleRuns) != 1 {
		t.Fatalf("double runs %+v", d.Stats.DoubleRuns)
	}
	dr := d.Stats.DoubleRuns[0]
	if dr.RunID != 1 || dr.BackRunID != 2 || math.Abs(dr.ClosureM-0.0041) > 1e-12 || math.Abs(*dr.AllowableM-0.004) > 1e-12 || *dr.Pass {
		t.Errorf("double run %+v", dr)
	}
	if d.Stats.Failed() < 1 {
		t.Errorf("failed %d, want the double run counted", d.Stats.Failed())
	}
}

// doubleRunPairsByComparison is the pairing of doubleRuns written the
// plain way, every section against every section of every earlier run
// (the form it had before it kept the unpaired sections by their ends):
// the reference its pairs must equal.
func doubleRunPairsByComparison(in DraftInput) [][4]int64 {
	type ref struct{ run, sec int }
	used := map[ref]bool{}
	var out [][4]int64
	for j := range in.Runs {
		for b, back := range in.Runs[j].Sections {
		earlier:
			for i := 0; i < j; i++ {
				for a, fwd := range in.Runs[i].Sections {
					if used[ref{i, a}] || fwd.From != back.To || fwd.To != back.From {
						continue
					}
					used[ref{i, a}], used[ref{j, b}] = true, true
					out = append(out, [4]int64{in.Runs[i].ID, int64(fwd.Seq), in.Runs[j].ID, int64(back.Seq)})
					break earlier
				}
			}
		}
	}
	return out
}

// Sections levelled several times each way over a few marks, in runs that
// repeat and reverse one another, pair as the comparison of every two
// gives, in the same order.
func TestDoubleRunsPairAsComparison(t *testing.T) {
	rng := rand.New(rand.NewPCG(5, 6))
	marks := []string{"TC-1", "TC-2", "TC-3", "TC-4"}
	for trial := range 200 {
		var in DraftInput
		for r := range 1 + rng.IntN(8) {
			run := DraftRun{ID: int64(r + 1), Class: "second-II"}
			for s := range rng.IntN(6) {
				f, to := marks[rng.IntN(len(marks))], marks[rng.IntN(len(marks))]
				run.Sections = append(run.Sections, DraftSection{Seq: s + 1, From: f, To: to, DhM: rng.Float64(), LengthM: lenp(100 + rng.Float64())})
			}
			in.Runs = append(in.Runs, run)
		}
		var d Draft
		d.doubleRuns(in)
		var got [][4]int64
		for _, st := range d.Stats.DoubleRuns {
			got = append(got, [4]int64{st.RunID, int64(st.Seq), st.BackRunID, int64(st.BackSeq)})
		}
		if want := doubleRunPairsByComparison(in); !slices.Equal(got, want) {
			t.Fatalf("trial %d: pairs %v, want %v", trial, got, want)
		}
	}
}
