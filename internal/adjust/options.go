package adjust

import (
	"fmt"
	"math"
)

// NetworkOptions are the settings of a network adjustment. The zero value
// means the defaults documented on each field; WithDefaults fills them and
// Validate checks them. They are defaulted and checked here and nowhere
// else: the command line and the register only carry them.
type NetworkOptions struct {
	Weighting Weighting
	// SigmaM is the a-priori standard deviation of unit weight σ₀ in metres:
	// per √km with WeightByLength, per √setup with WeightBySetups.
	// Default DefaultSigmaM.
	SigmaM float64
	// Alpha is the significance level of the two-tailed χ² test of the
	// variance factor. Default DefaultAlpha.
	Alpha float64
	// SnoopCritical is the critical value of Baarda's data snooping.
	// Default DefaultSnoopCritical.
	SnoopCritical float64
	// Minimal holds only the first held mark, fixed, and adjusts every other
	// mark (the held ones included) from it: a minimally constrained
	// adjustment that judges the observations apart from the control.
	Minimal bool
	// Progress, if set, is called with the name of each phase as it begins.
	Progress func(phase string)
}

// Defaults of NetworkOptions.
const (
	// DefaultSigmaM is 1 mm per √km (or per √setup): the a-priori standard
	// deviation of unit weight of careful leveling (common practice).
	DefaultSigmaM = 0.001
	// DefaultAlpha is the significance level of the χ² test (common
	// practice).
	DefaultAlpha = 0.05
	// DefaultSnoopCritical is the default critical value of data snooping:
	// the two-sided standard normal quantile for α = 0.001, 3.2905 rounded
	// (Baarda 1968, Netherlands Geodetic Commission, Publications on
	// Geodesy 2(5), from memory; the quantile is derived in stats_test.go).
	DefaultSnoopCritical = 3.29
)

// WithDefaults returns o with every zero setting replaced by its default.
func (o NetworkOptions) WithDefaults() NetworkOptions {
	if o.SigmaM == 0 {
		o.SigmaM = DefaultSigmaM
	}
	if o.Alpha == 0 {
		o.Alpha = DefaultAlpha
	}
	if o.SnoopCritical == 0 {
		o.SnoopCritical = DefaultSnoopCritical
	}
	return o
}

// OptionError is a setting of NetworkOptions out of its range.
type OptionError struct {
	// Field is "weighting", "sigma_m", "alpha" or "snoop_critical".
	Field string
	Value float64
	// Must says what the value must be ("be positive", ...).
	Must string
}

func (e *OptionError) Error() string {
	return fmt.Sprintf("%s must %s, not %v", e.Field, e.Must, e.Value)
}

// Validate checks o after WithDefaults: it returns an *OptionError naming
// the first setting out of range, or nil.
func (o NetworkOptions) Validate() error {
	switch {
	case o.Weighting != WeightByLength && o.Weighting != WeightBySetups:
		return &OptionError{Field: "weighting", Value: float64(o.Weighting), Must: "be by length or by setups"}
	case !(o.SigmaM > 0) || math.IsInf(o.SigmaM, 0):
		return &OptionError{Field: "sigma_m", Value: o.SigmaM, Must: "be positive"}
	case !(o.Alpha > 0 && o.Alpha < 1):
		return &OptionError{Field: "alpha", Value: o.Alpha, Must: "lie between 0 and 1"}
	case !(o.SnoopCritical > 0) || math.IsInf(o.SnoopCritical, 0):
		return &OptionError{Field: "snoop_critical", Value: o.SnoopCritical, Must: "be positive"}
	}
	return nil
}
