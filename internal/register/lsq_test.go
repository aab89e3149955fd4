package register_test

import (
	"errors"
	"fmt"
	"math"
	"strings"
	"testing"

	"gonum.org/v1/gonum/mat"

	"cairn/internal/adjust"
	. "cairn/internal/register"
	"cairn/internal/registertest"
	"cairn/internal/store"
)

// netSection is one section of an invented Tallis County network.
type netSection struct {
	from, to string
	dhM, km  float64
}

// tallisNet is a small invented network: three runs over five marks, two
// of them (TC-0413 and TC-0416) reached by more than one run. Observed
// differences are invented true differences plus about a millimetre.
// TC-0412 (10.0000 m) and TC-0415 (10.9012 m) are held.
var tallisNet = [][]netSection{
	{{"TC-0412", "TC-0413", 1.2357, 1.2}, {"TC-0413", "TC-0414", 0.5421, 0.9}, {"TC-0414", "TC-0415", -0.8757, 1.1}},
	{{"TC-0415", "TC-0416", 0.3199, 0.8}, {"TC-0416", "TC-0413", 0.0133, 1.3}, {"TC-0413", "TC-0412", -1.2356, 1.0}},
	{{"TC-0414", "TC-0416", -0.5545, 0.7}},
}

// netBook lays sections out as a level book, one setup each: the rise on
// the backsight (1 m plus the rise) or the fall on the foresight, half the
// length on each measured sight. It returns the book and, per section, the
// book lines of its backsight and foresight.
func netBook(name string, secs []netSection) ([]byte, [][2]int) {
	var b strings.Builder
	b.WriteString("# Invented Tallis County network for tests.\n# run: " + name + "\n# date: 2024-06-03\n# units: m\npoint,sight,middle,distance,note\n")
	line := 5
	var lines [][2]int
	for _, s := range secs {
		bs, fs := 1.0, 1.0
		if s.dhM > 0 {
			bs += s.dhM
		} else {
			fs -= s.dhM
		}
		half := s.km * 500
		fmt.Fprintf(&b, "%s,BS,%.4f,%.1f,\n%s,FS,%.4f,%.1f,\n", s.from, bs, half, s.to, fs, half)
		lines = append(lines, [2]int{line + 1, line + 2})
		line += 2
	}
	return []byte(b.String()), lines
}

// setupNet gives a register with datum NAVD88, the marks of tallisNet (and
// TC-0430, TC-0431 far off, with a run of their own as the last run), the
// held heights, and the runs recorded from net (the bundle's Runs); it
// returns, per run and section, the book lines of the section's backsight
// and foresight.
func setupNet(t *testing.T, net [][]netSection) (*registertest.Bundle, [][][2]int) {
	t.Helper()
	b := registertest.Setup(t)
	b.Datum(t, registertest.DatumOpts{})
	// TC-0412 at 41.600,-97.900; the others 0.02° of latitude (2.2 km)
	// apart; TC-0430 and TC-0431 a degree away.
	pos := map[string][2]float64{"TC-0412": {41.60, -97.90}, "TC-0413": {41.62, -97.90}, "TC-0414": {41.64, -97.90},
		"TC-0415": {41.66, -97.90}, "TC-0416": {41.68, -97.90}, "TC-0430": {42.60, -97.90}, "TC-0431": {42.62, -97.90}}
	for _, d := range []string{"TC-0412", "TC-0413", "TC-0414", "TC-0415", "TC-0416", "TC-0430", "TC-0431"} {
		lat, lon := pos[d][0], pos[d][1]
		b.Mark(t, registertest.MarkOpts{Designation: d, Lat: &lat, Lon: &lon})
	}
	outside(t, b, "TC-0412", "10.0000", "Outside control (invented citation)")
	outside(t, b, "TC-0415", "10.9012", "Outside control (invented citation)")
	var lines [][][2]int
	all := append(append([][]netSection{}, net...), []netSection{{"TC-0430", "TC-0431", 0.4321, 1.0}})
	for i, secs := range all {
		book, ls := netBook(fmt.Sprintf("Tallis run %c", 'A'+i), secs)
		// A line of a network closes only in the network: record it with
		// its closure check set aside, as an office would.
		b.Run(t, registertest.RunOpts{Path: fmt.Sprintf("tallis-%c.csv", 'a'+i), Book: book,
			AcceptFailedChecks: true, Reason: "a line of the Tallis network, checked by its least-squares adjustment"})
		lines = append(lines, ls)
	}
	return b, lines
}

// lsq adjusts runs by least squares holding hold fixed.
func lsq(runs []int64, hold ...string) registertest.AdjustmentOpts {
	return registertest.AdjustmentOpts{Runs: runs, Hold: hold, Method: MethodLeastSquares}
}

// denseLSQ adjusts a network with TC-0412 and TC-0415 held fixed by the
// textbook normal equations, x = (AᵀPA)⁻¹AᵀPl with P = diag(1/length), in
// gonum's dense algebra, and returns heights and σ = σ₀·√(N⁻¹)ᵢᵢ for σ₀ =
// 1 mm·√km (Ghilani & Wolf, Adjustment Computations, ch. 12, from memory).
func denseLSQ(t *testing.T, net [][]netSection) map[string][2]float64 {
	held := map[string]float64{"TC-0412": 10.0000, "TC-0415": 10.9012}
	idx := map[string]int{}
	var names []string
	var secs []netSection
	for _, r := range net {
		for _, s := range r {
			secs = append(secs, s)
			for _, p := range []string{s.from, s.to} {
				if _, h := held[p]; !h {
					if _, ok := idx[p]; !ok {
						idx[p] = len(names)
						names = append(names, p)
					}
				}
			}
		}
	}
	u := len(names)
	n, rhs := mat.NewSymDense(u, nil), mat.NewVecDense(u, nil)
	for _, s := range secs {
		a := make([]float64, u)
		l := s.dhM
		if j, ok := idx[s.to]; ok {
			a[j] = 1
		} else {
			l -= held[s.to]
		}
		if j, ok := idx[s.from]; ok {
			a[j] = -1
		} else {
			l += held[s.from]
		}
		w := 1 / s.km
		for i := range a {
			rhs.SetVec(i, rhs.AtVec(i)+w*a[i]*l)
			for j := i; j < u; j++ {
				n.SetSym(i, j, n.At(i, j)+w*a[i]*a[j])
			}
		}
	}
	var inv mat.Dense
	if err := inv.Inverse(n); err != nil {
		t.Fatal(err)
	}
	var x mat.VecDense
	x.MulVec(&inv, rhs)
	out := map[string][2]float64{}
	for p, j := range idx {
		out[p] = [2]float64{x.AtVec(j), 0.001 * math.Sqrt(inv.At(j, j))}
	}
	return out
}

// Runs sharing marks, adjusted by least squares from the register, give
// the heights and σ of the same sections solved directly (SolveNetwork) and
// of the dense textbook solution; a mark reached by two runs is one result.
func TestLeastSquaresSharedMarks(t *testing.T) {
	t.Parallel()
	b, lines := setupNet(t, tallisNet)
	v := b.Adjustment(t, lsq(b.Runs[:3], "TC-0412", "TC-0415"))
	if len(v.Results) != 5 || len(v.Sections) != 7 {
		t.Fatalf("%d results and %d sections, want 5 and 7", len(v.Results), len(v.Sections))
	}
	net := adjust.NewNetwork(7)
	for _, r := range tallisNet {
		for _, s := range r {
			net.AddSection(adjust.Section{From: s.from, To: s.to, DhM: s.dhM, LengthKm: s.km})
		}
	}
	net.AddHeld(adjust.HeldMark{Point: "TC-0412", HeightM: 10})
	net.AddHeld(adjust.HeldMark{Point: "TC-0415", HeightM: 10.9012})
	sol, err := adjust.SolveNetwork(net, adjust.NetworkOptions{})
	if err != nil {
		t.Fatal(err)
	}
	direct := map[string]adjust.PointResult{}
	for _, p := range sol.Points {
		direct[p.Point] = p
	}
	dense := denseLSQ(t, tallisNet)
	for _, r := range v.Results {
		d := direct[r.Designation]
		if math.Abs(r.AdjustedM-d.HeightM) > 1e-9 || math.Abs(*r.SigmaM-d.SDM) > 1e-12 {
			t.Errorf("%s: %.6f ± %.6f, direct %.6f ± %.6f", r.Designation, r.AdjustedM, *r.SigmaM, d.HeightM, d.SDM)
		}
		if r.Held {
			if *r.CorrectionM != 0 || r.Value != nil || *r.SigmaM != 0 {
				t.Errorf("held %s: %+v", r.Designation, r)
			}
			continue
		}
		g := dense[r.Designation]
		if math.Abs(r.AdjustedM-g[0]) > 1e-9 || math.Abs(*r.SigmaM-g[1]) > 1e-9 {
			t.Errorf("%s: %.6f ± %.6f, dense %.6f ± %.6f", r.Designation, r.AdjustedM, *r.SigmaM, g[0], g[1])
		}
		if r.ComputedM != nil || r.CorrectionM != nil || *r.Unit != "m" || *r.Value != fmt.Sprintf("%.3f", r.AdjustedM) {
			t.Errorf("%s: %+v", r.Designation, r)
		}
	}
	st := v.Statistics.Network
	if st == nil || st.Redundancy != 4 || st.Unknowns != 3 || st.Sections != 7 || math.Abs(st.VTPV-sol.Stats.VTPV) > 1e-12 || st.Flagged != 0 {
		t.Fatalf("statistics %+v, want redundancy 4 and vTPv %g", st, sol.Stats.VTPV)
	}
	if v.Failed() != 0 {
		t.Fatalf("%d checks failed: %+v lower %v upper %v", v.Failed(), st, *st.ChiSquareLower, *st.ChiSquareUpper)
	}

	// Stored and read back, the same.
	again, err := b.Reg.Adjustment(b.Ctx, v.Adjustment.ID)
	if err != nil {
		t.Fatal(err)
	}
	if len(again.Sections) != 7 || *again.Sections[4].W != *v.Sections[4].W ||
		again.Sections[4].ResidualM != v.Sections[4].ResidualM || again.Statistics.Network.VTPV != st.VTPV ||
		again.Parameters.Weighting != "length" || again.Parameters.SigmaMM != 1 || len(again.Runs) != 3 {
		t.Fatalf("read back: %+v / %+v", again.Sections, again.Parameters)
	}
	if l := lines[1][1]; again.Sections[4].RunID != b.Runs[1] || again.Sections[4].FirstLine != l[0] || again.Sections[4].LastLine != l[1] {
		t.Fatalf("section 5: %+v, want run %d lines %v", again.Sections[4], b.Runs[1], l)
	}
}

// The draft publishes, trace shows the adjustment with its runs, and stale
// finds its heights once a held mark gets a new version.
func TestLeastSquaresPublishTraceStale(t *testing.T) {
	t.Parallel()
	b, _ := setupNet(t, tallisNet)
	v := b.Adjustment(t, lsq(b.Runs[:3], "TC-0412", "TC-0415"))
	pub := b.Publication(t, v.Adjustment.ID, registertest.PublicationOpts{Reason: "network of three runs"})
	if len(pub.Versions) != 3 {
		t.Fatalf("%d versions published, want 3", len(pub.Versions))
	}
	if h := current(t, b, "TC-0413"); h.AdjustmentID == nil || *h.AdjustmentID != v.Adjustment.ID || *h.Value != *v.Results[1].Value {
		t.Fatalf("TC-0413 now %+v, want %s from adjustment %d", h, *v.Results[1].Value, v.Adjustment.ID)
	}
	tr, err := b.Reg.Trace(b.Ctx, TraceParams{Designation: "TC-0416"})
	if err != nil {
		t.Fatal(err)
	}
	a := tr.Versions[0].Adjustment
	if a == nil || a.Method != string(MethodLeastSquares) || len(a.Runs) != 3 || len(a.Held) != 2 {
		t.Fatalf("trace: %+v", tr.Versions[0])
	}
	if s, err := b.Reg.Stale(b.Ctx, StaleParams{}); err != nil || len(s.Heights) != 0 {
		t.Fatalf("stale before: %v %v", s, err)
	}
	outside(t, b, "TC-0415", "10.9020", "Outside control, revised (invented citation)")
	list, err := b.Reg.Stale(b.Ctx, StaleParams{})
	if err != nil {
		t.Fatal(err)
	}
	s := list.Heights
	if len(s) != 3 || s[0].Reasons[0].Kind != store.CauseHeldSuperseded || s[0].Reasons[0].Mark != "TC-0415" {
		t.Fatalf("stale after: %+v", s)
	}
}

// A planted 5 cm blunder in the second section of the first run's book is
// the flagged section with the largest |w|, with its run and book lines,
// and fails the adjustment's checks.
func TestLeastSquaresFlagsPlantedBlunder(t *testing.T) {
	t.Parallel()
	net := [][]netSection{append([]netSection{}, tallisNet[0]...), tallisNet[1], tallisNet[2]}
	net[0][1].dhM += 0.05
	b, lines := setupNet(t, net)
	v := b.Adjustment(t, lsq(b.Runs[:3], "TC-0412", "TC-0415"))
	var top *store.AdjustmentSection
	for i, s := range v.Sections {
		if s.Flagged && (top == nil || math.Abs(*s.W) > math.Abs(*top.W)) {
			top = &v.Sections[i]
		}
	}
	l := lines[0][1]
	if top == nil || top.RunID != b.Runs[0] || top.Seq != 2 || top.FirstLine != l[0] || top.LastLine != l[1] {
		t.Fatalf("largest flagged %+v, want run %d section 2 lines %v", top, b.Runs[0], l)
	}
	if v.Failed() == 0 || v.Statistics.Network.ChiSquarePass {
		t.Fatalf("failed %d, statistics %+v", v.Failed(), v.Statistics.Network)
	}
}

// --marks and --area choose the runs with a section from or to the marks.
func TestLeastSquaresChoosesRuns(t *testing.T) {
	t.Parallel()
	b, _ := setupNet(t, tallisNet)
	ids := func(v *AdjustmentView) []int64 { return v.Adjustment.RunIDs }
	o := lsq(nil, "TC-0415")
	o.DryRun, o.Edit = true, func(p *AdjustParams) { p.RunIDs, p.Marks = nil, []string{"TC-0416"} }
	v := b.Adjustment(t, o)
	if got := fmt.Sprint(ids(v)); got != fmt.Sprint(b.Runs[1:3]) {
		t.Fatalf("--marks TC-0416 chose %s, want %v", got, b.Runs[1:3])
	}
	o = lsq([]int64{b.Runs[2]}, "TC-0412")
	o.DryRun, o.Edit = true, func(p *AdjustParams) { p.Near, p.RadiusM = &store.LatLon{Lat: 41.601, Lon: -97.90}, 500 }
	v = b.Adjustment(t, o)
	// Run C by number, then A and B through TC-0412, the only mark within 500 m.
	if got, want := fmt.Sprint(ids(v)), fmt.Sprint([]int64{b.Runs[2], b.Runs[0], b.Runs[1]}); got != want {
		t.Fatalf("--area chose %s, want %s", got, want)
	}
	if v.Parameters.Area == "" {
		t.Fatal("the area is not recorded")
	}
}

// Weighted and minimal holds: a weighted mark moves by its pseudo-
// observation's residual; a minimal adjustment holds only the first mark
// and reports the others as check marks, never published.
func TestLeastSquaresWeightedAndMinimal(t *testing.T) {
	t.Parallel()
	b, _ := setupNet(t, tallisNet)
	o := lsq(b.Runs[:3], "TC-0412", "TC-0415")
	o.SigmaMM = map[string]float64{"TC-0415": 5}
	v := b.Adjustment(t, o)
	var w store.AdjustmentResult
	for _, r := range v.Results {
		if r.Designation == "TC-0415" {
			w = r
		}
	}
	h := v.Statistics.Network.Held
	if !w.Held || w.Value != nil || !(*w.SigmaM > 0) || len(h) != 1 || math.Abs(h[0].ResidualM-*w.CorrectionM) > 1e-12 ||
		v.Parameters.HoldSDMM["TC-0415"] != 5 || v.Statistics.Network.Observations != 8 {
		t.Fatalf("weighted TC-0415 %+v, held %+v, parameters %+v", w, h, v.Parameters)
	}
	o = lsq(b.Runs[:3], "TC-0412", "TC-0415")
	o.Edit = func(p *AdjustParams) { p.LeastSquares.Minimal = true }
	v = b.Adjustment(t, o)
	for _, r := range v.Results {
		if r.Designation == "TC-0415" && (!r.Held || r.Value != nil || math.Abs(r.AdjustedM-10.9012-*r.CorrectionM) > 1e-12 || *r.CorrectionM == 0) {
			t.Fatalf("check mark %+v", r)
		}
	}
	if st := v.Statistics.Network; st.Unknowns != 4 || st.Redundancy != 3 || !v.Parameters.Minimal {
		t.Fatalf("minimal: %+v", st)
	}
}

// Bad input names its field and writes nothing.
func TestLeastSquaresBadInput(t *testing.T) {
	t.Parallel()
	b, _ := setupNet(t, tallisNet)
	// The mark of "mark on no run", made before counting.
	b.Mark(t, registertest.MarkOpts{Designation: "TC-0499", NoPosition: true})
	before := b.Counts(t)
	near := &store.LatLon{Lat: 0, Lon: 0}
	for _, c := range []struct {
		name  string
		p     func(*AdjustParams)
		field string
		want  string
	}{
		{"no path to control", func(p *AdjustParams) { p.RunIDs = []int64{b.Runs[0], b.Runs[3]} }, "hold", "TC-0430, TC-0431"},
		{"negative weighted hold", func(p *AdjustParams) { p.Hold = []Hold{{Designation: "TC-0412", SigmaM: -0.005}} }, "hold", "standard deviation"},
		{"weighted proportional", func(p *AdjustParams) {
			p.Method = MethodProportional
			p.Hold = []Hold{{Designation: "TC-0412", SigmaM: 0.005}}
		}, "hold", "least-squares"},
		{"minimal proportional", func(p *AdjustParams) { p.Method = ""; p.LeastSquares.Minimal = true }, "minimal", ""},
		{"distribution with least squares", func(p *AdjustParams) { p.Distribution = adjust.BySetups }, "distribute", "weighs its sections"},
		{"unknown mark", func(p *AdjustParams) { p.Marks = []string{"TC-9999"} }, "marks", "TC-9999"},
		{"mark on no run", func(p *AdjustParams) {
			p.RunIDs = nil
			p.Marks = []string{"TC-0412"}
			p.Marks = []string{"TC-0499"}
		}, "marks", "TC-0499"},
		{"empty area", func(p *AdjustParams) { p.Near, p.RadiusM = near, 1000 }, "area", "no mark"},
		{"area without radius", func(p *AdjustParams) { p.Near = near }, "within", ""},
		{"held off the runs", func(p *AdjustParams) { p.Hold = HoldFixed("TC-0412", "TC-0415", "TC-0413") }, "hold", "no current height"},
		{"bad alpha", func(p *AdjustParams) { p.LeastSquares.Alpha = 2 }, "alpha", ""},
		{"bad sigma", func(p *AdjustParams) { p.LeastSquares.SigmaM = -1 }, "sigma", ""},
	} {
		p := b.AdjustParams(lsq(b.Runs[:3], "TC-0412", "TC-0415"))
		c.p(&p)
		_, err := b.Reg.Adjust(b.Ctx, p)
		var ie *InputError
		if !errors.As(err, &ie) || ie.Field != c.field || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%s: %v, want field %s saying %q", c.name, err, c.field, c.want)
		}
	}
	if !b.AssertNothingWritten(t, before) {
		t.Fatal("bad input wrote")
	}
}
