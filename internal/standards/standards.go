// Package standards holds the accuracy classes of differential leveling and
// the tolerances that judge a run, gathered in named, versioned profiles
// (profile.go): two built in, each value with its source and how sure we are
// of it, and the office's own, read from a file (file.go).
//
// Classes carry the order-and-class meaning of the Federal Geodetic Control
// Committee, "Standards and Specifications for Geodetic Control Networks"
// (FGCC, Rockville MD, September 1984). cairn names them in its own words:
// first-I, first-II, second-I, second-II and third.
//
// The built-in profile fgcc-1984 (the default) holds the 1984 field-procedure
// table. Its closure constants, sight lengths, imbalances and ground
// clearance are from memory: the stored copy of the National Geodetic
// Survey's OCR text of the 1984 publication could be read only as far as its
// preface, not its leveling section (docs/references.md#accuracy-classes).
// The profile says so of each value, and so do the reports.
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

// classAliases are the short spellings of order and class in common use
// ("2nd-II" for second order, class II).
var classAliases = map[string]string{
	"1st-i": "first-i", "1st-ii": "first-ii", "2nd-i": "second-i", "2nd-ii": "second-ii", "3rd": "third",
	"first-order-class-i": "first-i", "first-order-class-ii": "first-ii",
	"second-order-class-i": "second-i", "second-order-class-ii": "second-ii", "third-order": "third",
}

// ParseClass reads a class name case-insensitively ("second-ii",
// "Second-II"); spaces and underscores count as hyphens.
func ParseClass(s string) (Class, error) {
	k := strings.ToLower(strings.TrimSpace(s))
	k = strings.NewReplacer(" ", "-", "_", "-").Replace(k)
	if a, ok := classAliases[k]; ok {
		k = a
	}
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

// Tolerances are the limits of one accuracy class in one profile. Lengths
// are in metres; misclosure constants in millimetres per square root of a
// kilometre. A value of 0 in an optional field (MinGroundClearanceM,
// MaxAccuracyMmSqrtKm) means the profile does not give it.
type Tolerances struct {
	Class Class `json:"class"`
	// Profile names the profile the values come from.
	Profile string `json:"profile"`
	// SectionMmSqrtKm is the section misclosure constant of double-run
	// leveling: |backward − forward| ≤ SectionMmSqrtKm·√D mm, with D the
	// one-way section length in km.
	SectionMmSqrtKm float64 `json:"section_mm_sqrt_km"`
	// LoopMmSqrtKm is the loop misclosure constant: |misclosure| ≤
	// LoopMmSqrtKm·√E mm, with E the loop length in km. cairn applies it
	// also to a line closing between two held marks, E being the length of
	// the line between them: that is cairn's choice (docs/methods.md).
	LoopMmSqrtKm float64 `json:"loop_mm_sqrt_km"`
	// MaxSetupImbalanceM is the largest allowed difference between the
	// backsight and foresight lengths of one setup.
	MaxSetupImbalanceM float64 `json:"max_setup_imbalance_m"`
	// MaxSectionImbalanceM is the largest allowed backsight − foresight
	// length difference accumulated over a section (mark to mark).
	MaxSectionImbalanceM float64 `json:"max_section_imbalance_m"`
	// MaxSightM is the longest allowed sight.
	MaxSightM float64 `json:"max_sight_m"`
	// ThreeWireM is the largest allowed difference between the two half
	// intervals of a three-wire reading, |(upper − middle) − (middle −
	// lower)|, in metres; a difference equal to it passes.
	ThreeWireM float64 `json:"three_wire_m"`
	// CheckConnectionMmSqrtKm is the tolerance of a check connection: the
	// observed difference between two published marks agrees with their
	// published difference within CheckConnectionMmSqrtKm·√K mm, K the
	// distance levelled between them in km.
	CheckConnectionMmSqrtKm float64 `json:"check_connection_mm_sqrt_km"`
	// MinGroundClearanceM is the least height of the line of sight above
	// the ground. cairn does not check it (the book carries no clearance).
	MinGroundClearanceM float64 `json:"min_ground_clearance_m"`
	// MaxAccuracyMmSqrtKm is the largest allowed elevation-difference
	// accuracy b = S/√d (mm/√km) of a minimally constrained, correctly
	// weighted least-squares adjustment: S the propagated standard
	// deviation of the height difference in mm, d the distance along the
	// route in km.
	MaxAccuracyMmSqrtKm float64 `json:"max_accuracy_mm_sqrt_km"`
	// Source cites the profile's source in one line, with the status of
	// its values in plain words (Profile.Summary).
	Source string `json:"source"`
	// Provenance gives the source and status of each value, by field.
	Provenance map[Field]Provenance `json:"provenance,omitempty"`
}

// For returns the tolerances of class c in the default profile
// (Default). It panics on a class that is not one of Classes (a
// programmer's mistake: parse names with ParseClass).
func For(c Class) Tolerances {
	t, err := Default().For(c)
	if err != nil {
		panic("standards: " + err.Error())
	}
	return t
}

// AllowableLoopM returns the allowable misclosure in metres of a loop (or of
// a line between two held marks) of the given length in metres:
//
//	allowable = LoopMmSqrtKm · √(length / 1000 m) / 1000   (m)
//
// It is what the misclosure checks of reduce and adjust compare with.
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

// AllowableCheckConnectionM returns the allowable disagreement in metres
// between the observed and the published difference of two marks levelled
// over the given length in metres:
//
//	allowable = CheckConnectionMmSqrtKm · √(length / 1000 m) / 1000   (m)
func (t Tolerances) AllowableCheckConnectionM(lengthM float64) float64 {
	return mmSqrtKm(t.CheckConnectionMmSqrtKm, lengthM)
}

func mmSqrtKm(c, lengthM float64) float64 {
	if lengthM <= 0 {
		return 0
	}
	return c * math.Sqrt(lengthM/1000) / 1000
}

// ThreeWireM is the three-wire half-interval limit of the built-in
// profiles, 0.003 m; each profile carries its own (Tolerances.ThreeWireM).
// Source: US Army Engineer School, subcourse EN0593, §4 ("if the two
// half-intervals differ by more than 0.003 m, reobserve"), read. EN0593
// accepts a difference of exactly 3 mm only after reobservation; cairn
// cannot tell a reobservation in a book and accepts it (docs/methods.md).
const ThreeWireM = 0.003

// ThreeWireSource cites ThreeWireM.
const ThreeWireSource = "US Army Engineer School, subcourse EN0593, §4: half-intervals to agree within 0.003 m (read)"

// StadiaFactor is the usual stadia interval factor of a level, and
// StadiaConstant its usual additive constant (internal-focusing
// instruments): distance = 100 × (upper − lower) + 0. Common practice; the
// factor 100 "often", per the SEG Encyclopedic Dictionary, "Stadia tables".
const (
	StadiaFactor   = 100.0
	StadiaConstant = 0.0
)
