package adjust_test

import (
	"math"
	"testing"

	"cairn/internal/adjust"
	"cairn/internal/standards"
	"cairn/internal/units"
)

// The run's own profile judges its stretches in the adjustment, as it
// judged the run when it was recorded: worked example 1's circuit as
// second-II, over 30.5 km, is allowed 8.4 mm·√K under en0593 (EN0593 §4-3,
// read: 46.39 mm, derived) and 8 mm·√E under fgcc-1984 (from memory:
// 44.18 mm).
func TestDraftUsesRunsProfile(t *testing.T) {
	en, _ := standards.Builtin(standards.EN0593)
	for _, c := range []struct {
		prof *standards.Profile
		cMm  float64
	}{{nil, 8}, {en, 8.4}} {
		run := circuit("second-II")
		run.Standards = c.prof
		d, err := adjust.ComputeDraft(adjust.DraftInput{Method: adjust.MethodProportional, Runs: []adjust.DraftRun{run},
			Held: []adjust.DraftHeld{{Point: "BM1", HeightM: 728.730, Unit: units.Metre}}, Decimals: ptr(3)})
		if err != nil {
			t.Fatal(err)
		}
		st := d.Stats.Stretches[0]
		if want := c.cMm * math.Sqrt(30.5) / 1000; st.AllowableM == nil || math.Abs(*st.AllowableM-want) > 1e-9 {
			t.Errorf("profile %v: allowable %v, want %.5f m", c.prof, st.AllowableM, want)
		}
	}
	// A profile that does not cover the run's class gives no allowable.
	run := circuit("third")
	run.Standards = en
	d, err := adjust.ComputeDraft(adjust.DraftInput{Method: adjust.MethodProportional, Runs: []adjust.DraftRun{run},
		Held: []adjust.DraftHeld{{Point: "BM1", HeightM: 728.730, Unit: units.Metre}}, Decimals: ptr(3)})
	if err != nil || d.Stats.Stretches[0].AllowableM != nil {
		t.Errorf("en0593 third: %v, allowable %v", err, d.Stats.Stretches[0].AllowableM)
	}
}
