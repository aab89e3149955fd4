package adjust_test

import (
	"math"
	"testing"

	"cairn/internal/adjust"
)

// Two-tailed 95 % bounds of r·ŝ₀²/σ₀², derived from χ² quantiles
// (docs/references.md#least-squares, after UNSW GPS surveying course notes ch. 9.1.4, Harvey
// 1994), to the 4 decimals given there.
func TestVarianceFactorBounds(t *testing.T) {
	for _, c := range []struct {
		r            int
		lower, upper float64
	}{
		{5, 0.8312, 12.8325},
		{6, 1.2373, 14.4494},
		{10, 3.2470, 20.4832},
	} {
		got := adjust.TestVarianceFactor(float64(c.r), c.r, 0.05)
		if math.Abs(got.Lower-c.lower) > 5e-5 || math.Abs(got.Upper-c.upper) > 5e-5 {
			t.Errorf("r = %d: bounds %.4f–%.4f, want %.4f–%.4f", c.r, got.Lower, got.Upper, c.lower, c.upper)
		}
		if !got.Pass {
			t.Errorf("r = %d: T = r fails", c.r)
		}
		if adjust.TestVarianceFactor(c.upper*1.01, c.r, 0.05).Pass || adjust.TestVarianceFactor(c.lower*0.99, c.r, 0.05).Pass {
			t.Errorf("r = %d: values outside the bounds pass", c.r)
		}
	}
	if z := adjust.TestVarianceFactor(0, 0, 0.05); z.Pass || !math.IsNaN(z.Lower) {
		t.Errorf("no redundancy: %+v, want no test", z)
	}
}

// The critical value 3.29 is the two-sided normal quantile for α = 0.001,
// 3.2905 (derived; docs/references.md#least-squares).
func TestSnoopCriticalValue(t *testing.T) {
	if k := adjust.SnoopCriticalValue(0.001); math.Abs(k-3.2905) > 5e-5 {
		t.Errorf("k(0.001) = %.5f, want 3.2905", k)
	}
	if math.Abs(adjust.SnoopCriticalValue(0.001)-adjust.DefaultSnoopCritical) > 0.001 {
		t.Error("default critical value is not the α = 0.001 quantile rounded")
	}
}
