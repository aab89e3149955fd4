package adjust

import (
	"math"

	"gonum.org/v1/gonum/stat/distuv"
)

// ChiSquareTest is the two-tailed test of the a-posteriori variance factor:
// under the hypothesis that the a-priori variances are right,
//
//	T = vᵀ·Σ⁻¹·v = r·ŝ₀²/σ₀² ~ χ²(r),
//
// and the hypothesis is kept when χ²(r; α/2) ≤ T ≤ χ²(r; 1 − α/2)
// (University of New South Wales, GPS surveying course notes, ch. 9.1.4,
// after Harvey 1994).
type ChiSquareTest struct {
	Statistic    float64 // T
	Redundancy   int     // r, the degrees of freedom
	Alpha        float64 // significance level
	Lower, Upper float64 // the χ² quantiles at α/2 and 1 − α/2
	// Pass says Lower ≤ T ≤ Upper; false as well when r = 0 (no test).
	Pass bool
}

// TestVarianceFactor tests T = vtpv with r degrees of freedom at level
// alpha. Without redundancy (r = 0) the bounds are NaN and Pass is false.
func TestVarianceFactor(vtpv float64, r int, alpha float64) ChiSquareTest {
	if !(alpha > 0 && alpha < 1) {
		panic("adjust: alpha must lie in (0, 1)")
	}
	if r < 0 {
		panic("adjust: negative redundancy")
	}
	t := ChiSquareTest{Statistic: vtpv, Redundancy: r, Alpha: alpha, Lower: math.NaN(), Upper: math.NaN()}
	if r == 0 {
		return t
	}
	d := distuv.ChiSquared{K: float64(r)}
	t.Lower = d.Quantile(alpha / 2)
	t.Upper = d.Quantile(1 - alpha/2)
	t.Pass = t.Lower <= vtpv && vtpv <= t.Upper
	return t
}

// SnoopCriticalValue is the critical value of Baarda's data snooping at
// significance level alpha for one observation, the two-sided standard
// normal quantile
//
//	k = Φ⁻¹(1 − α/2),
//
// 3.2905 for α = 0.001.
func SnoopCriticalValue(alpha float64) float64 {
	if !(alpha > 0 && alpha < 1) {
		panic("adjust: alpha must lie in (0, 1)")
	}
	return distuv.UnitNormal.Quantile(1 - alpha/2)
}

// SnoopLevel is the level of one test of data snooping at critical value
// k, the two-sided standard normal tail
//
//	α = 2·Φ(−k),
//
// 0.001 for k = 3.2905 (the inverse of SnoopCriticalValue).
func SnoopLevel(k float64) float64 { return 2 * distuv.UnitNormal.CDF(-k) }

// SidakLevel is the level of each of n tests that gives the family of n
// independent tests the level alpha (Šidák 1967):
//
//	αᵢ = 1 − (1 − α)^(1/n),
//
// computed as −expm1(log1p(−α)/n) so that it keeps its digits for large n.
func SidakLevel(alpha float64, n int) float64 {
	if !(alpha > 0 && alpha < 1) || n < 1 {
		panic("adjust: Šidák level of alpha outside (0, 1) or n < 1")
	}
	return -math.Expm1(math.Log1p(-alpha) / float64(n))
}

// snoopCritical is the two-sided critical value of level a, Φ⁻¹(1 − a/2),
// computed from the lower tail (−Φ⁻¹(a/2)) so that a tiny a keeps its
// digits.
func snoopCritical(a float64) float64 { return -distuv.UnitNormal.Quantile(a / 2) }
