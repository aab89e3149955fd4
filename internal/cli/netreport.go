package cli

import (
	"fmt"
	"math"
	"strconv"

	"cairn/internal/adjust"
)

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

// snoopingLine is the one wording of data snooping in both reports: the
// sections flagged, against what critical value, what its level applied to
// (each observation, or the network as a whole), and how many observations
// chance alone would flag with no blunder. An adjustment stored before the
// level was kept gives the critical value only.
func snoopingLine(st *adjust.NetworkStat, sections int) string {
	line := fmt.Sprintf("%d section(s) flagged by data snooping (|w| > %.2f", sections, st.SnoopCritical)
	if st.SnoopLevel == 0 {
		return line + ")"
	}
	if st.Snooping == adjust.SnoopFamily.String() {
		family := -math.Expm1(float64(st.SnoopTests) * math.Log1p(-st.SnoopLevel))
		line += fmt.Sprintf(", family-wise: alpha %.3g for the whole network, Šidák's %.3g for each of its %d tests)", family, st.SnoopLevel, st.SnoopTests)
	} else {
		line += fmt.Sprintf(", per observation: alpha %.3g for each of %d tested observations)", st.SnoopLevel, st.SnoopTestable)
	}
	line += fmt.Sprintf("; %s expected by chance with no blunder", expected(st.SnoopExpected))
	if st.Snooping != adjust.SnoopFamily.String() && st.SnoopExpected >= 1 {
		line += "; so many tests flag some by chance: --snooping family tests the network as a whole"
	}
	return line
}

// expected writes an expected count: to two significant figures below 10,
// else as a whole number.
func expected(n float64) string {
	if n < 10 {
		return strconv.FormatFloat(n, 'g', 2, 64)
	}
	return strconv.FormatFloat(math.Round(n), 'f', 0, 64)
}
