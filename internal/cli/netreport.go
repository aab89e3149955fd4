package cli

import "fmt"

// noRedundancyLine is the one wording, in both reports, of an adjustment
// whose observations have no redundancy.
const noRedundancyLine = "no redundancy: the observations cannot be checked against each other"

// chiSquareLine is the one wording of a least-squares adjustment's χ² test,
// in the offline report (adjust --sections) and the register's (adjust
// RUN...): what is tested (T = vᵀPv), against which bounds, for how many
// degrees of freedom, and the same bounds on the variance factor T/r.
func chiSquareLine(vtpv, varianceFactor float64, redundancy int, alpha, lower, upper float64, pass bool) string {
	verdict := "passes"
	if !pass {
		verdict = "FAILS"
	}
	r := float64(redundancy)
	return fmt.Sprintf("variance factor %.3f (vTPv %.3f); chi-square test at alpha %g: vTPv against its two-tailed %g%% bounds for %d degrees of freedom, %.3f to %.3f (variance factor %.3f to %.3f): %s",
		varianceFactor, vtpv, alpha, 100*(1-alpha), redundancy, lower, upper, lower/r, upper/r, verdict)
}
