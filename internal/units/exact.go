package units

import (
	"fmt"
	"math/big"
	"strings"
)

// Rat returns the exact length of one unit u in metres.
func (u Unit) Rat() *big.Rat { return u.ratio() }

// ParseRat reads a decimal string as an exact rational number.
func ParseRat(s string) (*big.Rat, error) {
	r, ok := new(big.Rat).SetString(strings.TrimSpace(s))
	if !ok {
		return nil, fmt.Errorf("not a number: %q", s)
	}
	return r, nil
}

// ConvertedDecimals is the number of decimals that keeps about the
// resolution of a value published to decimals places in unit from when it
// is shown in unit to: one more from feet to metres (0.01 ft ≈ 3 mm is
// shown as 0.001 m), one fewer from metres to feet (never below 0), the
// same otherwise (common practice).
func ConvertedDecimals(from, to Unit, decimals int) int {
	switch {
	case from != Metre && to == Metre:
		return decimals + 1
	case from == Metre && to != Metre:
		return max(decimals-1, 0)
	}
	return decimals
}
