package adjust

import (
	"fmt"
	"math"

	"cairn/internal/units"
)

// CheckPoints is the last gate before a network's heights are written:
// every adjusted height finite and within the plausible range
// (units.CheckHeightM), every standard deviation finite. It names the
// first point that fails, or returns nil.
func CheckPoints(points []PointResult) error {
	for _, p := range points {
		if err := units.CheckHeightM(p.HeightM); err != nil {
			return fmt.Errorf("the adjusted height of %s: %w", p.Point, err)
		}
		if math.IsNaN(p.SDM) || math.IsInf(p.SDM, 0) {
			return fmt.Errorf("the standard deviation of %s is not a finite number (%v)", p.Point, p.SDM)
		}
	}
	return nil
}
