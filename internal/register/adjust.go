package register

import (
	"context"
	"errors"
	"fmt"
	"math"
	"slices"
	"strings"

	"github.com/jackc/pgx/v5"

	"cairn/internal/adjust"
	"cairn/internal/store"
	"cairn/internal/units"
)

// Methods of adjustment.
const (
	MethodProportional = adjust.MethodProportional
	MethodLeastSquares = adjust.MethodLeastSquares
)

// AdjustParams ask for an adjustment of recorded runs against held marks.
type AdjustParams struct {
	// RunIDs are the runs to adjust.
	RunIDs []int64
	// Hold are the marks held at their current heights on Datum, in order
	// (a minimally constrained adjustment holds the first).
	Hold []Hold
	// Marks and Near select, besides RunIDs, every run with a section from
	// or to one of the marks named, or one of the marks within RadiusM
	// metres of Near.
	Marks   []string
	Near    *store.LatLon
	RadiusM float64
	// MarksFrom, if set, says where each of Marks was read (FILE:LINE),
	// for the error that names one the register does not hold; "" for a
	// name given on the command line.
	MarksFrom []string
	// RunsFrom, if set, says where each of RunIDs was read (FILE:LINE),
	// for the errors that name one; "" for a run named on the command
	// line.
	RunsFrom []string
	// Datum is the datum code; "" means the one datum the runs' books name,
	// else the one on which every held mark has a current height.
	Datum string
	// Method is MethodProportional ("" means it) or MethodLeastSquares.
	Method adjust.Method
	// LeastSquares are the settings of a least-squares adjustment (zero
	// values mean their defaults); its Progress, if set, hears each phase
	// of the solution.
	LeastSquares adjust.NetworkOptions
	// Distribution spreads a proportional adjustment's misclosure by
	// distance or by setups.
	Distribution adjust.Distribution
	// Unit and Decimals set how the heights will be published; "" and nil
	// mean the unit of the first held height and the precision of the runs'
	// class in it (adjust.PublishDecimals).
	Unit     string
	Decimals *int
	// AllowCondition holds marks whose latest condition report is
	// disturbed, destroyed or not found; ConditionReason, required with
	// it, says why.
	AllowCondition  bool
	ConditionReason string
	// DryRun computes and reports without storing anything.
	DryRun bool
	// By says who makes the adjustment.
	By string
}

// Hold is a mark held in an adjustment at its current height.
type Hold struct {
	Designation string
	// SigmaM is the standard deviation of the held height in metres, for a
	// mark held weighted by least squares; 0 holds the mark fixed.
	SigmaM float64
}

// HoldFixed holds each of the marks fixed, in the order given.
func HoldFixed(designations ...string) []Hold {
	h := make([]Hold, len(designations))
	for i, d := range designations {
		h[i] = Hold{Designation: d}
	}
	return h
}

// Parameters are the settings of an adjustment, kept with it as JSON (a
// stored format: the names do not change).
type Parameters struct {
	Distribution string   `json:"distribution,omitempty"`
	Unit         string   `json:"unit"`
	Decimals     int      `json:"decimals"`
	Class        string   `json:"class,omitempty"`
	Hold         []string `json:"hold"`
	// Least squares: weighting (length or setups), σ₀ in millimetres per
	// √km or per √setup, the significance level of the χ² test, the
	// critical value of data snooping, whether only the first held mark was
	// held (minimal), and the standard deviations of marks held weighted.
	Weighting     string  `json:"weighting,omitempty"`
	SigmaMM       float64 `json:"sigma_mm,omitempty"`
	Alpha         float64 `json:"alpha,omitempty"`
	SnoopCritical float64 `json:"snoop_critical,omitempty"`
	// Snooping is "family" when data snooping tested the network as a
	// whole (adjust.SnoopFamily); "" per observation.
	Snooping string             `json:"snooping,omitempty"`
	Minimal  bool               `json:"minimal,omitempty"`
	HoldSDMM map[string]float64 `json:"hold_sd_mm,omitempty"`
	// How the runs were chosen, besides by number.
	Marks []string `json:"marks,omitempty"`
	Area  string   `json:"area,omitempty"`
	// RunsLeftOut are the runs chosen by marks or area that were left out
	// because they were voided.
	RunsLeftOut []int64 `json:"runs_left_out,omitempty"`
}

// HeldAs says how the adjustment held a mark (adjust.HoldKind over the
// stored settings).
func (pm Parameters) HeldAs(mark string) adjust.HeldKind {
	k := slices.Index(pm.Hold, mark)
	if k < 0 {
		return adjust.NotHeld
	}
	return adjust.HoldKind(k, pm.HoldSDMM[mark]/1000, pm.Minimal)
}

// AdjustmentView is an adjustment with everything its report shows.
type AdjustmentView struct {
	// Adjustment has ID 0 for a dry run.
	Adjustment store.Adjustment
	Parameters Parameters
	Statistics adjust.Statistics
	Runs       []store.Run
	// RunsLeftOut are the voided runs that the marks or area chose, left
	// out of the adjustment (each with its void); set when the draft is
	// made (a stored adjustment keeps their numbers in Parameters).
	RunsLeftOut []store.Run
	Held        []store.Held
	Results     []store.AdjustmentResult
	// Sections are a least-squares adjustment's section outcomes.
	Sections []store.AdjustmentSection
	// InDoubt are the adjusted (not held) marks whose latest condition
	// report is disturbed, destroyed or not found, as of when the view was
	// made: a height published for them describes a mark that may have
	// moved or be gone.
	InDoubt []MarkInDoubt
	// HeldDoubts are the doubts about the held marks and the versions
	// held, as of when the view was made, by designation (doubtsOf).
	HeldDoubts map[string]Doubts
	// Accepted is the acceptance of failed checks the adjustment was
	// published with; nil for none (and for a draft).
	Accepted *Acceptance
}

// MarkInDoubt is an adjusted mark whose latest condition report puts it in
// doubt.
type MarkInDoubt struct {
	Designation string
	Condition   store.Condition
}

// Failed counts the checks that failed (adjust.Statistics.Failed).
func (v *AdjustmentView) Failed() int { return v.Statistics.Failed() }

// FlaggedSections returns the indices of the flagged sections, largest |w|
// first.
func (v *AdjustmentView) FlaggedSections() []int {
	return adjust.LargestWFirst(len(v.Sections),
		func(i int) bool { return v.Sections[i].Flagged && v.Sections[i].W != nil },
		func(i int) float64 { return *v.Sections[i].W })
}

// conditionsInDoubt are the conditions that stop a mark being held unless
// the condition is allowed with a reason.
var conditionsInDoubt = map[string]bool{"disturbed": true, "destroyed": true, "not-found": true}

// Adjust adjusts runs against held marks and stores the result as a draft
// (unless DryRun). Nothing is published: see Publish.
//
// In one transaction it gathers the draft's input (the runs' sections, the
// held versions with their conditions), computes the draft with
// adjust.ComputeDraft, and stores it.
func (r *Register) Adjust(ctx context.Context, p AdjustParams) (*AdjustmentView, error) {
	if err := p.check(); err != nil {
		return nil, err
	}
	// A draft reads one snapshot (repeatable read) and stamps its commit
	// after every commit before it (migrations/00013): a commit stamped by
	// another writer since the snapshot makes it a conflict. The draft is
	// then made again from the register as it now stands, a few times.
	var v *AdjustmentView
	var err error
	for attempt := 1; ; attempt++ {
		v, err = r.adjustOnce(ctx, p)
		if err == nil || attempt == adjustAttempts || !errors.Is(err, store.ErrConflict) {
			break
		}
	}
	if err != nil {
		return nil, fmt.Errorf("adjust: %w", err)
	}
	return v, nil
}

// adjustAttempts is how many times Adjust makes a draft whose commit
// conflicts with another writer's.
const adjustAttempts = 3

// adjustOnce makes and stores the draft in one transaction.
func (r *Register) adjustOnce(ctx context.Context, p AdjustParams) (*AdjustmentView, error) {
	v := &AdjustmentView{}
	err := r.withTx(ctx, pgx.TxOptions{IsoLevel: pgx.RepeatableRead}, func(tx pgx.Tx) error {
		if err := store.TxNoJIT(ctx, tx); err != nil {
			return err
		}
		g, err := r.gather(ctx, tx, p)
		if err != nil {
			return err
		}
		d, err := adjust.ComputeDraft(g.input)
		var de *adjust.DraftError
		if errors.As(err, &de) {
			return inputErr(de.Field, "%s", de.Msg)
		}
		if err != nil {
			return err
		}
		if err := r.draftView(ctx, tx, p, g, d, v); err != nil {
			return err
		}
		if err := checkResults(v.Results, v.Sections); err != nil {
			return err
		}
		if p.DryRun {
			return nil
		}
		return r.storeDraft(ctx, tx, v)
	})
	if err != nil {
		return nil, err
	}
	return v, nil
}

// check checks p before any reading and fills the defaults of its
// least-squares settings.
func (p *AdjustParams) check() error {
	m, err := adjust.ParseMethod(string(p.Method))
	if err != nil {
		return inputErr("method", "%v", err)
	}
	p.Method = m
	switch {
	case len(p.RunIDs) == 0 && len(p.Marks) == 0 && p.Near == nil:
		return inputErr("run", "name at least one run to adjust (see cairn run list), or choose them by marks or by area")
	case len(p.Hold) == 0:
		return inputErr("hold", "hold at least one mark (a loop closes on its starting mark; a line needs a mark at each end)")
	case p.AllowCondition && strings.TrimSpace(p.ConditionReason) == "":
		return inputErr("reason", "say why marks in doubt may be held")
	case !p.DryRun && strings.TrimSpace(p.By) == "":
		return inputErr("by", "say who makes the adjustment")
	case p.Near != nil && !(p.RadiusM > 0):
		return inputErr("within", "give the radius of the area, more than zero")
	}
	if p.Unit != "" {
		if _, err := units.Parse(p.Unit); err != nil {
			return inputErr("unit", "%v", err)
		}
	}
	if p.Decimals != nil && (*p.Decimals < 0 || *p.Decimals > MaxDecimals) {
		return inputErr("decimals", "%d is outside 0 to %d", *p.Decimals, MaxDecimals)
	}
	seen := map[int64]int{}
	for i, id := range p.RunIDs {
		if j, ok := seen[id]; ok {
			if p.runFrom(i) == "" && p.runFrom(j) == "" {
				return inputErr("run", "run %d is named twice", id)
			}
			at := func(k int) string {
				if f := p.runFrom(k); f != "" {
					return f
				}
				return "the command line"
			}
			return inputErr("runs-file", "run %d is named twice (%s and %s)", id, at(j), at(i))
		}
		seen[id] = i
	}
	for _, h := range p.Hold {
		if !(h.SigmaM >= 0) || math.IsInf(h.SigmaM, 0) {
			return inputErr("hold", "%s: the held height's standard deviation must be zero or a positive number of metres, not %v", h.Designation, h.SigmaM)
		}
		if h.SigmaM > 0 && p.Method != MethodLeastSquares {
			return inputErr("hold", "%s is held weighted; only a least-squares adjustment holds marks weighted", h.Designation)
		}
	}
	o := &p.LeastSquares
	if p.Method != MethodLeastSquares {
		switch {
		case o.Weighting != adjust.WeightByLength:
			return inputErr("weight", "weighting goes with a least-squares adjustment")
		case o.SigmaM != 0 || o.Alpha != 0 || o.SnoopCritical != 0 || o.Snooping != adjust.SnoopPerObservation:
			return inputErr("method", "sigma, alpha and data snooping go with a least-squares adjustment")
		case o.Minimal:
			return inputErr("minimal", "a minimally constrained adjustment is made by least squares")
		}
		return nil
	}
	if p.Distribution != adjust.ByDistance {
		return inputErr("distribute", "a proportional adjustment spreads its misclosure by distance or setups; least squares weighs its sections instead (by length or setups)")
	}
	progress := o.Progress
	*o = o.WithDefaults()
	o.Progress = progress
	var oe *adjust.OptionError
	if err := o.Validate(); errors.As(err, &oe) {
		return inputErr(optionField[oe.Field], "must %s, not %v", oe.Must, optionShown(oe))
	}
	return nil
}

// optionField names the settings of adjust.NetworkOptions as AdjustParams'
// fields are named in errors.
var optionField = map[string]string{"weighting": "weight", "sigma_m": "sigma", "alpha": "alpha", "snoop_critical": "snoop-critical", "snooping": "snooping"}

// optionShown is the rejected value as the user gave it (σ₀ in millimetres).
func optionShown(oe *adjust.OptionError) float64 {
	if oe.Field == "sigma_m" {
		return oe.Value * 1000
	}
	return oe.Value
}

// runFrom is where the i-th of RunIDs was read (RunsFrom), "" for the
// command line.
func (p *AdjustParams) runFrom(i int) string {
	if i < len(p.RunsFrom) {
		return p.RunsFrom[i]
	}
	return ""
}

// runErr is an InputError about run id: of the field runs-file, naming
// the file and line, for a run read from one (RunsFrom), else of run.
func (p *AdjustParams) runErr(id int64, format string, a ...any) error {
	msg := fmt.Sprintf(format, a...)
	if i := slices.Index(p.RunIDs, id); i >= 0 && p.runFrom(i) != "" {
		return &InputError{Field: "runs-file", Msg: p.runFrom(i) + ": " + msg}
	}
	return &InputError{Field: "run", Msg: msg}
}
