package adjust

import (
	"math"

	"cairn/internal/standards"
	"cairn/internal/units"
)

// PublishDecimals returns the number of decimals to which an adjusted
// height of accuracy class c is published in unit u.
//
// cairn's rule: publish to the coarsest step of 1, 0.1, 0.01, ... of the
// unit that is no larger than half the class's allowable loop misclosure
// over one kilometre,
//
//	step ≤ LoopMmSqrtKm / 2  (mm)
//
// so that rounding never hides more than a quarter of what the class lets a
// kilometre of levelling close by. It gives 0.001 m for every class, 0.001 ft
// for first order and second order class I, and 0.01 ft for second order
// class II and third order. With no class (c == ""), the common practice of
// 0.001 m and 0.01 ft.
func PublishDecimals(c standards.Class, u units.Unit) int {
	if c == "" {
		if u == units.Metre {
			return 3
		}
		return 2
	}
	limitM := standards.For(c).LoopMmSqrtKm / 2 / 1000
	for d := 0; d < 6; d++ {
		if u.ToMetres(math.Pow(10, float64(-d))) <= limitM*(1+1e-12) {
			return d
		}
	}
	return 6
}
