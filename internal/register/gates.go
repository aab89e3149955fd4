package register

import (
	"context"
	"encoding/json"
	"fmt"
	"math"
	"math/big"
	"strings"
	"time"

	"cairn/internal/store"
	"cairn/internal/units"
)

// Kinds of failed check that stop a publication (FailedCheck.Kind).
const (
	// CheckMisclosure is a stretch whose misclosure exceeds the allowable
	// of its run's class.
	CheckMisclosure = "misclosure"
	// CheckChiSquare is a least-squares adjustment whose χ² test of the
	// variance factor failed.
	CheckChiSquare = "chi-square"
	// CheckFlaggedSection is a section flagged by data snooping.
	CheckFlaggedSection = "flagged-section"
	// CheckFlaggedHeld is a mark held weighted whose pseudo-observation
	// data snooping flagged: the runs disagree with its held height.
	CheckFlaggedHeld = "flagged-held-mark"
	// CheckStatistics stands for failed checks the stored statistics count
	// but do not detail (it should not occur).
	CheckStatistics = "statistics"
	// CheckHeldCondition is a held mark whose latest condition report, at
	// publication, says disturbed, destroyed or not found.
	CheckHeldCondition = "held-mark-condition"
)

// FailedCheck is one check of a draft adjustment that failed, as its
// publication finds it. Kept as JSON with a publication that accepted it,
// so the field names are a stored format.
type FailedCheck struct {
	Kind string `json:"kind"`
	// Message says what failed, with its numbers: the stretch with its
	// misclosure and allowable, the χ² test with its bounds, the section
	// with its run, book lines and w, the mark with its condition and date.
	Message string `json:"message"`
	RunID   int64  `json:"run_id,omitempty"`
	Mark    string `json:"mark,omitempty"`
}

// gate is one check publication makes of the draft v, in the
// publication's transaction (db): it returns what failed.
type gate func(ctx context.Context, db store.DBTX, v *AdjustmentView) ([]FailedCheck, error)

// gates are the checks of publication, in the order they are reported.
// Each sees the draft as stored and reads, in the publication's own
// transaction, what may have changed since it was made.
var gates = []gate{statisticsGate, heldConditionGate, runVoidedGate}

// runVoidedGate lists the draft's runs voided since it was made: a voided
// run is evidence the office has set aside, and heights from it are not
// published without an acceptance.
func runVoidedGate(ctx context.Context, db store.DBTX, v *AdjustmentView) ([]FailedCheck, error) {
	ids := make([]int64, len(v.Runs))
	for i, r := range v.Runs {
		ids[i] = r.ID
	}
	voided, err := store.RunVoidedList(ctx, db, ids)
	if err != nil {
		return nil, fmt.Errorf("read the voids of the adjustment's runs: %w", err)
	}
	var out []FailedCheck
	for _, r := range v.Runs {
		if vd, ok := voided[r.ID]; ok {
			out = append(out, FailedCheck{Kind: "run-voided", RunID: r.ID,
				Message: fmt.Sprintf("run %d (%s) was voided on %s by %s: %s", r.ID, r.FileName,
					vd.RecordedAt.UTC().Format("2006-01-02 15:04:05Z"), vd.RecordedBy, vd.Reason)})
		}
	}
	return out, nil
}

// failedChecks runs every gate over v and returns the checks that failed,
// in order.
func failedChecks(ctx context.Context, db store.DBTX, v *AdjustmentView) ([]FailedCheck, error) {
	var out []FailedCheck
	for _, g := range gates {
		f, err := g(ctx, db, v)
		if err != nil {
			return nil, err
		}
		out = append(out, f...)
	}
	return out, nil
}

// statisticsGate lists the checks of the stored statistics that failed:
// exactly those adjust.Statistics.Failed counts (the stretches over their
// allowable, a failed χ² test, the flagged sections and weighted held
// marks), so the report of a draft and its publication agree.
func statisticsGate(_ context.Context, _ store.DBTX, v *AdjustmentView) ([]FailedCheck, error) {
	var out []FailedCheck
	for _, s := range v.Statistics.Stretches {
		if s.Pass == nil || *s.Pass || s.AllowableM == nil {
			continue
		}
		out = append(out, FailedCheck{Kind: CheckMisclosure, RunID: s.RunID,
			Message: fmt.Sprintf("run %d, %s to %s: misclosure %+.4f m over %.3f km exceeds the allowable %.4f m (%s)",
				s.RunID, s.From, s.To, s.MisclosureM, s.LengthM/1000, *s.AllowableM, s.Class)})
	}
	if st := v.Statistics.Network; st != nil {
		if st.Redundancy > 0 && !st.ChiSquarePass {
			bounds := "bounds unknown"
			if st.ChiSquareLower != nil && st.ChiSquareUpper != nil {
				bounds = fmt.Sprintf("outside the bounds %.3f to %.3f", *st.ChiSquareLower, *st.ChiSquareUpper)
			}
			out = append(out, FailedCheck{Kind: CheckChiSquare,
				Message: fmt.Sprintf("chi-square test of the variance factor fails: vTPv %.3f %s (alpha %g, redundancy %d)",
					st.VTPV, bounds, st.Alpha, st.Redundancy)})
		}
		files := map[int64]string{}
		for _, r := range v.Runs {
			files[r.ID] = r.FileName
		}
		for _, i := range v.FlaggedSections() {
			s := v.Sections[i]
			out = append(out, FailedCheck{Kind: CheckFlaggedSection, RunID: s.RunID,
				Message: fmt.Sprintf("run %d, section %d, %s to %s (%s lines %d-%d): flagged by data snooping, w %+.2f over the critical value %.2f",
					s.RunID, s.Seq, s.From, s.To, files[s.RunID], s.FirstLine, s.LastLine, *s.W, st.SnoopCritical)})
		}
		for _, h := range st.Held {
			if !h.Flagged || h.W == nil {
				continue
			}
			out = append(out, FailedCheck{Kind: CheckFlaggedHeld, Mark: h.Mark,
				Message: fmt.Sprintf("held mark %s, held weighted: adjusted minus held %+.4f m (sd %.4f), w %+.2f over the critical value %.2f: the runs disagree with its held height",
					h.Mark, h.ResidualM, h.SDM, *h.W, st.SnoopCritical)})
		}
	}
	if n := v.Statistics.Failed() - len(out); n > 0 {
		out = append(out, FailedCheck{Kind: CheckStatistics,
			Message: fmt.Sprintf("%d more failed check(s) counted in the adjustment's statistics (see cairn adjustment show %d)", n, v.Adjustment.ID)})
	}
	return out, nil
}

// heldConditionGate lists the held marks whose latest condition report,
// read now, says disturbed, destroyed or not found: reported since the
// draft was made, or known then and held anyway.
func heldConditionGate(ctx context.Context, db store.DBTX, v *AdjustmentView) ([]FailedCheck, error) {
	ids := make([]int64, len(v.Held))
	for i, h := range v.Held {
		ids[i] = h.MarkID
	}
	latest, err := store.ConditionLatestMany(ctx, db, ids)
	if err != nil {
		return nil, fmt.Errorf("read the condition of the held marks: %w", err)
	}
	var out []FailedCheck
	for _, h := range v.Held {
		c, ok := latest[h.MarkID]
		if !ok || !conditionsInDoubt[c.Condition] {
			continue
		}
		when := "after the draft was made"
		if h.ConditionID != nil && *h.ConditionID == c.ID {
			when = "before the draft was made"
			if v.Adjustment.ConditionReason != "" {
				when += ", and held anyway because: " + v.Adjustment.ConditionReason
			}
		}
		note := ""
		if c.Note != "" {
			note = " (" + c.Note + ")"
		}
		out = append(out, FailedCheck{Kind: CheckHeldCondition, Mark: h.Designation,
			Message: fmt.Sprintf("held mark %s was reported %s on %s%s by %s, %s", h.Designation, c.Condition,
				c.ObservedOn.Format("2006-01-02"), note, c.RecordedBy, when)})
	}
	return out, nil
}

// PublishChecksError refuses the publication of a draft whose checks
// failed, listing them; nothing was written. It can be published anyway by
// accepting the failed checks with a reason (PublishParams.
// AcceptFailedChecks and AcceptReason): the caller words that advice in its
// own terms, on a line after the message.
type PublishChecksError struct {
	AdjustmentID int64
	Checks       []FailedCheck
}

func (e *PublishChecksError) Error() string {
	var b strings.Builder
	fmt.Fprintf(&b, "adjustment %d: %d check(s) failed, nothing was published:", e.AdjustmentID, len(e.Checks))
	for _, c := range e.Checks {
		fmt.Fprintf(&b, "\n  %s: %s", c.Kind, c.Message)
	}
	return b.String()
}

// Acceptance is a publication's acceptance of failed checks: who gave it,
// when, why, and the checks as publication found them.
type Acceptance struct {
	AdjustmentID int64
	Reason       string
	By           string
	At           time.Time
	Checks       []FailedCheck
}

// AcceptanceOf returns the acceptance of failed checks with which a was
// published, nil if there was none.
func AcceptanceOf(a store.Adjustment) (*Acceptance, error) {
	if a.AcceptedReason == "" {
		return nil, nil
	}
	acc := &Acceptance{AdjustmentID: a.ID, Reason: a.AcceptedReason, By: a.StatusBy}
	if a.StatusAt != nil {
		acc.At = *a.StatusAt
	}
	if err := json.Unmarshal(a.AcceptedChecks, &acc.Checks); err != nil {
		return nil, fmt.Errorf("decode the failed checks accepted by adjustment %d: %w", a.ID, err)
	}
	return acc, nil
}

// DefaultLargeChangeM is the change of a published height, in metres, over
// which a publication calls it out (PublishParams.LargeChangeM). Common
// practice, not a standard: 5 cm is more than any class of levelling
// allows between two publications of a sound mark.
const DefaultLargeChangeM = 0.05

// MarkChange is what a publication changes for one mark: the height in
// force before and the one published.
type MarkChange struct {
	Designation string
	// Current is the version in force before (nil for a first height).
	Current *store.Height
	// CurrentValue is Current's value converted exactly to Unit at
	// Decimals; "" when there is none or it is a withdrawal.
	CurrentValue string
	// Value, Unit, Decimals and Class are the new version's.
	Value    string
	Unit     string
	Decimals int
	Class    string
	// Change is Value minus the current value in Unit, exact and signed
	// ("+0.012"); "" when there is no current value. ChangeM is it in
	// metres.
	Change  string
	ChangeM *float64
	// Large says |ChangeM| is over the threshold; UnitChanged that the
	// current version was published in another unit.
	Large       bool
	UnitChanged bool
}

// markChanges lists, for each result v publishes, its change from the
// version in force (latest, by mark), calling out changes over largeM
// metres.
func markChanges(v *AdjustmentView, latest map[int64]store.Height, largeM float64) ([]MarkChange, error) {
	limit := new(big.Rat).SetFloat64(largeM)
	var out []MarkChange
	for _, res := range v.Results {
		if res.Held || res.Value == nil {
			continue
		}
		c := MarkChange{Designation: res.Designation, Value: *res.Value, Unit: *res.Unit, Decimals: *res.Decimals, Class: res.Class}
		cur, ok := latest[res.MarkID]
		if ok {
			c.Current = &cur
		}
		if ok && cur.Value != nil {
			from, err := units.Parse(*cur.Unit)
			if err != nil {
				return nil, err
			}
			to, err := units.Parse(c.Unit)
			if err != nil {
				return nil, err
			}
			c.UnitChanged = from != to
			if c.CurrentValue, err = units.ConvertExact(*cur.Value, from, to, c.Decimals); err != nil {
				return nil, err
			}
			next := store.Height{Value: res.Value, Unit: res.Unit, Decimals: res.Decimals}
			d, err := change(next, cur)
			if err != nil {
				return nil, err
			}
			c.Change = *d
			r, err := units.ParseRat(strings.TrimPrefix(c.Change, "+"))
			if err != nil {
				return nil, err
			}
			r.Mul(r, to.Rat())
			m, _ := r.Float64()
			c.ChangeM = &m
			c.Large = r.Abs(r).Cmp(limit) > 0
		}
		out = append(out, c)
	}
	return out, nil
}

// checkLargeChange checks a threshold of large changes, 0 meaning the
// default.
func checkLargeChange(m float64) (float64, error) {
	switch {
	case m == 0:
		return DefaultLargeChangeM, nil
	case !(m > 0) || math.IsInf(m, 0):
		return 0, inputErr("large-change-m", "the threshold of a large change must be a positive number of metres, not %v", m)
	}
	return m, nil
}
