package adjust_test

import (
	"math"
	"testing"

	"gonum.org/v1/gonum/stat/distuv"

	"cairn/internal/adjust"
	"cairn/internal/netgen"
)

// TestSidakLevel: Šidák's level for each of n tests, αᵢ = 1 − (1 − α)^(1/n)
// (Šidák 1967, from memory; the formula is also the one given for the
// Šidák correction in textbooks of multiple testing), against the formula
// evaluated directly where that is accurate, and for n = 100,000 against
// its series −ln(1 − α)/n = 1.0005003·10⁻⁸ (derived). SnoopLevel inverts
// the critical value: 3.29 is the two-sided level 0.001 rounded (Baarda
// 1968, from memory); 2·(1 − Φ(k)) = erfc(k/√2), here by Go's math.Erfc,
// not gonum: 0.0010019 for 3.29.
func TestSidakLevel(t *testing.T) {
	for _, n := range []int{1, 2, 7, 100} {
		want := 1 - math.Pow(1-0.001, 1/float64(n))
		if got := adjust.SidakLevel(0.001, n); math.Abs(got-want) > 1e-15 {
			t.Errorf("n = %d: %.10g, want %.10g", n, got, want)
		}
	}
	if got := adjust.SidakLevel(0.001, 100000); math.Abs(got-1.0005003e-8) > 1e-15 {
		t.Errorf("n = 100000: %.8g, want 1.0005003e-8", got)
	}
	for _, k := range []float64{3.29, 3.2905, 5.668} {
		if got, want := adjust.SnoopLevel(k), math.Erfc(k/math.Sqrt2); math.Abs(got-want) > 1e-12*want {
			t.Errorf("level of %v: %.10g, erfc gives %.10g", k, got, want)
		}
	}
	if got := 2 * distuv.UnitNormal.CDF(-adjust.SnoopCriticalValue(1e-8)); math.Abs(got-1e-8)/1e-8 > 1e-6 {
		t.Errorf("critical value of 1e-8 gives back %.6g", got)
	}
}

// cleanNetwork is a generated network of junctions only (most sections
// between two junctions, so most sections are tests of their own), with noise of
// 1 mm·√L and nothing else (netgen), and the index of a section to plant a
// blunder in.
func cleanNetwork(t *testing.T, blunderM float64) (*adjust.Network, int) {
	t.Helper()
	g := netgen.Generate(netgen.Options{Points: 40000, PerLine: -1, HeldEvery: 4000, Seed: 13})
	planted := len(g.Sections) / 2
	net := adjust.NewNetwork(len(g.Sections))
	for i, s := range g.Sections {
		if i == planted {
			s.DhM += blunderM
		}
		net.AddSection(adjust.Section{From: s.From, To: s.To, DhM: s.DhM, LengthKm: s.LengthKm})
	}
	for _, i := range g.Held {
		net.AddHeld(adjust.HeldMark{Point: g.Points[i], HeightM: g.Truth[i]})
	}
	return net, planted
}

// TestSnoopingOnALargeNetwork: with no blunder, testing each of n
// observations at α flags about n·α of them by chance (the expectation of
// the count is n·α whatever the correlation of the w's); testing the
// network as a whole at α (Šidák) flags none but with probability about α.
// A planted 5 cm blunder is still found, and is the largest |w|, family-wise.
func TestSnoopingOnALargeNetwork(t *testing.T) {
	net, planted := cleanNetwork(t, 0)
	if net.NumSections() < 70000 {
		t.Fatalf("only %d sections", net.NumSections())
	}
	per, err := adjust.SolveNetwork(net, adjust.NetworkOptions{})
	if err != nil {
		t.Fatal(err)
	}
	st := per.Stats
	want := float64(st.SnoopTestable) * adjust.SnoopLevel(3.29)
	if st.Snooping != adjust.SnoopPerObservation || st.SnoopCritical != 3.29 || math.Abs(st.SnoopExpected-want) > 1e-9 {
		t.Fatalf("per observation: %+v", st)
	}
	// The count is about Poisson(n·α) for nearly independent tests: within
	// five standard deviations of its expectation.
	if d := math.Abs(float64(st.Flagged) - want); d > 5*math.Sqrt(want) {
		t.Errorf("per observation: %d flagged of %d, %.1f expected by chance", st.Flagged, st.SnoopTestable, want)
	}
	t.Logf("per observation: %d of %d flagged, %.1f expected", st.Flagged, st.SnoopTestable, want)

	fam, err := adjust.SolveNetwork(net, adjust.NetworkOptions{Snooping: adjust.SnoopFamily})
	if err != nil {
		t.Fatal(err)
	}
	fs := fam.Stats
	wantCrit := adjust.SnoopCriticalValue(adjust.SidakLevel(adjust.SnoopLevel(3.29), fs.SnoopTests))
	if fs.Snooping != adjust.SnoopFamily || fs.SnoopTests > fs.SnoopTestable || math.Abs(fs.SnoopCritical-wantCrit) > 1e-6 || fs.SnoopCritical < 5 {
		t.Fatalf("family: critical %.4f for %d tests (%d testable), want %.4f", fs.SnoopCritical, fs.SnoopTests, fs.SnoopTestable, wantCrit)
	}
	if fs.Flagged != 0 {
		t.Errorf("family-wise: %d flagged in a clean network (critical value %.2f)", fs.Flagged, fs.SnoopCritical)
	}
	for i := range per.Sections {
		if a, b := per.Sections[i].W, fam.Sections[i].W; a != b && !(math.IsNaN(a) && math.IsNaN(b)) {
			t.Fatalf("section %d: w %v per observation, %v family-wise", i, per.Sections[i].W, fam.Sections[i].W)
		}
	}

	bad, planted := cleanNetwork(t, 0.05)
	sol, err := adjust.SolveNetwork(bad, adjust.NetworkOptions{Snooping: adjust.SnoopFamily})
	if err != nil {
		t.Fatal(err)
	}
	b := sol.Sections[planted]
	if !b.Flagged {
		t.Fatalf("a 5 cm blunder is not flagged family-wise: w %.2f, critical %.2f", b.W, sol.Stats.SnoopCritical)
	}
	// Sections in series with it share its w exactly (see adjust.Residual).
	for i, r := range sol.Sections {
		if i != planted && math.Abs(r.W) > math.Abs(b.W)*(1+1e-9) {
			t.Errorf("section %d has |w| %.2f ≥ the blunder's %.2f", i, math.Abs(r.W), math.Abs(b.W))
		}
	}
	t.Logf("family-wise: critical %.3f for %d tests; blunder w %.2f; %d flagged", sol.Stats.SnoopCritical, sol.Stats.SnoopTests, b.W, sol.Stats.Flagged)
}
