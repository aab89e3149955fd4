package register_test

import (
	"errors"
	"math"
	"strings"
	"testing"

	"cairn/internal/adjust"
	"cairn/internal/register"
	"cairn/internal/registertest"
	"cairn/internal/store"
)

// The last gate before a draft or a publication is stored refuses any
// number that is not finite and any height outside the plausible range
// (-500 m to 9,000 m, common practice, docs/references.md#plausible-range),
// naming the mark or section.
func TestCheckResultsRefusesNonFinite(t *testing.T) {
	f := func(v float64) *float64 { return &v }
	s := func(v string) *string { return &v }
	good := store.AdjustmentResult{Designation: "TC-0427", AdjustedM: 5.104, SigmaM: f(0.001), Value: s("5.104"), Unit: s("m")}
	if err := register.CheckResults([]store.AdjustmentResult{good}, []store.AdjustmentSection{{ResidualM: 0.001}}); err != nil {
		t.Fatal(err)
	}
	for _, c := range []struct {
		name string
		edit func(*store.AdjustmentResult)
		secs []store.AdjustmentSection
		want string
	}{
		{"NaN height", func(r *store.AdjustmentResult) { r.AdjustedM = math.NaN() }, nil, "the adjusted height of TC-0427: the height is not a finite number (NaN)"},
		{"Inf sigma", func(r *store.AdjustmentResult) { r.SigmaM = f(math.Inf(1)) }, nil, "the standard deviation of TC-0427: not a finite number (+Inf)"},
		{"NaN correction", func(r *store.AdjustmentResult) { r.CorrectionM = f(math.NaN()) }, nil, "the correction of TC-0427: not a finite number (NaN)"},
		{"NaN value", func(r *store.AdjustmentResult) { r.Value = s("NaN") }, nil, `the height of TC-0427 to publish (NaN m): not a number: "NaN"`},
		{"9010 m", func(r *store.AdjustmentResult) { r.AdjustedM, r.Value = 9010, s("9010.000") }, nil, "the adjusted height of TC-0427: a height of 9010 m is implausible"},
		{"9010 m to publish", func(r *store.AdjustmentResult) { r.Value = s("29560.37"); r.Unit = s("usft") }, nil, "the height of TC-0427 to publish (29560.37 usft): a height of 9010"},
		{"NaN residual", func(*store.AdjustmentResult) {}, []store.AdjustmentSection{{RunID: 1, Seq: 2, From: "A", To: "B", ResidualM: math.NaN()}},
			"the residual of run 1, section 2 (A to B): not a finite number (NaN)"},
	} {
		r := good
		c.edit(&r)
		err := register.CheckResults([]store.AdjustmentResult{r}, c.secs)
		var ie *register.InputError
		if !errors.As(err, &ie) || ie.Field != "result" || !strings.Contains(ie.Msg, c.want) || !strings.Contains(ie.Msg, "nothing was stored") {
			t.Errorf("%s: got %v, want an input error on result containing %q", c.name, err, c.want)
		}
	}
}

// Inputs each within range can still make a height out of it: a mark held
// at 8,990 m and a line rising 20 m (five setups of 4.5 − 0.5 m) would put
// TC-0427 at 9,010 m. The draft is refused, dry run or not, and nothing is
// written.
func TestImplausibleDraftNotStored(t *testing.T) {
	t.Parallel()
	b := registertest.Setup(t)
	b.Datum(t, registertest.DatumOpts{Code: "NAVD88"})
	b.Marks(t, "TC-0420", "TC-0427")
	b.Height(t, registertest.HeightOpts{Designation: "TC-0420", Value: "8990.000", Unit: "m"})
	book := "# Tallis County, Orrin Bay: invented demo data.\n# run: Orrin Bay hill line\n# date: 2024-06-03\n# units: m\n# datum: NAVD88\n# class: third\npoint,sight,middle,distance\n"
	from := "TC-0420"
	for _, to := range []string{"TP1", "TP2", "TP3", "TP4", "TC-0427"} {
		book += from + ",BS,4.500,30.0\n" + to + ",FS,0.500,30.0\n"
		from = to
	}
	b.Run(t, registertest.RunOpts{Book: []byte(book), AcceptFailedChecks: true, Reason: "an open line, checked by the adjustment"})
	before := b.Counts(t)
	for _, dry := range []bool{true, false} {
		_, err := b.Reg.Adjust(b.Ctx, b.AdjustParams(registertest.AdjustmentOpts{Hold: []string{"TC-0420"}, Method: adjust.MethodLeastSquares, DryRun: dry}))
		var ie *register.InputError
		if !errors.As(err, &ie) || ie.Field != "result" || !strings.Contains(ie.Msg, "the adjusted height of TC-0427: a height of 9010 m is implausible: cairn accepts -500 m to 9000 m") {
			t.Errorf("dry run %v: got %v", dry, err)
		}
	}
	b.AssertNothingWritten(t, before)
}
