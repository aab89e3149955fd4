package standards

// The tolerances of the checks that compare two observations of the same
// difference, each behind one function so that the constant it takes can
// come from elsewhere (an office's own standards) without touching the
// checks that use it.

// DoubleRunAllowableM is the allowable closure, forward + backward, of a
// section levelled both ways, oneWayM its one-way length in metres:
//
//	allowable = SectionMmSqrtKm · √K / 1000   (m), K = oneWayM / 1000 m
//
// Source: FGCC 1984 §3.5, section misclosure (backward and forward), K
// the one-way length of the section (the table's values are from memory:
// docs/references.md#accuracy-classes).
func DoubleRunAllowableM(t Tolerances, oneWayM float64) float64 {
	return t.AllowableSectionM(oneWayM)
}

// CheckConnectionAllowableM is the allowable difference between the
// observed and the published height difference of two published marks a
// run ties to, lengthM the length levelled between them in metres:
//
//	allowable = CheckConnectionMmSqrtKm · √E / 1000   (m), E = lengthM / 1000 m
//
// FGCC 1984 (read in its paraphrase, "The GPS Observer", POB, after the
// 1984 standards' leveling network geometry): a check connection is an
// observed elevation difference that agrees with the adjusted difference
// "within the tolerance limits of the new survey". Which of the survey's
// limits is cairn's choice: the profile's check-connection constant over
// the length between the marks, which the built-in profiles set to the
// loop constant, the tolerance cairn already applies to a line between two
// held marks (common practice); an office's file may set its own.
func CheckConnectionAllowableM(t Tolerances, lengthM float64) float64 {
	return t.AllowableCheckConnectionM(lengthM)
}
