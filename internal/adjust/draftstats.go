package adjust

import (
	"cmp"
	"math"
	"slices"
)

// Statistics are what a draft reports of its fit; they are kept with a
// stored adjustment as JSON, so their field names are a stored format. A
// proportional draft fills Stretches, a least-squares one Network.
type Statistics struct {
	Stretches []StretchStat `json:"stretches,omitempty"`
	Network   *NetworkStat  `json:"network,omitempty"`
	// Sides are the marks given their heights from an intermediate sight.
	Sides []SideStat `json:"sides,omitempty"`
	// DoubleRuns are the sections of one run levelled back in another.
	DoubleRuns []DoubleRunStat `json:"double_runs,omitempty"`
	// Connections are the check connections between held marks.
	Connections []ConnectionStat `json:"check_connections,omitempty"`
}

// Failed counts the checks that failed: the stretches whose misclosure
// exceeds the allowable, for least squares the flagged observations and a
// failed χ² test, and the double-run sections between runs and the check
// connections (not counted as a stretch) that fail.
func (s Statistics) Failed() int {
	n := s.Network.Failed()
	for _, st := range s.Stretches {
		if st.Pass != nil && !*st.Pass {
			n++
		}
	}
	for _, dr := range s.DoubleRuns {
		if dr.Pass != nil && !*dr.Pass {
			n++
		}
	}
	for _, c := range s.Connections {
		if !c.AsClosure && c.Pass != nil && !*c.Pass {
			n++
		}
	}
	return n
}

// StretchStat is the closure of one stretch of a run between held marks.
type StretchStat struct {
	RunID   int64   `json:"run_id"`
	From    string  `json:"from"`
	To      string  `json:"to"`
	LengthM float64 `json:"length_m"`
	Setups  float64 `json:"setups"`
	// MisclosureM is computed minus held at To: positive when the run came
	// in high.
	MisclosureM float64 `json:"misclosure_m"`
	// Class is set when the run's class is known; AllowableM and Pass when
	// it is and the stretch has a length as well.
	Class      string   `json:"class,omitempty"`
	AllowableM *float64 `json:"allowable_m,omitempty"`
	Pass       *bool    `json:"pass,omitempty"`
}

// NetworkStat are the statistics of a least-squares adjustment as they are
// stored and shown. Values that do not exist without redundancy are nil.
type NetworkStat struct {
	Points       int `json:"points"`
	Sections     int `json:"sections"`
	Observations int `json:"observations"` // sections and marks held weighted
	Unknowns     int `json:"unknowns"`
	Redundancy   int `json:"redundancy"`
	// VTPV is vᵀ·Σ⁻¹·v, the χ² test's statistic.
	VTPV           float64  `json:"vtpv"`
	VarianceFactor *float64 `json:"variance_factor"`
	Alpha          float64  `json:"alpha"`
	ChiSquareLower *float64 `json:"chi_square_lower"`
	ChiSquareUpper *float64 `json:"chi_square_upper"`
	// ChiSquarePass is false as well when there is no redundancy.
	ChiSquarePass bool    `json:"chi_square_pass"`
	SnoopCritical float64 `json:"snoop_critical"`
	// Snooping is what the level of data snooping applied to:
	// "per-observation" or "family" ("" in adjustments stored before it
	// could be chosen: per observation). SnoopLevel is the level of each
	// test; SnoopTestable the observations that could be tested and
	// SnoopTests the distinct tests among them; SnoopExpected the number
	// expected to be flagged by chance with no blunder. Zero in
	// adjustments stored before they were kept.
	Snooping      string  `json:"snooping,omitempty"`
	SnoopLevel    float64 `json:"snoop_level,omitempty"`
	SnoopTestable int     `json:"snoop_testable,omitempty"`
	SnoopTests    int     `json:"snoop_tests,omitempty"`
	SnoopExpected float64 `json:"snoop_expected,omitempty"`
	// Flagged counts the observations (sections and weighted held marks)
	// with |w| over SnoopCritical.
	Flagged int `json:"flagged"`
	// Held are the pseudo-observations of the marks held weighted.
	Held []HeldStat `json:"held,omitempty"`
}

// Failed counts the flagged observations, and one more for a failed χ²
// test (a test that could be made: with redundancy); 0 for nil.
func (st *NetworkStat) Failed() int {
	if st == nil {
		return 0
	}
	n := st.Flagged
	if st.Redundancy > 0 && !st.ChiSquarePass {
		n++
	}
	return n
}

// HeldStat is the outcome of a mark held weighted: adjusted minus held.
type HeldStat struct {
	Mark      string   `json:"mark"`
	ResidualM float64  `json:"residual_m"`
	SDM       float64  `json:"residual_sd_m"`
	W         *float64 `json:"w"`
	Flagged   bool     `json:"flagged"`
}

// NetworkStatOf gives the statistics of a network solution as they are
// stored and shown. The held marks' pseudo-observations (Held) are left to
// the caller, which knows how each was held.
func NetworkStatOf(sol *NetworkSolution) *NetworkStat {
	st := sol.Stats
	return &NetworkStat{Points: len(sol.Points), Sections: len(sol.Sections), Observations: st.Observations,
		Unknowns: st.Unknowns, Redundancy: st.Redundancy, VTPV: st.VTPV, VarianceFactor: Finite(st.VarianceFactor),
		Alpha: st.ChiSquare.Alpha, ChiSquareLower: Finite(st.ChiSquare.Lower), ChiSquareUpper: Finite(st.ChiSquare.Upper),
		ChiSquarePass: st.ChiSquare.Pass, SnoopCritical: st.SnoopCritical, Snooping: st.Snooping.String(),
		SnoopLevel: st.SnoopLevel, SnoopTestable: st.SnoopTestable, SnoopTests: st.SnoopTests, SnoopExpected: st.SnoopExpected,
		Flagged: st.Flagged}
}

// LargestWFirst returns the indices i < n of the flagged observations,
// ordered by |w(i)| from the largest (the likeliest blunder first), ties
// in index order.
func LargestWFirst(n int, flagged func(i int) bool, w func(i int) float64) []int {
	var idx []int
	for i := range n {
		if flagged(i) {
			idx = append(idx, i)
		}
	}
	slices.SortStableFunc(idx, func(a, b int) int { return cmp.Compare(math.Abs(w(b)), math.Abs(w(a))) })
	return idx
}

// Finite is &x, or nil when x is NaN or infinite.
func Finite(x float64) *float64 {
	if math.IsNaN(x) || math.IsInf(x, 0) {
		return nil
	}
	return &x
}
