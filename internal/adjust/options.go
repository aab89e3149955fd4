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
	// SnoopCritical is the critical value of Baarda's data snooping for one
	// observation. Default DefaultSnoopCritical. With SnoopFamily it gives
	// the level α = 2·(1 − Φ(SnoopCritical)) of the whole family instead.
	SnoopCritical float64
	// Snooping says what the level of data snooping applies to: each
	// observation (SnoopPerObservation, the zero value) or the whole
	// network (SnoopFamily).
	Snooping Snooping
	// Minimal holds only the first held mark, fixed, and adjusts every other
	// mark (the held ones included) from it: a minimally constrained
	// adjustment that judges the observations apart from the control.
	Minimal bool
	// Progress, if set, is called with the name of each phase as it begins.
	Progress func(phase string)
}

// Snooping is what the significance level of data snooping applies to.
type Snooping int

const (
	// SnoopPerObservation tests each observation at the level α of
	// SnoopCritical: with no blunder, about n·α of n observations are
	// flagged by chance (a hundred of 100,000 at α = 0.001).
	SnoopPerObservation Snooping = iota
	// SnoopFamily tests the network as a whole at level α: each of its n
	// tests at Šidák's level
	//
	//	αᵢ = 1 − (1 − α)^(1/n),
	//
	// so that with no blunder the chance of flagging any observation is α
	// (Šidák, Z., "Rectangular confidence regions for the means of
	// multivariate normal distributions", Journal of the American
	// Statistical Association 62, 1967, pp. 626-633; from memory). n counts
	// the distinct tests: sections in series between two junctions share one
	// w and are one test.
	SnoopFamily
)

// String returns the name of s as the command line writes it.
func (s Snooping) String() string {
	if s == SnoopFamily {
		return "family"
	}
	return "per-observation"
}

// ParseSnooping reads "per-observation" (or "") and "family".
func ParseSnooping(s string) (Snooping, error) {
	switch s {
	case "", "per-observation":
		return SnoopPerObservation, nil
	case "family":
		return SnoopFamily, nil
	}
	return 0, fmt.Errorf("unknown snooping %q (want per-observation or family)", s)
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
	// Field is "weighting", "sigma_m", "alpha", "snoop_critical" or
	// "snooping".
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
	case o.Snooping != SnoopPerObservation && o.Snooping != SnoopFamily:
		return &OptionError{Field: "snooping", Value: float64(o.Snooping), Must: "be per-observation or family"}
	}
	return nil
}
