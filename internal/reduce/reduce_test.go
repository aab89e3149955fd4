package reduce

import (
	"fmt"
	"math"
	"math/big"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"cairn/internal/levelbook"
	"cairn/internal/standards"
	"cairn/internal/units"
)

const books = "../../testdata/books"

func read(t *testing.T, name string) *levelbook.Book {
	t.Helper()
	b, err := levelbook.ReadFile(filepath.Join(books, name))
	if err != nil {
		t.Fatal(err)
	}
	return b
}

func parse(t *testing.T, data string) *levelbook.Book {
	t.Helper()
	b, err := levelbook.Parse("t.csv", []byte(data))
	if err != nil {
		t.Fatal(err)
	}
	return b
}

func reduce(t *testing.T, b *levelbook.Book, o Options) *Result {
	t.Helper()
	r, err := Reduce(b, o)
	if err != nil {
		t.Fatal(err)
	}
	return r
}

// Universiti Sains Malaysia, civil engineering lecture "Ukur Aras"
// (height-of-collimation reduction with intermediate sights; readings and
// answers read, see docs/references.md, worked example 2): OBM1 = 29.23 and
// OBM2 = 29.66 held; the published reduced levels below and a misclosure of
// +10 mm over 5 setups. Compared at the millimetre before any rounding.
func TestUSMWorkedExample(t *testing.T) {
	r := reduce(t, read(t, "usm-ukur-aras.csv"), Options{Hold: map[string]float64{"OBM1": 29.23, "OBM2": 29.66}})
	want := []struct {
		point string
		rl    float64
	}{
		{"OBM1", 29.230}, {"A", 29.515}, {"B", 29.231}, {"B", 29.231}, {"C", 29.877}, {"D", 31.196},
		{"D", 31.196}, {"E", 29.007}, {"E", 29.007}, {"CP1", 29.052}, {"CP1", 29.052},
		{"F", 28.945}, {"G", 28.836}, {"OBM2", 29.670},
	}
	if len(r.Rows) != len(want) {
		t.Fatalf("%d rows, want %d", len(r.Rows), len(want))
	}
	for i, w := range want {
		if got := r.Rows[i]; got.Point != w.point || math.Abs(got.HeightM-w.rl) > 0.0005 {
			t.Errorf("row %d: %s %.4f m, want %s %.3f m (USM)", i, got.Point, got.HeightM, w.point, w.rl)
		}
	}
	if len(r.Setups) != 5 {
		t.Errorf("%d setups, want 5 (USM)", len(r.Setups))
	}
	if len(r.Misclosures) != 1 {
		t.Fatalf("misclosures = %+v", r.Misclosures)
	}
	ms := r.Misclosures[0]
	if ms.Kind != "line" || ms.From != "OBM1" || ms.To != "OBM2" || ms.Setups != 5 || math.Abs(ms.MisclosureM-0.010) > 0.0005 {
		t.Errorf("misclosure = %+v, want +0.010 m over 5 setups OBM1 to OBM2 (USM)", ms)
	}
	// No class and no distances: the misclosure is found but not judged.
	if ms.HasAllowable || r.Class != "" || !r.Passed() {
		t.Errorf("class %q allowable %v failures %+v", r.Class, ms.HasAllowable, r.Failures)
	}
	// Intermediate sights take no part in the line: one section, OBM1 to OBM2.
	if len(r.Sections) != 1 || r.Sections[0].From != "OBM1" || r.Sections[0].To != "OBM2" {
		t.Errorf("sections = %+v", r.Sections)
	}
}

// Ghilani & Wolf, "Elementary Surveying" (read): combined curvature and
// refraction with k = 0.14, tabulated 500 ft → 0.005142 ft, 1000 ft →
// 0.020568 ft, 5000 ft → 0.514206 ft; formula 0.0675 K² m (K in km) and
// 0.0206 F² ft (F in thousands of feet).
func TestCurvatureRefraction(t *testing.T) {
	for _, c := range []struct{ ft, want float64 }{{500, 0.005142}, {1000, 0.020568}, {5000, 0.514206}} {
		got := CurvatureRefractionM(c.ft*0.3048) / 0.3048
		if math.Abs(got-c.want) > 0.0000005 {
			t.Errorf("h_cr(%v ft) = %.6f ft, want %.6f ft (Ghilani & Wolf table)", c.ft, got, c.want)
		}
	}
	if got := CurvatureRefractionM(1000); math.Abs(got-0.0675) > 0.00005 {
		t.Errorf("h_cr(1 km) = %.5f m, want 0.0675 m (Ghilani & Wolf formula)", got)
	}
	if got := CurvatureRefractionM(2000*0.3048) / 0.3048; math.Abs(got-0.0206*4) > 0.0005 {
		t.Errorf("h_cr(2000 ft) = %.5f ft, want 0.0824 ft (0.0206 F²)", got)
	}
}

// With the correction, a balanced setup is unchanged and an unbalanced one
// shifts by the difference of the two corrections.
func TestCurvatureRefractionApplied(t *testing.T) {
	b := parse(t, "# units: m\npoint,sight,middle,distance\nTC-1,BS,1.5,80\nTC-2,FS,1.2,80\nTC-2,BS,1.5,100\nTC-3,FS,1.2,20\n")
	plain := reduce(t, b, Options{})
	cr := reduce(t, b, Options{CurvatureRefraction: true})
	if d := cr.Setups[0].DifferenceM - plain.Setups[0].DifferenceM; math.Abs(d) > 1e-15 {
		t.Errorf("balanced setup changed by %g m", d)
	}
	want := -(CurvatureRefractionM(100) - CurvatureRefractionM(20))
	if d := cr.Setups[1].DifferenceM - plain.Setups[1].DifferenceM; math.Abs(d-want) > 1e-15 {
		t.Errorf("unbalanced setup changed by %g m, want %g m", d, want)
	}
	if cr.Rows[2].CorrectionM != CurvatureRefractionM(100) {
		t.Errorf("row correction %g", cr.Rows[2].CorrectionM)
	}
	// Without distances the correction cannot be made.
	_, err := Reduce(parse(t, "# units: m\npoint,sight,middle\nTC-1,BS,1.5\nTC-2,FS,1.2\n"), Options{CurvatureRefraction: true})
	if err == nil || err.Error() != "t.csv:3: curvature and refraction need the sight's length, and this sighting has none" {
		t.Errorf("error = %v", err)
	}
}

// reverse writes b run the other way: setups in reverse order, each
// setup's backsight and foresight exchanged.
func reverse(t *testing.T, b *levelbook.Book, unit string) string {
	t.Helper()
	var sb strings.Builder
	fmt.Fprintf(&sb, "# units: %s\n# class: %s\npoint,sight,upper,middle,lower\n", unit, b.Meta.Class)
	ss := b.Sightings
	row := func(s levelbook.Sighting, sight levelbook.Sight) {
		fmt.Fprintf(&sb, "%s,%s,%s,%s,%s\n", s.Point, sight, s.Raw.Upper, s.Raw.Middle, s.Raw.Lower)
	}
	for i := len(ss) - 1; i > 0; i -= 2 {
		if ss[i].Sight != levelbook.Foresight || ss[i-1].Sight != levelbook.Backsight {
			t.Fatal("reverse: book has intermediate sights")
		}
		row(ss[i], levelbook.Backsight)
		row(ss[i-1], levelbook.Foresight)
	}
	return sb.String()
}

// Property: the loop run backwards gives the opposite section differences,
// the same lengths and the opposite misclosure.
func TestLoopBackwards(t *testing.T) {
	fwd := read(t, "tallis-north-loop.csv")
	rf := reduce(t, fwd, Options{})
	rb := reduce(t, parse(t, reverse(t, fwd, "usft")), Options{})
	n := len(rf.Sections)
	if n != 3 || len(rb.Sections) != n {
		t.Fatalf("sections %d and %d", n, len(rb.Sections))
	}
	for i, s := range rf.Sections {
		o := rb.Sections[n-1-i]
		if s.From != o.To || s.To != o.From || math.Abs(s.DifferenceM+o.DifferenceM) > 1e-12 || math.Abs(s.LengthM-o.LengthM) > 1e-9 {
			t.Errorf("section %s→%s %+.6f m, backwards %s→%s %+.6f m", s.From, s.To, s.DifferenceM, o.From, o.To, o.DifferenceM)
		}
	}
	if m, o := rf.Misclosures[0].MisclosureM, rb.Misclosures[0].MisclosureM; math.Abs(m+o) > 1e-12 || m == 0 {
		t.Errorf("misclosures %g and %g", m, o)
	}
}

// TestFootBookUsesTheDefiningFoot: a book in US survey feet reduces with
// 1 usft = 1200/3937 m and one in international feet with 0.3048 m exactly
// (Federal Register Vol. 85 No. 193, 2020, read). The expected section
// differences are worked here with exact fractions from the book's
// decimals: Σ (mean of the three wires of each backsight − of each
// foresight) × the foot in metres, so neither the reduction's float
// arithmetic nor units' own constants stand behind them. The same
// readings taken as international feet give differences 2 ppm smaller
// (0.3048 × 3937/1200 = 0.999998, derived).
func TestFootBookUsesTheDefiningFoot(t *testing.T) {
	data, err := os.ReadFile(filepath.Join(books, "tallis-north-loop.csv"))
	if err != nil {
		t.Fatal(err)
	}
	for _, c := range []struct {
		unit string
		foot *big.Rat
	}{{"usft", big.NewRat(1200, 3937)}, {"ft", big.NewRat(3048, 10000)}} {
		b := parse(t, strings.Replace(string(data), "# units: usft", "# units: "+c.unit, 1))
		r := reduce(t, b, Options{})
		// Exact: each section's Σ(BS − FS) over its setups, in feet, × foot.
		var want []*big.Rat
		sum := new(big.Rat)
		for _, s := range b.Sightings {
			mean := new(big.Rat)
			for _, w := range []string{s.Raw.Upper, s.Raw.Middle, s.Raw.Lower} {
				v, ok := new(big.Rat).SetString(w)
				if !ok {
					t.Fatalf("line %d: %q", s.Line, w)
				}
				mean.Add(mean, v)
			}
			mean.Quo(mean, big.NewRat(3, 1))
			switch s.Sight {
			case levelbook.Backsight:
				sum.Add(sum, mean)
			case levelbook.Foresight:
				sum.Sub(sum, mean)
				if !strings.HasPrefix(s.Point, "TP") {
					want = append(want, new(big.Rat).Mul(sum, c.foot))
					sum = new(big.Rat)
				}
			}
		}
		if len(r.Sections) != len(want) || len(want) != 3 {
			t.Fatalf("%s: %d sections, %d worked", c.unit, len(r.Sections), len(want))
		}
		for i, w := range want {
			wf, _ := w.Float64()
			if d := math.Abs(r.Sections[i].DifferenceM - wf); d > 1e-12 {
				t.Errorf("%s: section %d %.12f m, exact %s m", c.unit, i+1, r.Sections[i].DifferenceM, w.FloatString(12))
			}
		}
	}
}

// TestArithmeticCheck: the published book of worked example 2
// (Universiti Sains Malaysia, "Ukur Aras", read; docs/references.md):
// ΣBS = 1.717 + 2.918 + 0.816 + 1.436 + 1.246 = 8.133 m and
// ΣFS = 1.716 + 0.953 + 3.005 + 1.391 + 0.628 = 7.693 m (intermediate
// sights left out), and their difference 0.440 m is the published last
// reduced level minus the first, 29.670 − 29.230 (sums derived from the
// published readings). The reduction must take the same sights as
// backsights and foresights and leave the intermediate ones out; an
// intermediate sight counted as a foresight, or a column read as another,
// fails it.
func TestArithmeticCheck(t *testing.T) {
	r := reduce(t, read(t, "usm-ukur-aras.csv"), Options{Hold: map[string]float64{"OBM1": 29.23, "OBM2": 29.66}})
	var bs, fs float64
	for _, s := range r.Setups {
		bs += s.BacksightM
		fs += s.ForesightM
	}
	if math.Abs(bs-8.133) > 1e-9 || math.Abs(fs-7.693) > 1e-9 {
		t.Errorf("ΣBS %.4f m, ΣFS %.4f m; published readings sum to 8.133 and 7.693", bs, fs)
	}
	first, last := r.Rows[0], r.Rows[len(r.Rows)-1]
	if first.Point != "OBM1" || last.Point != "OBM2" || math.Abs((last.HeightM-first.HeightM)-(29.670-29.230)) > 1e-9 {
		t.Errorf("%s %.4f to %s %.4f, published 29.230 to 29.670", first.Point, first.HeightM, last.Point, last.HeightM)
	}
}

// The demo books pass every check of their class.
func TestDemoBooks(t *testing.T) {
	loop := reduce(t, read(t, "tallis-north-loop.csv"), Options{})
	if !loop.Passed() || !loop.Loop || !loop.Relative || loop.Class != standards.SecondII {
		t.Errorf("loop: passed %v loop %v relative %v class %s failures %+v", loop.Passed(), loop.Loop, loop.Relative, loop.Class, loop.Failures)
	}
	if len(loop.Setups) != 8 || len(loop.Sections) != 3 || len(loop.Misclosures) != 1 || loop.Misclosures[0].Kind != "loop" {
		t.Errorf("loop: %d setups %d sections misclosures %+v", len(loop.Setups), len(loop.Sections), loop.Misclosures)
	}
	line := reduce(t, read(t, "mere-river-line.csv"), Options{Hold: map[string]float64{"TC-0420": 3.512, "TC-0427": 5.104}})
	if !line.Passed() || line.Loop || line.Relative || len(line.Misclosures) != 1 {
		t.Errorf("line: passed %v loop %v misclosures %+v failures %+v", line.Passed(), line.Loop, line.Misclosures, line.Failures)
	}
	if got := line.Rows[0].HeightM; got != 3.512 {
		t.Errorf("first held mark at %v", got)
	}
	// Unheld, the line does not close: a failed check, not a pass.
	open := reduce(t, read(t, "mere-river-line.csv"), Options{Hold: map[string]float64{"TC-0420": 3.512}})
	if open.Passed() || len(open.Failures) != 1 || open.Failures[0].Kind != CheckClosure || open.Failures[0].Line != 29 {
		t.Errorf("open line failures = %+v", open.Failures)
	}
}

// Three held marks make two stretches, each with its own misclosure, and
// a loop's start held closes it through the held value.
func TestStretches(t *testing.T) {
	b := read(t, "mere-river-line.csv")
	r := reduce(t, b, Options{Hold: map[string]float64{"TC-0420": 3.512, "TC-0423": 5.882, "TC-0427": 5.104}})
	if len(r.Misclosures) != 2 {
		t.Fatalf("misclosures = %+v", r.Misclosures)
	}
	a, c := r.Misclosures[0], r.Misclosures[1]
	if a.From != "TC-0420" || a.To != "TC-0423" || a.FirstSection != 1 || a.LastSection != 1 ||
		c.From != "TC-0423" || c.To != "TC-0427" || c.FirstSection != 2 || c.LastSection != 2 {
		t.Errorf("stretches %+v %+v", a, c)
	}
	if math.Abs(a.KnownM-(5.882-3.512)) > 1e-12 || math.Abs(a.ObservedM-r.Sections[0].DifferenceM) > 1e-12 {
		t.Errorf("stretch 1 %+v", a)
	}
	loop := reduce(t, read(t, "tallis-north-loop.csv"), Options{Hold: map[string]float64{"TC-0412": 125.6898}})
	if len(loop.Misclosures) != 1 || loop.Misclosures[0].Kind != "loop" || loop.Relative || loop.Rows[0].HeightM != 125.6898 {
		t.Errorf("held loop: %+v", loop.Misclosures)
	}
}

// Each check fails where its limit is passed, naming the line, and a value
// exactly at its limit passes. Third order (FGCC 1984 §3.5, from memory):
// sights at most 90 m, 10 m imbalance per setup and per section, loop
// 12 mm·√km; three-wire half-intervals within 3 mm, exactly 3 mm accepted
// (US Army Engineer School EN0593 §4, read).
func TestChecksFail(t *testing.T) {
	book := `# units: m
# class: third
point,sight,upper,middle,lower,distance
TC-1,BS,1.950,1.500,1.050,
TP1,FS,1.750,1.300,0.850,
TP1,BS,1.9515,1.5000,1.0515,
TP2,FS,1.6000,1.2000,0.8000,
TP2,BS,,1.100,,95
TC-2,FS,,1.000,,85
TC-2,BS,1.1000,1.0000,0.9060,
TC-1,FS,1.400,1.021,0.642,
`
	// Line 4, 5: 90 m sights, at the limit. Line 6: half-intervals 0.4515
	// and 0.4485, exactly 3 mm. Setup 2: 90 − 80 = 10 m, at the limit.
	// Line 8: a 95 m sight. Section TC-1 to TC-2: 0 + 10 + 10 = 20 m.
	// Line 10: half-intervals 0.1000 and 0.0940. Setup 4: 19.4 − 75.8 m.
	r := reduce(t, parse(t, book), Options{})
	got := map[CheckKind][]int{}
	for _, f := range r.Failures {
		got[f.Kind] = append(got[f.Kind], f.Line)
	}
	want := map[CheckKind][]int{
		CheckThreeWire:        {10},
		CheckSightLength:      {8},
		CheckSetupImbalance:   {11},
		CheckSectionImbalance: {9, 11},
		CheckMisclosure:       {11},
		// TC-1 to TC-2 and back is a double-run section too.
		CheckDoubleRun: {11},
	}
	if fmt.Sprint(got) != fmt.Sprint(want) {
		t.Errorf("failed lines\n got %v\nwant %v", got, want)
	}
	msgs := map[CheckKind]string{}
	for _, f := range r.Failures {
		if _, ok := msgs[f.Kind]; !ok {
			msgs[f.Kind] = f.Message
		}
	}
	for k, m := range map[CheckKind]string{
		CheckThreeWire:        "half-intervals 0.1000 and 0.0940 differ by 0.0060 m (limit 0.003 m): reobserve",
		CheckSightLength:      "sight of 95.0 m is longer than 90.0 m",
		CheckSetupImbalance:   "backsight 19.4 m, foresight 75.8 m: imbalance -56.4 m exceeds 10.0 m",
		CheckSectionImbalance: "accumulated imbalance 20.0 m exceeds 10.0 m",
		CheckMisclosure:       "misclosure 0.5820 m exceeds the allowable 0.0095 m over 625.2 m",
	} {
		if msgs[k] != m {
			t.Errorf("%s message\n got %s\nwant %s", k, msgs[k], m)
		}
	}
	for _, c := range r.Checks {
		if c.Kind == CheckThreeWire && (c.Checked != 6 || c.Failed != 1) {
			t.Errorf("three-wire check %+v", c)
		}
	}
	// Derived: 12 mm·√0.6252 km = 9.488 mm.
	if ms := r.Misclosures[0]; math.Abs(ms.AllowableM-0.012*math.Sqrt(0.6252)) > 1e-12 || ms.Pass {
		t.Errorf("misclosure %+v", ms)
	}
	// A class named but distances missing: the class cannot be checked.
	nd := reduce(t, parse(t, "# units: m\n# class: first-I\npoint,sight,middle\nTC-1,BS,1.5\nTC-2,FS,1.2\nTC-2,BS,1.5\nTC-1,FS,1.8\n"), Options{})
	var lines []int
	for _, f := range nd.Failures {
		lines = append(lines, f.Line)
		if f.Kind != CheckDistance && f.Kind != CheckMisclosure && f.Kind != CheckDoubleRun {
			t.Errorf("unexpected failure %+v", f)
		}
	}
	if fmt.Sprint(lines) != "[4 5 6 7 7 7]" {
		t.Errorf("failed lines %v", lines)
	}
	// --class overrides the book's class.
	if o := reduce(t, parse(t, book), Options{Class: standards.FirstI}); o.Class != standards.FirstI || o.Tolerances.MaxSightM != 50 {
		t.Errorf("class override: %s %+v", o.Class, o.Tolerances)
	}
}

func TestHoldErrors(t *testing.T) {
	b := read(t, "mere-river-line.csv")
	for hold, want := range map[string]string{
		"TP1":     "cannot hold TP1: it is a turning point",
		"TC-9999": "cannot hold TC-9999: no backsight or foresight on it in ../../testdata/books/mere-river-line.csv",
	} {
		_, err := Reduce(b, Options{Hold: map[string]float64{hold: 1}})
		if err == nil || err.Error() != want {
			t.Errorf("hold %s: error %v, want %s", hold, err, want)
		}
	}
	if _, err := Reduce(b, Options{Hold: map[string]float64{"TC-0420": math.NaN()}}); err == nil {
		t.Error("NaN hold accepted")
	}
}

func TestDecimals(t *testing.T) {
	if Decimals(units.Metre) != 4 || Decimals(units.Foot) != 3 || Decimals(units.USSurveyFoot) != 3 {
		t.Error("decimals")
	}
}

// Mahun, "Elevations", ch. G (read): wires 4.31 / 4.16 / 4.02 ft, mean
// 4.163 ft, 29 ft. Derived: its half-intervals 0.15 and 0.14 ft differ by
// 0.01 ft = 3.048 mm, just over the 3 mm of EN0593 §4, so the three-wire
// check flags it; 4.31 / 4.165 / 4.02 passes.
func TestMahunThreeWireCheck(t *testing.T) {
	r := reduce(t, parse(t, "# units: ft\npoint,sight,upper,middle,lower\nBM1,BS,4.31,4.16,4.02\nBM2,FS,4.31,4.165,4.02\nBM2,BS,4.31,4.165,4.02\nBM1,FS,4.31,4.16,4.02\n"), Options{})
	if math.Abs(r.Rows[0].ReadingM/0.3048-4.163) > 0.0005 || math.Abs(r.Rows[0].DistanceM/0.3048-29) > 1e-9 {
		t.Errorf("reading %.4f ft, distance %.4f ft; want 4.163 and 29 (Mahun)", r.Rows[0].ReadingM/0.3048, r.Rows[0].DistanceM/0.3048)
	}
	var lines []int
	for _, f := range r.Failures {
		if f.Kind == CheckThreeWire {
			lines = append(lines, f.Line)
			if math.Abs(f.ValueM-0.003048) > 1e-9 {
				t.Errorf("three-wire value %v m, want 0.003048 m", f.ValueM)
			}
		}
	}
	if fmt.Sprint(lines) != "[3 6]" {
		t.Errorf("three-wire failures on lines %v, want [3 6]", lines)
	}
}

// A book in feet states the three-wire limit in metres and in its unit
// (0.003 m / 0.3048 = 0.0098 ft), and a failure quotes the check's limit.
func TestThreeWireLimitInFeet(t *testing.T) {
	r := reduce(t, parse(t, "# units: ft\npoint,sight,upper,middle,lower\nBM1,BS,4.31,4.16,4.02\nBM2,FS,4.31,4.165,4.02\n"), Options{})
	for _, c := range r.Checks {
		if c.Kind == CheckThreeWire && c.Tolerance != "half-intervals agree within 0.003 m (0.0098 ft)" {
			t.Errorf("tolerance %q", c.Tolerance)
		}
	}
	var msgs []string
	for _, f := range r.Failures {
		if f.Kind == CheckThreeWire {
			msgs = append(msgs, f.Message)
		}
	}
	if want := "half-intervals 0.150 and 0.140 differ by 0.010 ft (limit 0.003 m (0.0098 ft)): reobserve"; len(msgs) != 1 || msgs[0] != want {
		t.Errorf("three-wire failures %q, want [%q]", msgs, want)
	}
}

// closureBook writes a second-II book along marks, each section two setups
// of four 62.5 m sights (250 m, K = 0.25 km), rising by rises[i] (m).
func closureBook(marks []string, rises []float64) string {
	var sb strings.Builder
	sb.WriteString("# units: m\n# class: second-II\npoint,sight,middle,distance\n")
	tp := 0
	for i, rise := range rises {
		tp++
		fmt.Fprintf(&sb, "%s,BS,1.5000,62.5\nTP%d,FS,1.5000,62.5\n", marks[i], tp)
		fmt.Fprintf(&sb, "TP%d,BS,%.4f,62.5\n%s,FS,1.5000,62.5\n", tp, 1.5+rise, marks[i+1])
	}
	return sb.String()
}

// A run A→B→C→B→A with nothing held closes twice: on A (the loop) and on
// B (the spur B→C→B, whose closure is its double-run section B–C, judged
// by the section constant over the one-way length). FGCC 1984 §3.5 (table
// values from memory, docs/references.md#accuracy-classes): second-II
// section 8 mm·√K and loop 8 mm·√E. Derived: K = 0.25 km gives exactly
// 4 mm for a double-run section, and the 1 km loop 8 mm.
func TestClosuresWithinTheRun(t *testing.T) {
	marks := []string{"TC-A", "TC-B", "TC-C", "TC-B", "TC-A"}
	for _, c := range []struct {
		name    string
		spurMM  float64 // closure of B→C→B
		spurOK  bool
		loopMM  float64
		loopOK  bool
		failed  int
		summary string
	}{
		{"at the limit", 4.0, true, 4.0, true, 0, "All checks passed."},
		{"over the section limit", 4.1, false, 4.1, true, 1, "1 check(s) failed."},
		// A-B closes by −4.1 mm, B-C by +4.1: the loop closes at zero.
		{"both sections over", 4.1, false, 0, true, 2, "2 check(s) failed."},
	} {
		t.Run(c.name, func(t *testing.T) {
			back := -0.3 + (c.loopMM-c.spurMM)/1000
			r := reduce(t, parse(t, closureBook(marks, []float64{0.3, 0.5, -0.5 + c.spurMM/1000, back})), Options{})
			if len(r.Misclosures) != 1 {
				t.Fatalf("misclosures %+v, want the loop on TC-A only", r.Misclosures)
			}
			loop := r.Misclosures[0]
			if loop.Kind != "loop" || loop.From != "TC-A" || loop.Within || math.Abs(loop.MisclosureM-c.loopMM/1000) > 1e-9 ||
				math.Abs(loop.AllowableM-0.008) > 1e-12 || loop.Pass != c.loopOK {
				t.Errorf("loop %+v, want %.1f mm against 8 mm", loop, c.loopMM)
			}
			if len(r.DoubleRuns) != 2 {
				t.Fatalf("double runs %+v", r.DoubleRuns)
			}
			spur := r.DoubleRuns[0]
			if spur.From != "TC-B" || spur.To != "TC-C" || spur.Forward != 2 || spur.Backward != 3 ||
				math.Abs(spur.ClosureM-c.spurMM/1000) > 1e-9 || math.Abs(spur.OneWayM-250) > 1e-9 ||
				math.Abs(spur.AllowableM-0.004) > 1e-12 || spur.Pass != c.spurOK {
				t.Errorf("spur %+v, want %.1f mm against 4 mm", spur, c.spurMM)
			}
			if ab := r.DoubleRuns[1]; ab.From != "TC-A" || ab.To != "TC-B" || ab.Forward != 1 || ab.Backward != 4 {
				t.Errorf("A-B double run %+v", ab)
			}
			if len(r.Failures) != c.failed || !strings.HasPrefix(r.Summary, c.summary) {
				t.Errorf("failures %+v, summary %q", r.Failures, r.Summary)
			}
			for _, f := range r.Failures {
				if f.Kind != CheckDoubleRun {
					t.Errorf("failure %+v, want double_run only", f)
				}
			}
		})
	}
}

// A line that comes back to a mark it passed (B, C, D, B) closes there:
// the stretch is judged by the loop constant; it does not tie the line to
// known heights, so the closure check still fails. Second-II loop
// 8 mm·√E (from memory, as above); derived: E = 0.75 km, 6.928 mm.
func TestLoopWithinALine(t *testing.T) {
	marks := []string{"TC-A", "TC-B", "TC-C", "TC-D", "TC-B", "TC-E"}
	r := reduce(t, parse(t, closureBook(marks, []float64{0.3, 0.5, 0.2, -0.7 + 0.007, 0.1})), Options{})
	if len(r.Misclosures) != 1 {
		t.Fatalf("misclosures %+v", r.Misclosures)
	}
	ms := r.Misclosures[0]
	want := 0.008 * math.Sqrt(0.75)
	if !ms.Within || ms.From != "TC-B" || ms.To != "TC-B" || ms.FirstSection != 2 || ms.LastSection != 4 ||
		math.Abs(ms.MisclosureM-0.007) > 1e-9 || math.Abs(ms.AllowableM-want) > 1e-12 || ms.Pass {
		t.Errorf("closure %+v, want 7 mm against %.4f mm", ms, want*1000)
	}
	got := map[CheckKind]int{}
	for _, f := range r.Failures {
		got[f.Kind]++
	}
	if fmt.Sprint(got) != "map[closure:1 misclosure:1]" {
		t.Errorf("failures %v", r.Failures)
	}
}

// Check connections: three published marks on a line, the middle one
// published 12 mm too low (it moved). Second-II, the loop constant over
// the length between the marks (standards.CheckConnectionAllowableM; FGCC
// 1984 §3.5 8 mm·√E from memory). Derived: 0.5 km gives 5.657 mm, 1 km
// 8 mm. A–B and B–C differ by ±12 mm and fail, A–C agrees: B is the
// suspect. An intermediate sight on a mark is carried from its section's
// start.
func TestCheckConnections(t *testing.T) {
	marks := []string{"TC-A", "TC-X", "TC-B", "TC-Y", "TC-C"}
	book := parse(t, closureBook(marks, []float64{0.1, 0.2, 0.3, 0.4}))
	pub := map[string]float64{"TC-A": 10, "TC-B": 10.3 - 0.012, "TC-C": 11.0}
	r := reduce(t, book, Options{Published: pub})
	if len(r.Connections) != 3 {
		t.Fatalf("connections %+v", r.Connections)
	}
	want := []struct {
		from, to        string
		diffMM, allowMM float64
		pass            bool
	}{
		{"TC-A", "TC-B", 12, 8 * math.Sqrt(0.5), false},
		{"TC-A", "TC-C", 0, 8, true},
		{"TC-B", "TC-C", -12, 8 * math.Sqrt(0.5), false},
	}
	for i, w := range want {
		c := r.Connections[i]
		if c.From != w.from || c.To != w.to || math.Abs(c.DifferenceM*1000-w.diffMM) > 1e-6 || math.Abs(c.AllowableM*1000-w.allowMM) > 1e-9 || c.Pass != w.pass {
			t.Errorf("connection %d: %+v, want %s to %s %.0f mm against %.3f mm", i, c, w.from, w.to, w.diffMM, w.allowMM)
		}
	}
	if got := fmt.Sprint(r.SuspectMarks()); got != "[TC-B]" {
		t.Errorf("suspect %s, want [TC-B]", got)
	}
	// The line is not held: it fails the closure check as well.
	if got := fmt.Sprint(failedKinds(r)); got != "map[check_connection:2 closure:1]" {
		t.Errorf("failures %s: %+v", got, r.Failures)
	}
	// Held at A and C, published B: A–C is the line's misclosure, not
	// judged twice.
	h := reduce(t, book, Options{Hold: map[string]float64{"TC-A": 10, "TC-C": 11}, Published: pub})
	if !h.Connections[1].AsClosure || failedKinds(h)[CheckConnection] != 2 || len(h.Misclosures) != 1 {
		t.Errorf("held: connections %+v failures %+v", h.Connections, h.Failures)
	}
	// Only one known mark: nothing to connect.
	one := reduce(t, book, Options{Published: map[string]float64{"TC-A": 10}})
	for _, c := range one.Checks {
		if c.Kind == CheckConnection && !c.NotApplicable {
			t.Errorf("one known mark: %+v", c)
		}
	}
}

// An intermediate sight on a mark: H(mark) − H(section start) = the
// setups before it, the backsight of its setup, minus the sight.
func TestSideShots(t *testing.T) {
	b := parse(t, "# units: m\npoint,sight,middle,distance\nTC-1,BS,1.5,40\nTP1,FS,1.2,40\nTP1,BS,1.4,30\nTC-9,IS,0.9,20\nTC-2,FS,1.1,30\n")
	r := reduce(t, b, Options{})
	s := r.SideShots()
	// Worked by hand: 1.5 − 1.2 + 1.4 − 0.9 = 0.8 m; along 40 + 40 + 30 m.
	if len(s) != 1 || s[0].Point != "TC-9" || s[0].Section != 1 || math.Abs(s[0].DhM-0.8) > 1e-12 ||
		!s[0].HasAlong || s[0].AlongM != 110 || s[0].AlongSetups != 1.5 || s[0].Line != 6 {
		t.Errorf("side shots %+v", s)
	}
}

func failedKinds(r *Result) map[CheckKind]int {
	got := map[CheckKind]int{}
	for _, f := range r.Failures {
		got[f.Kind]++
	}
	return got
}
