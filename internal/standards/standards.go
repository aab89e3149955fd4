// Package standards holds the accuracy classes of differential leveling and
// the tolerances that go with them, each with its published source.
//
// Classes carry the order-and-class meaning of the Federal Geodetic Control
// Committee, "Standards and Specifications for Geodetic Control Networks"
// (FGCC, Rockville MD, September 1984), §3.5 (geodetic leveling, field
// procedures). cairn names them in its own words: first-I, first-II,
// second-I, second-II and third.
//
// The numbers of the FGCC 1984 field-procedure table below are from memory:
// the publication was identified but its table could not be read when this
// package was written. Two read sources agree with parts of it: the Montana
// State University ITCM 410 lab "Vertical Control Survey – Three-Wire
// Leveling" (closure constants 3, 4, 6, 8, 12 mm·√km expressed in feet) and
// US Army Engineer School course EN0593, §4-3 (second-order class II,
// 8.4 mm·√K; per-setup stadia imbalance about 10 m).
package standards

import (
	"fmt"
	"math"
	"strings"
)

// Class is an accuracy class of differential leveling (order and class).
type Class string

// The accuracy classes, best first.
const (
	FirstI   Class = "first-I"   // first order, class I
	FirstII  Class = "first-II"  // first order, class II
	SecondI  Class = "second-I"  // second order, class I
	SecondII Class = "second-II" // second order, class II
	Third    Class = "third"     // third order
)

// Classes lists the accuracy classes, best first.
var Classes = []Class{FirstI, FirstII, SecondI, SecondII, Third}

// String returns the class's name as cairn writes it.
func (c Class) String() string { return string(c) }

// ParseClass reads a class name case-insensitively ("second-ii",
// "Second-II"); spaces and underscores count as hyphens.
func ParseClass(s string) (Class, error) {
	k := strings.ToLower(strings.TrimSpace(s))
	k = strings.NewReplacer(" ", "-", "_", "-").Replace(k)
	for _, c := range Classes {
		if strings.ToLower(string(c)) == k {
			return c, nil
		}
	}
	names := make([]string, len(Classes))
	for i, c := range Classes {
		names[i] = string(c)
	}
	return "", fmt.Errorf("unknown accuracy class %q (want %s)", s, strings.Join(names, ", "))
}

// Tolerances are the field-procedure limits of one accuracy class. Lengths
// are in metres; misclosure constants in millimetres per square root of a
// kilometre.
type Tolerances struct {
	Class Class `json:"class"`
	// SectionMmSqrtKm is the section misclosure constant of double-run
	// leveling: |backward − forward| ≤ SectionMmSqrtKm·√D mm, with D the
	// one-way section length in km.
	SectionMmSqrtKm float64 `json:"section_mm_sqrt_km"`
	// LoopMmSqrtKm is the loop misclosure constant: |misclosure| ≤
	// LoopMmSqrtKm·√E mm, with E the loop length in km. cairn applies it
	// also to a line closing between two held marks, E being the length of
	// the line between them.
	LoopMmSqrtKm float64 `json:"loop_mm_sqrt_km"`
	// MaxSetupImbalanceM is the largest allowed difference between the
	// backsight and foresight lengths of one setup.
	MaxSetupImbalanceM float64 `json:"max_setup_imbalance_m"`
	// MaxSectionImbalanceM is the largest allowed backsight − foresight
	// length difference accumulated over a section (mark to mark).
	MaxSectionImbalanceM float64 `json:"max_section_imbalance_m"`
	// MaxSightM is the longest allowed sight.
	MaxSightM float64 `json:"max_sight_m"`
	// MinGroundClearanceM is the least height of the line of sight above
	// the ground. cairn does not check it (the book carries no clearance).
	MinGroundClearanceM float64 `json:"min_ground_clearance_m"`
	// MaxAccuracyMmSqrtKm is the largest allowed elevation-difference
	// accuracy b = S/√d (mm/√km) of a minimally constrained, correctly
	// weighted least-squares adjustment: S the propagated standard
	// deviation of the height difference in mm, d the distance along the
	// route in km. Source: NGS, "Standards & Requirements for Leveling",
	// after FGCC 1984 (read).
	MaxAccuracyMmSqrtKm float64 `json:"max_accuracy_mm_sqrt_km"`
	// Source cites where the field-procedure numbers come from.
	Source string `json:"source"`
}

// Source of the field-procedure table.
const fgcc1984 = "FGCC 1984, Standards and Specifications for Geodetic Control Networks, §3.5 (values from memory)"

// table holds FGCC 1984 §3.5 (from memory) and the NGS b = S/√d limits
// (read), one row per class.
var table = map[Class]Tolerances{
	FirstI:   {Class: FirstI, SectionMmSqrtKm: 3, LoopMmSqrtKm: 4, MaxSetupImbalanceM: 2, MaxSectionImbalanceM: 4, MaxSightM: 50, MinGroundClearanceM: 0.5, MaxAccuracyMmSqrtKm: 0.5, Source: fgcc1984},
	FirstII:  {Class: FirstII, SectionMmSqrtKm: 4, LoopMmSqrtKm: 5, MaxSetupImbalanceM: 5, MaxSectionImbalanceM: 10, MaxSightM: 60, MinGroundClearanceM: 0.5, MaxAccuracyMmSqrtKm: 0.7, Source: fgcc1984},
	SecondI:  {Class: SecondI, SectionMmSqrtKm: 6, LoopMmSqrtKm: 6, MaxSetupImbalanceM: 5, MaxSectionImbalanceM: 10, MaxSightM: 60, MinGroundClearanceM: 0.5, MaxAccuracyMmSqrtKm: 1.0, Source: fgcc1984},
	SecondII: {Class: SecondII, SectionMmSqrtKm: 8, LoopMmSqrtKm: 8, MaxSetupImbalanceM: 10, MaxSectionImbalanceM: 10, MaxSightM: 70, MinGroundClearanceM: 0.5, MaxAccuracyMmSqrtKm: 1.3, Source: fgcc1984},
	Third:    {Class: Third, SectionMmSqrtKm: 12, LoopMmSqrtKm: 12, MaxSetupImbalanceM: 10, MaxSectionImbalanceM: 10, MaxSightM: 90, MinGroundClearanceM: 0.5, MaxAccuracyMmSqrtKm: 2.0, Source: fgcc1984},
}

// For returns the tolerances of class c. It panics on a class that is not
// one of Classes (a programmer's mistake: parse names with ParseClass).
func For(c Class) Tolerances {
	t, ok := table[c]
	if !ok {
		panic("standards: unknown class " + string(c))
	}
	return t
}

// AllowableLoopM returns the allowable misclosure in metres of a loop (or of
// a line between two held marks) of the given length in metres:
//
//	allowable = LoopMmSqrtKm · √(length / 1000 m) / 1000   (m)
func (t Tolerances) AllowableLoopM(lengthM float64) float64 {
	return mmSqrtKm(t.LoopMmSqrtKm, lengthM)
}

// AllowableSectionM returns the allowable backward − forward difference in
// metres of a double-run section of the given one-way length in metres:
//
//	allowable = SectionMmSqrtKm · √(length / 1000 m) / 1000   (m)
func (t Tolerances) AllowableSectionM(lengthM float64) float64 {
	return mmSqrtKm(t.SectionMmSqrtKm, lengthM)
}

func mmSqrtKm(c, lengthM float64) float64 {
	if lengthM <= 0 {
		return 0
	}
	return c * math.Sqrt(lengthM/1000) / 1000
}

// ThreeWireM is the largest allowed difference between the two half
// intervals of a three-wire reading, |(upper − middle) − (middle − lower)|,
// in metres; exactly 3 mm is accepted. It applies to every class. Source: US
// Army Engineer School, course EN0593, §4 ("if the two half-intervals differ
// by more than 0.003 m, reobserve"), read.
const ThreeWireM = 0.003

// ThreeWireSource cites ThreeWireM.
const ThreeWireSource = "US Army Engineer School, course EN0593, §4: half-intervals to agree within 0.003 m"

// StadiaFactor is the usual stadia interval factor of a level, and
// StadiaConstant its usual additive constant (internal-focusing
// instruments): distance = 100 × (upper − lower) + 0. Common practice; the
// factor 100 "often", per the SEG Encyclopedic Dictionary, "Stadia tables".
const (
	StadiaFactor   = 100.0
	StadiaConstant = 0.0
)
