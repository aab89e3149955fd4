package adjust

import (
	"fmt"
	"strings"

	"cairn/internal/units"
)

// Distribution says how a stretch's misclosure is spread over its points.
type Distribution int

const (
	// ByDistance spreads the misclosure in proportion to the distance
	// levelled from the start of the stretch (common practice).
	ByDistance Distribution = iota
	// BySetups spreads it in proportion to the number of instrument setups
	// (common practice where terrain makes sight lengths uneven).
	BySetups
)

// String names the distribution as the command line spells it.
func (d Distribution) String() string {
	if d == BySetups {
		return "setups"
	}
	return "distance"
}

// ParseDistribution reads "distance" or "setups".
func ParseDistribution(s string) (Distribution, error) {
	switch strings.ToLower(strings.TrimSpace(s)) {
	case "distance", "length", "":
		return ByDistance, nil
	case "setups", "setup":
		return BySetups, nil
	}
	return 0, fmt.Errorf("unknown distribution %q (want distance or setups)", s)
}

// Station is one point along a run, in field order.
type Station struct {
	// Point is the mark's designation.
	Point string
	// RiseM is the point's observed height above the run's first point, in
	// metres.
	RiseM float64
	// DistanceM is the distance levelled from the run's first point to this
	// point, in metres.
	DistanceM float64
	// Setups is the number of setups from the run's first point to this
	// point; a side shot counts the setup it was read from.
	Setups float64
	// SideShot marks an intermediate sight: the point takes a correction but
	// cannot hold or close a stretch.
	SideShot bool
}

// ProportionalInput is a run to adjust against held marks.
type ProportionalInput struct {
	Stations []Station
	// HeldM gives the held heights, in metres, by designation.
	HeldM map[string]float64
	// Distribution chooses distance or setups.
	Distribution Distribution
	// Unit and Decimals give the precision of published heights.
	Unit     units.Unit
	Decimals int
}

// StationResult is the adjustment of one station.
type StationResult struct {
	Station
	// Stretch indexes ProportionalSolution.Stretches.
	Stretch int
	// ComputedM is the height carried from the stretch's starting held mark,
	// before adjustment, in metres.
	ComputedM float64
	// CorrectionM is added to ComputedM.
	CorrectionM float64
	// AdjustedM is the unrounded adjusted height; for a held mark, its held
	// height.
	AdjustedM float64
	// Published is AdjustedM in the output unit, rounded half away from zero
	// to the output decimals.
	Published string
	// Held is true for the held marks that bound a stretch.
	Held bool
}

// Stretch is the part of a run between two consecutive held marks.
type Stretch struct {
	From, To string
	// First and Last index the stations that bound it.
	First, Last int
	LengthM     float64
	Setups      float64
	// MisclosureM is the computed height at the closing mark minus its held
	// height: positive when the run came in high.
	MisclosureM float64
}

// ProportionalSolution is the result of Proportional.
type ProportionalSolution struct {
	Stations  []StationResult
	Stretches []Stretch
}

// Proportional distributes each stretch's misclosure over its stations.
//
// The run is cut at every held mark it carries through (not side shots);
// each stretch from held mark a to held mark b is adjusted on its own. With
// m the cumulative measure (distance or setups) and E the misclosure,
//
//	H_k = H_a + (rise_k − rise_a)          computed height
//	E   = H_b' − H_b                        computed minus held at b
//	c_k = −E · (m_k − m_a) / (m_b − m_a)    correction
//
// so the correction at the closing mark is exactly −E (the adjustment of
// simple level circuits in Ghilani & Wolf, Elementary Surveying, the chapter
// on leveling; chapter and section from memory).
// A loop is a run that starts and ends on the same held mark.
func Proportional(in ProportionalInput) (*ProportionalSolution, error) {
	var heldAt []int
	for i, s := range in.Stations {
		if _, ok := in.HeldM[s.Point]; ok && !s.SideShot {
			heldAt = append(heldAt, i)
		}
	}
	if len(heldAt) < 2 {
		return nil, fmt.Errorf("adjust: the run must close on held control: hold its first and last marks (a loop closes on its starting mark)")
	}
	first, last := heldAt[0], heldAt[len(heldAt)-1]
	var loose []string
	for i, s := range in.Stations {
		if i < first || i > last {
			loose = append(loose, s.Point)
		}
	}
	if len(loose) > 0 {
		return nil, fmt.Errorf("adjust: %s lie outside the held marks and cannot be adjusted; hold a mark at each end of the run", strings.Join(loose, ", "))
	}

	measure := func(s Station) float64 {
		if in.Distribution == BySetups {
			return s.Setups
		}
		return s.DistanceM
	}
	sol := &ProportionalSolution{Stations: make([]StationResult, len(in.Stations))}
	for n := 0; n+1 < len(heldAt); n++ {
		a, b := heldAt[n], heldAt[n+1]
		sa, sb := in.Stations[a], in.Stations[b]
		ha, hb := in.HeldM[sa.Point], in.HeldM[sb.Point]
		span := measure(sb) - measure(sa)
		if span <= 0 {
			return nil, fmt.Errorf("adjust: stretch %s to %s has no %s to distribute over", sa.Point, sb.Point, in.Distribution)
		}
		misclosure := ha + (sb.RiseM - sa.RiseM) - hb
		sol.Stretches = append(sol.Stretches, Stretch{
			From: sa.Point, To: sb.Point, First: a, Last: b,
			LengthM: sb.DistanceM - sa.DistanceM, Setups: sb.Setups - sa.Setups,
			MisclosureM: misclosure,
		})
		for k := a; k <= b; k++ {
			if k == b && n+2 < len(heldAt) {
				continue // the next stretch starts here
			}
			s := in.Stations[k]
			computed := ha + (s.RiseM - sa.RiseM)
			corr := -misclosure * (measure(s) - measure(sa)) / span
			r := StationResult{Station: s, Stretch: n, ComputedM: computed, CorrectionM: corr, AdjustedM: computed + corr}
			if k == a || k == b {
				r.Held, r.AdjustedM = true, in.HeldM[s.Point]
			}
			sol.Stations[k] = r
		}
	}
	unit := in.Unit
	if unit == "" {
		unit = units.Metre
	}
	for k := range sol.Stations {
		r := &sol.Stations[k]
		r.Published = units.FormatIn(r.AdjustedM, unit, in.Decimals)
	}
	return sol, nil
}
