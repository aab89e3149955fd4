package adjust_test

import (
	"errors"
	"math"
	"testing"

	"cairn/internal/adjust"
	"cairn/internal/units"
)

// Drafts are computed without a database: these tests give ComputeDraft
// runs and held marks as the register would gather them, and check the
// draft against published worked examples (docs/references.md).

func ptr[T any](v T) *T { return &v }

// circuit is the level circuit of docs/references.md, worked example 1 (a
// published sample problem of a level-circuit adjustment, read; answers
// derived): BM1 = 728.730 m held, six sections, 30.500 km, computed
// heights as published. Sections carry the published cumulative distances
// as lengths and one setup each.
func circuit(class string) adjust.DraftRun {
	pts := []struct {
		point            string
		cumKm, computedM float64
	}{
		{"BM1", 0, 728.730}, {"BM2", 5.245, 783.213}, {"BM3", 11.271, 891.764}, {"BM4", 17.718, 843.195},
		{"BM5", 21.964, 739.708}, {"BM6", 25.247, 702.956}, {"BM1", 30.500, 728.486},
	}
	run := adjust.DraftRun{ID: 7, Class: class}
	for i := 1; i < len(pts); i++ {
		a, b := pts[i-1], pts[i]
		run.Sections = append(run.Sections, adjust.DraftSection{Seq: i, From: a.point, To: b.point,
			DhM: b.computedM - a.computedM, LengthM: ptr((b.cumKm - a.cumKm) * 1000), Setups: 1,
			FirstLine: 2 * i, LastLine: 2*i + 1})
	}
	return run
}

// The published adjusted heights of worked example 1, to the millimetre.
var circuitAdjusted = map[string]string{"BM2": "783.255", "BM3": "891.854", "BM4": "843.337", "BM5": "739.884", "BM6": "703.158"}

func TestProportionalDraftOfACircuit(t *testing.T) {
	d, err := adjust.ComputeDraft(adjust.DraftInput{Method: adjust.MethodProportional, Runs: []adjust.DraftRun{circuit("third")},
		Held: []adjust.DraftHeld{{Point: "BM1", HeightM: 728.730, Unit: units.Metre}}, Decimals: ptr(3)})
	if err != nil {
		t.Fatal(err)
	}
	if d.Unit != units.Metre || d.Decimals != 3 || d.Class != "third" || len(d.Marks) != 6 {
		t.Fatalf("draft %+v", d)
	}
	if d.Marks[0].Point != "BM1" || d.Marks[0].HeldAs != adjust.HeldFixed || d.Marks[0].Value != "" {
		t.Errorf("first result %+v, want BM1 held and not published", d.Marks[0])
	}
	for _, m := range d.Marks[1:] {
		if m.HeldAs != adjust.NotHeld || m.Value != circuitAdjusted[m.Point] {
			t.Errorf("%s: %q (held %v), published %s", m.Point, m.Value, m.HeldAs, circuitAdjusted[m.Point])
		}
	}
	st := d.Stats.Stretches
	if len(st) != 1 || math.Abs(st[0].MisclosureM-(-0.244)) > 1e-9 || st[0].RunID != 7 || math.Abs(st[0].LengthM-30500) > 1e-6 {
		t.Fatalf("stretches %+v, want one of run 7 misclosing by -0.244 m over 30.5 km", st)
	}
	// Third order allows 12 mm·√K (FGCC 1984, docs/references.md, from
	// memory): 66 mm over 30.5 km, so a 244 mm misclosure fails, and is the
	// draft's one failed check.
	if st[0].AllowableM == nil || math.Abs(*st[0].AllowableM-0.012*math.Sqrt(30.5)) > 1e-9 || *st[0].Pass || d.Stats.Failed() != 1 {
		t.Errorf("allowable %v, pass %v, failed %d; want 12 mm·√30.5 km, a failure", st[0].AllowableM, st[0].Pass, d.Stats.Failed())
	}
}

// A single circuit with one held mark has one condition, so least squares
// weighted by length distributes its misclosure in proportion to distance
// exactly as the proportional method does (common practice): both drafts
// give the published heights.
func TestLeastSquaresDraftOfACircuitAgreesWithProportional(t *testing.T) {
	d, err := adjust.ComputeDraft(adjust.DraftInput{Method: adjust.MethodLeastSquares, Runs: []adjust.DraftRun{circuit("")},
		Held: []adjust.DraftHeld{{Point: "BM1", HeightM: 728.730, Unit: units.Metre}}, Decimals: ptr(3),
		Network: adjust.NetworkOptions{}.WithDefaults()})
	if err != nil {
		t.Fatal(err)
	}
	for _, m := range d.Marks {
		if m.Point == "BM1" {
			if m.HeldAs != adjust.HeldFixed || m.CorrectionM == nil || *m.CorrectionM != 0 {
				t.Errorf("BM1 %+v, want held fixed with no correction", m)
			}
			continue
		}
		if m.Value != circuitAdjusted[m.Point] || m.SigmaM == nil || !(*m.SigmaM > 0) {
			t.Errorf("%s: %q (sigma %v), published %s", m.Point, m.Value, m.SigmaM, circuitAdjusted[m.Point])
		}
	}
	n := d.Stats.Network
	if n == nil || n.Redundancy != 1 || n.Points != 6 || n.Sections != 6 || len(d.Sections) != 6 {
		t.Fatalf("network %+v, %d sections; want 6 points, 6 sections, redundancy 1", n, len(d.Sections))
	}
	// Each section's residual is its share of the misclosure, by length:
	// v = +0.244 m × L/30.5 km.
	for _, s := range d.Sections {
		i := s.Seq - 1
		l := *circuit("").Sections[i].LengthM
		if s.RunID != 7 || s.FirstLine != 2*s.Seq || math.Abs(s.ResidualM-0.244*l/30500) > 1e-9 {
			t.Errorf("section %d: %+v, want residual %.6f", s.Seq, s, 0.244*l/30500)
		}
	}
	// The circuit misclosed by 244 mm on 1 mm·√km: the χ² test fails, and
	// that is one failed check, as is every flagged section.
	if n.ChiSquarePass || d.Stats.Failed() != 1+n.Flagged {
		t.Errorf("chi-square pass %v, failed %d, flagged %d", n.ChiSquarePass, d.Stats.Failed(), n.Flagged)
	}
}

// line is the run between OBM1 and OBM2 of docs/references.md, worked
// example 2 (Universiti Sains Malaysia, "Ukur Aras" lecture notes, the
// height-of-collimation example): its change points and marks, with the
// intermediate sights left out (a draft sees sections between marks).
func line() adjust.DraftRun {
	pts := []struct {
		point     string
		setups    int
		computedM float64
	}{{"OBM1", 0, 29.230}, {"B", 1, 29.231}, {"D", 2, 31.196}, {"E", 3, 29.007}, {"CP", 4, 29.052}, {"OBM2", 5, 29.670}}
	run := adjust.DraftRun{ID: 2, Class: "unknown"}
	for i := 1; i < len(pts); i++ {
		a, b := pts[i-1], pts[i]
		run.Sections = append(run.Sections, adjust.DraftSection{Seq: i, From: a.point, To: b.point,
			DhM: b.computedM - a.computedM, Setups: b.setups - a.setups})
	}
	return run
}

func TestDraftsOfALineBySetups(t *testing.T) {
	held := []adjust.DraftHeld{{Point: "OBM1", HeightM: 29.23, Unit: units.Metre}, {Point: "OBM2", HeightM: 29.66, Unit: units.Metre}}
	// The page's adjusted RLs, to 0.01 m (its F is rounded down; F is a
	// side shot, not here).
	want := map[string]float64{"B": 29.23, "D": 31.19, "E": 29.00, "CP": 29.04}
	prop, err := adjust.ComputeDraft(adjust.DraftInput{Method: adjust.MethodProportional, Runs: []adjust.DraftRun{line()},
		Held: held, Distribution: adjust.BySetups})
	if err != nil {
		t.Fatal(err)
	}
	if prop.Class != "" || prop.Decimals != units.Metre.DefaultDecimals() {
		t.Errorf("class %q, decimals %d; want no class and the unit's own decimals", prop.Class, prop.Decimals)
	}
	if st := prop.Stats.Stretches; len(st) != 1 || math.Abs(st[0].MisclosureM-0.010) > 1e-9 || st[0].AllowableM != nil || prop.Stats.Failed() != 0 {
		t.Fatalf("stretches %+v, want one misclosing by +0.010 m, not judged", st)
	}
	// By least squares weighted by setups, a line between two fixed marks
	// spreads its misclosure by setups too (common practice).
	lsq, err := adjust.ComputeDraft(adjust.DraftInput{Method: adjust.MethodLeastSquares, Runs: []adjust.DraftRun{line()},
		Held: held, Network: adjust.NetworkOptions{Weighting: adjust.WeightBySetups}.WithDefaults()})
	if err != nil {
		t.Fatal(err)
	}
	adjusted := map[string]float64{}
	for _, m := range lsq.Marks {
		adjusted[m.Point] = m.AdjustedM
	}
	for _, m := range prop.Marks {
		if w, ok := want[m.Point]; ok && math.Abs(m.AdjustedM-w) > 0.0051 {
			t.Errorf("%s: proportional %.4f m, published %.2f m", m.Point, m.AdjustedM, w)
		}
		if math.Abs(adjusted[m.Point]-m.AdjustedM) > 1e-9 {
			t.Errorf("%s: least squares %.6f m, proportional %.6f m", m.Point, adjusted[m.Point], m.AdjustedM)
		}
	}
}

// The weighted level net of Ghilani & Wolf, Adjustment Computations, 4th
// ed., 2006, Example 12.1 (docs/references.md; from memory, cross-checked
// by TestPublishedLevelNet and against gonum), with the observations in two
// runs and A held fixed: the draft publishes C and D as recalled, keeps each
// section's run and number, and reports B held weighted when asked.
func TestLeastSquaresDraftOfANet(t *testing.T) {
	obs := []struct {
		from, to string
		dh, sd   float64
	}{
		{"A", "B", 10.509, 0.006}, {"B", "C", 5.360, 0.004}, {"C", "D", -8.523, 0.005},
		{"D", "A", -7.348, 0.003}, {"B", "D", -3.167, 0.004}, {"A", "C", 15.881, 0.012},
	}
	runs := []adjust.DraftRun{{ID: 11}, {ID: 12}}
	for i, o := range obs {
		// Length (σ/σ₀)² km with σ₀ = 1 mm, so that weight = 1/σ².
		l := (o.sd / 0.001) * (o.sd / 0.001) * 1000
		r := &runs[i/3]
		r.Sections = append(r.Sections, adjust.DraftSection{Seq: i%3 + 1, From: o.from, To: o.to, DhM: o.dh, LengthM: ptr(l), Setups: 1})
	}
	in := adjust.DraftInput{Method: adjust.MethodLeastSquares, Runs: runs,
		Held: []adjust.DraftHeld{{Point: "A", HeightM: 437.596, Unit: units.Metre}}, Decimals: ptr(3),
		Network: adjust.NetworkOptions{}.WithDefaults()}
	d, err := adjust.ComputeDraft(in)
	if err != nil {
		t.Fatal(err)
	}
	got := map[string]adjust.MarkResult{}
	for _, m := range d.Marks {
		got[m.Point] = m
	}
	if got["C"].Value != "453.468" || got["D"].Value != "444.944" || got["A"].HeldAs != adjust.HeldFixed {
		t.Errorf("C %q, D %q, A held %v; published 453.468, 444.944", got["C"].Value, got["D"].Value, got["A"].HeldAs)
	}
	if len(d.Sections) != 6 || d.Sections[3].RunID != 12 || d.Sections[3].Seq != 1 || d.Sections[3].From != "D" || d.Stats.Network.Redundancy != 3 {
		t.Fatalf("sections %+v, network %+v", d.Sections, d.Stats.Network)
	}

	// B held weighted besides A: one more observation, B adjusted off its
	// held value, and its pseudo-observation reported.
	in.Held = append(in.Held, adjust.DraftHeld{Point: "B", HeightM: got["B"].AdjustedM + 0.004, Unit: units.Metre, SigmaM: 0.002})
	w, err := adjust.ComputeDraft(in)
	if err != nil {
		t.Fatal(err)
	}
	var b adjust.MarkResult
	for _, m := range w.Marks {
		if m.Point == "B" {
			b = m
		}
	}
	n := w.Stats.Network
	if b.HeldAs != adjust.HeldWeighted || b.Value != "" || b.CorrectionM == nil || !(*b.CorrectionM < 0) ||
		n.Observations != 7 || len(n.Held) != 1 || n.Held[0].Mark != "B" || math.Abs(n.Held[0].ResidualM-*b.CorrectionM) > 1e-12 {
		t.Errorf("B %+v, network %+v", b, n)
	}

	// Minimally constrained: A fixed, B a check mark, adjusted from A.
	in.Network.Minimal = true
	m, err := adjust.ComputeDraft(in)
	if err != nil {
		t.Fatal(err)
	}
	for _, r := range m.Marks {
		if r.Point == "B" && (r.HeldAs != adjust.HeldCheck || math.Abs(r.AdjustedM-got["B"].AdjustedM) > 1e-9) {
			t.Errorf("minimal: B %+v, want a check mark at %.6f", r, got["B"].AdjustedM)
		}
	}
	if len(m.Stats.Network.Held) != 0 || m.Stats.Network.Observations != 6 {
		t.Errorf("minimal: network %+v, want no weighted held mark", m.Stats.Network)
	}
}

func TestDraftRefusesBadInput(t *testing.T) {
	fixed := []adjust.DraftHeld{{Point: "BM1", HeightM: 728.730, Unit: units.Metre}}
	lsq := adjust.NetworkOptions{}.WithDefaults()
	bySetups := adjust.NetworkOptions{Weighting: adjust.WeightBySetups}.WithDefaults()
	noLength := circuit("")
	noLength.Sections[2].LengthM = nil
	open := circuit("")
	open.Sections = open.Sections[:3]
	for _, c := range []struct {
		name  string
		in    adjust.DraftInput
		field string
	}{
		{"no hold", adjust.DraftInput{Method: adjust.MethodProportional, Runs: []adjust.DraftRun{circuit("")}}, "hold"},
		{"held off the runs", adjust.DraftInput{Method: adjust.MethodProportional, Runs: []adjust.DraftRun{circuit("")},
			Held: []adjust.DraftHeld{{Point: "TC-0999", Unit: units.Metre}}}, "hold"},
		{"reached twice", adjust.DraftInput{Method: adjust.MethodProportional, Runs: []adjust.DraftRun{circuit(""), circuit("")}, Held: fixed}, "run"},
		{"no length", adjust.DraftInput{Method: adjust.MethodProportional, Runs: []adjust.DraftRun{noLength}, Held: fixed}, "distribute"},
		{"no length weighed", adjust.DraftInput{Method: adjust.MethodLeastSquares, Runs: []adjust.DraftRun{noLength}, Held: fixed, Network: lsq}, "weight"},
		{"weighted proportional", adjust.DraftInput{Method: adjust.MethodProportional, Runs: []adjust.DraftRun{circuit("")},
			Held: []adjust.DraftHeld{{Point: "BM1", HeightM: 728.730, Unit: units.Metre, SigmaM: 0.005}}}, "hold"},
		{"open run", adjust.DraftInput{Method: adjust.MethodProportional, Runs: []adjust.DraftRun{open}, Held: fixed}, "hold"},
		{"uncontrolled", adjust.DraftInput{Method: adjust.MethodLeastSquares, Runs: []adjust.DraftRun{circuit(""), line()}, Held: fixed, Network: bySetups}, "hold"},
		{"empty run", adjust.DraftInput{Method: adjust.MethodProportional, Runs: []adjust.DraftRun{{ID: 3}, circuit("")}, Held: fixed}, "run"},
	} {
		_, err := adjust.ComputeDraft(c.in)
		var de *adjust.DraftError
		if !errors.As(err, &de) || de.Field != c.field {
			t.Errorf("%s: %v, want a draft error in %q", c.name, err, c.field)
		}
	}
}

func TestHoldKind(t *testing.T) {
	for _, c := range []struct {
		k       int
		sigmaM  float64
		minimal bool
		want    adjust.HeldKind
	}{
		{0, 0, false, adjust.HeldFixed},
		{1, 0.005, false, adjust.HeldWeighted},
		{0, 0.005, true, adjust.HeldFixed}, // the first is held fixed under a minimal constraint
		{1, 0, true, adjust.HeldCheck},
		{2, 0.005, true, adjust.HeldCheck},
	} {
		if got := adjust.HoldKind(c.k, c.sigmaM, c.minimal); got != c.want {
			t.Errorf("HoldKind(%d, %g, %v) = %v, want %v", c.k, c.sigmaM, c.minimal, got, c.want)
		}
	}
}

func TestNetworkOptionsDefaultsAndValidate(t *testing.T) {
	o := adjust.NetworkOptions{}.WithDefaults()
	if o.SigmaM != adjust.DefaultSigmaM || o.Alpha != adjust.DefaultAlpha || o.SnoopCritical != adjust.DefaultSnoopCritical || o.Validate() != nil {
		t.Fatalf("defaults %+v", o)
	}
	for _, c := range []struct {
		set   func(*adjust.NetworkOptions)
		field string
	}{
		{func(o *adjust.NetworkOptions) { o.SigmaM = -0.001 }, "sigma_m"},
		{func(o *adjust.NetworkOptions) { o.SigmaM = math.Inf(1) }, "sigma_m"},
		{func(o *adjust.NetworkOptions) { o.Alpha = 1 }, "alpha"},
		{func(o *adjust.NetworkOptions) { o.Alpha = math.NaN() }, "alpha"},
		{func(o *adjust.NetworkOptions) { o.SnoopCritical = -3 }, "snoop_critical"},
		{func(o *adjust.NetworkOptions) { o.Weighting = 7 }, "weighting"},
	} {
		o := adjust.NetworkOptions{}.WithDefaults()
		c.set(&o)
		var oe *adjust.OptionError
		if err := o.Validate(); !errors.As(err, &oe) || oe.Field != c.field {
			t.Errorf("%+v: %v, want an error in %s", o, err, c.field)
		}
	}
}

// TestStretchMisclosureAtTheLimit: adjust judges a stretch with the same
// rule as run check (standards.Within): a line A → B → C of 1.000 km between
// two held marks in third order, allowable 12 mm·√1 km = 0.0120 m (FGCC
// 1984 §3.5 loop column, from memory), passes with a misclosure of exactly
// 0.0120 m and fails with 0.0121 m (one unit of the last place of a reading
// over). The decimals sum in float64 to 0.012000000000000455, over the
// limit by float noise only; without the rule's slack it would fail.
func TestStretchMisclosureAtTheLimit(t *testing.T) {
	for m, pass := range map[float64]bool{0.0120: true, -0.0120: true, 0.0119: true, 0.0121: false, -0.0121: false} {
		run := adjust.DraftRun{ID: 1, Class: "third", Sections: []adjust.DraftSection{
			{Seq: 1, From: "A", To: "B", DhM: 1.2345, LengthM: ptr(400.0), Setups: 4},
			{Seq: 2, From: "B", To: "C", DhM: 0.1 + m, LengthM: ptr(600.0), Setups: 6},
		}}
		d, err := adjust.ComputeDraft(adjust.DraftInput{Method: adjust.MethodProportional, Runs: []adjust.DraftRun{run},
			Held: []adjust.DraftHeld{{Point: "A", HeightM: 10, Unit: units.Metre}, {Point: "C", HeightM: 11.3345, Unit: units.Metre}}})
		if err != nil {
			t.Fatal(err)
		}
		st := d.Stats.Stretches
		if len(st) != 1 || st[0].Pass == nil || *st[0].AllowableM != 0.012 {
			t.Fatalf("misclosure %v: stretches %+v", m, st)
		}
		if *st[0].Pass != pass || (d.Stats.Failed() == 0) != pass {
			t.Errorf("misclosure %v m (computed %.17g m) against 0.012 m: pass %v, failed checks %d; want pass %v",
				m, st[0].MisclosureM, *st[0].Pass, d.Stats.Failed(), pass)
		}
	}
}
