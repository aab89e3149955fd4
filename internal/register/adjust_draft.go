package register

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"strings"

	"github.com/jackc/pgx/v5"

	"cairn/internal/adjust"
	"cairn/internal/store"
	"cairn/internal/units"
)

// draftView fills v with the draft d computed from g: the adjustment, its
// parameters, results, sections and statistics, the versions publishing
// would replace and the adjusted marks in doubt.
func (r *Register) draftView(ctx context.Context, tx pgx.Tx, p AdjustParams, g *gathered, d *adjust.Draft, v *AdjustmentView) error {
	v.Runs, v.Held, v.RunsLeftOut = g.runs, g.held, g.leftOut
	v.Adjustment = store.Adjustment{Method: string(p.Method), DatumID: g.datum.ID, DatumCode: g.datum.Code,
		Status: store.StatusDraft, CreatedBy: strings.TrimSpace(p.By)}
	for _, run := range g.runs {
		v.Adjustment.RunIDs = append(v.Adjustment.RunIDs, run.ID)
	}
	if g.inDoubt {
		v.Adjustment.ConditionReason = strings.TrimSpace(p.ConditionReason)
	}
	v.Parameters = parametersOf(p, g, d)
	v.Statistics = d.Stats

	class, unit := string(d.Class), d.Unit.String()
	ids := make([]int64, len(d.Marks))
	for i, m := range d.Marks {
		res := store.AdjustmentResult{MarkID: g.markIDs[m.Point], Designation: m.Point, Seq: i + 1,
			Held: m.HeldAs != adjust.NotHeld, ComputedM: m.ComputedM, CorrectionM: m.CorrectionM,
			AdjustedM: m.AdjustedM, SigmaM: m.SigmaM, Class: class}
		if !res.Held {
			value, u, dec := m.Value, unit, d.Decimals
			res.Value, res.Unit, res.Decimals = &value, &u, &dec
		}
		v.Results = append(v.Results, res)
		ids[i] = res.MarkID
	}
	for _, s := range d.Sections {
		v.Sections = append(v.Sections, store.AdjustmentSection{RunID: s.RunID, Seq: s.Seq, From: s.From, To: s.To,
			FirstLine: s.FirstLine, LastLine: s.LastLine, ResidualM: s.ResidualM, ResidualSDM: s.SDM,
			W: adjust.Finite(s.W), Flagged: s.Flagged})
	}

	// The versions publishing would replace.
	latest, err := store.HeightLatestKeys(ctx, tx, store.HeightLatestManyParams{MarkIDs: ids, DatumID: g.datum.ID})
	if err != nil {
		return err
	}
	for i := range v.Results {
		if h, ok := latest[v.Results[i].MarkID]; ok && !v.Results[i].Held {
			id, ver := h.ID, h.Version
			v.Results[i].Replaces, v.Results[i].ReplacesVersion = &id, &ver
		}
	}
	v.Adjustment.Results = len(v.Results)
	return markDoubts(ctx, tx, v)
}

// parametersOf records the settings of the adjustment p as computed in d.
func parametersOf(p AdjustParams, g *gathered, d *adjust.Draft) Parameters {
	pm := Parameters{Unit: d.Unit.String(), Decimals: d.Decimals, Class: string(d.Class)}
	for _, m := range g.holds {
		pm.Hold = append(pm.Hold, m.Designation)
	}
	for _, run := range g.leftOut {
		pm.RunsLeftOut = append(pm.RunsLeftOut, run.ID)
	}
	if p.Method != MethodLeastSquares {
		pm.Distribution = p.Distribution.String()
		return pm
	}
	o := p.LeastSquares
	pm.Weighting = "length"
	if o.Weighting == adjust.WeightBySetups {
		pm.Weighting = "setups"
	}
	pm.SigmaMM, pm.Alpha, pm.SnoopCritical, pm.Minimal = o.SigmaM*1000, o.Alpha, o.SnoopCritical, o.Minimal
	if o.Snooping == adjust.SnoopFamily {
		pm.Snooping = o.Snooping.String()
	}
	for k, h := range g.input.Held {
		if h.SigmaM > 0 {
			if pm.HoldSDMM == nil {
				pm.HoldSDMM = map[string]float64{}
			}
			pm.HoldSDMM[g.holds[k].Designation] = h.SigmaM * 1000
		}
	}
	pm.Marks = p.Marks
	if p.Near != nil {
		pm.Area = areaText(p)
	}
	return pm
}

// storeDraft writes the adjustment computed into v.
func (r *Register) storeDraft(ctx context.Context, tx pgx.Tx, v *AdjustmentView) error {
	params, err := json.Marshal(v.Parameters)
	if err != nil {
		return err
	}
	stats, err := json.Marshal(v.Statistics)
	if err != nil {
		return err
	}
	a := &v.Adjustment
	a.ID, err = store.AdjustmentInsert(ctx, tx, store.AdjustmentInsertParams{Method: a.Method, DatumID: a.DatumID,
		Parameters: params, Statistics: stats, ConditionReason: a.ConditionReason, CreatedBy: a.CreatedBy})
	if err != nil {
		return err
	}
	if err := store.AdjustmentRunInsert(ctx, tx, store.AdjustmentRunInsertParams{AdjustmentID: a.ID, RunIDs: a.RunIDs}); err != nil {
		return err
	}
	if err := store.AdjustmentHeldInsert(ctx, tx, store.AdjustmentHeldInsertParams{AdjustmentID: a.ID, Held: v.Held}); err != nil {
		return err
	}
	if _, err := store.AdjustmentResultCopy(ctx, tx, store.AdjustmentResultCopyParams{AdjustmentID: a.ID, Results: v.Results}); err != nil {
		return err
	}
	if len(v.Sections) > 0 {
		if _, err := store.AdjustmentSectionCopy(ctx, tx, store.AdjustmentSectionCopyParams{AdjustmentID: a.ID, Sections: v.Sections}); err != nil {
			return err
		}
	}
	stored, err := store.AdjustmentGet(ctx, tx, store.AdjustmentGetParams{ID: a.ID})
	if err != nil {
		return err
	}
	*a = stored
	return nil
}

// markDoubts fills v.InDoubt from the latest condition reports of the
// marks v adjusts, and v.HeldDoubts with the doubts of the held marks.
func markDoubts(ctx context.Context, db store.DBTX, v *AdjustmentView) error {
	if err := heldDoubts(ctx, db, v); err != nil {
		return err
	}
	var ids []int64
	for _, res := range v.Results {
		if !res.Held {
			ids = append(ids, res.MarkID)
		}
	}
	latest, err := store.ConditionLatestMany(ctx, db, ids)
	if err != nil {
		return fmt.Errorf("read the condition of the adjusted marks: %w", err)
	}
	v.InDoubt = nil
	for _, res := range v.Results {
		if c, ok := latest[res.MarkID]; ok && !res.Held && conditionsInDoubt[c.Condition] {
			v.InDoubt = append(v.InDoubt, MarkInDoubt{Designation: res.Designation, Condition: c})
		}
	}
	return nil
}

// Adjustment returns adjustment id with everything its report shows.
func (r *Register) Adjustment(ctx context.Context, id int64) (*AdjustmentView, error) {
	v := &AdjustmentView{}
	err := r.withTx(ctx, readTx, func(tx pgx.Tx) error {
		return r.adjustmentView(ctx, tx, id, v)
	})
	if err != nil {
		return nil, err
	}
	return v, nil
}

func (r *Register) adjustmentView(ctx context.Context, db store.DBTX, id int64, v *AdjustmentView) error {
	var err error
	v.Adjustment, err = r.adjustment(ctx, db, id, false)
	if err != nil {
		return err
	}
	if err := json.Unmarshal(v.Adjustment.Parameters, &v.Parameters); err != nil {
		return fmt.Errorf("decode parameters of adjustment %d: %w", id, err)
	}
	if err := json.Unmarshal(v.Adjustment.Statistics, &v.Statistics); err != nil {
		return fmt.Errorf("decode statistics of adjustment %d: %w", id, err)
	}
	if v.Accepted, err = AcceptanceOf(v.Adjustment); err != nil {
		return err
	}
	if v.Runs, err = store.AdjustmentRunList(ctx, db, id); err != nil {
		return err
	}
	if v.Held, err = store.AdjustmentHeldList(ctx, db, id); err != nil {
		return err
	}
	if v.Results, err = store.AdjustmentResultList(ctx, db, id); err != nil {
		return err
	}
	if v.Adjustment.Method == string(MethodLeastSquares) {
		if v.Sections, err = store.AdjustmentSectionList(ctx, db, id); err != nil {
			return err
		}
	}
	return markDoubts(ctx, db, v)
}

func (r *Register) adjustment(ctx context.Context, db store.DBTX, id int64, forUpdate bool) (store.Adjustment, error) {
	a, err := store.AdjustmentGet(ctx, db, store.AdjustmentGetParams{ID: id, ForUpdate: forUpdate})
	if errors.Is(err, store.ErrNotFound) {
		return a, inputErr("adjustment", "no adjustment %d in the register (see cairn adjustment list)", id)
	}
	if err != nil {
		return a, fmt.Errorf("look up adjustment %d: %w", id, err)
	}
	return a, nil
}

// AdjustmentListParams filter a listing of adjustments.
type AdjustmentListParams struct {
	// Status keeps the adjustments with this status ("" for all).
	Status string
}

// AdjustmentList lists adjustments, oldest first.
func (r *Register) AdjustmentList(ctx context.Context, p AdjustmentListParams) ([]store.Adjustment, error) {
	switch p.Status {
	case "", store.StatusDraft, store.StatusPublished, store.StatusDiscarded:
	default:
		return nil, inputErr("status", "unknown status %q (want draft, published or discarded)", p.Status)
	}
	return store.AdjustmentList(ctx, r.pool, store.AdjustmentListParams{Status: p.Status})
}

// heldDoubts fills v.HeldDoubts.
func heldDoubts(ctx context.Context, db store.DBTX, v *AdjustmentView) error {
	v.HeldDoubts = map[string]Doubts{}
	if len(v.Held) == 0 {
		return nil
	}
	designations := make([]string, len(v.Held))
	hs := make([]store.Height, len(v.Held))
	for i, h := range v.Held {
		designations[i], hs[i] = h.Designation, h.Height
	}
	marks, err := store.MarkListByDesignations(ctx, db, designations)
	if err != nil {
		return fmt.Errorf("read the held marks: %w", err)
	}
	ds, err := doubtsOf(ctx, db, marks, hs)
	if err != nil {
		return fmt.Errorf("find the doubts of the held marks: %w", err)
	}
	for _, h := range v.Held {
		if d := ds[h.MarkID].Of(h.DatumCode, h.Version); len(d) > 0 {
			v.HeldDoubts[h.Designation] = d
		}
	}
	return nil
}

// checkResults is the last gate before an adjustment's numbers are kept
// or published: every number finite, every adjusted height and every
// value to publish within the plausible range (units.CheckHeightM). A
// result that fails it is refused as an input error on field "result",
// naming the mark or section, and nothing is written. Inputs are bounded
// where they are read, so this refuses only what a computation made of
// them.
func checkResults(results []store.AdjustmentResult, sections []store.AdjustmentSection) error {
	refuse := func(what string, err error) error {
		return inputErr("result", "%s: %v; nothing was stored (check the runs' sections and the held heights)", what, err)
	}
	finite := func(what string, v *float64) error {
		if v != nil && (math.IsNaN(*v) || math.IsInf(*v, 0)) {
			return refuse(what, fmt.Errorf("not a finite number (%v)", *v))
		}
		return nil
	}
	for _, res := range results {
		name := res.Designation
		if err := units.CheckHeightM(res.AdjustedM); err != nil {
			return refuse("the adjusted height of "+name, err)
		}
		for _, f := range []struct {
			what string
			v    *float64
		}{{"computed height", res.ComputedM}, {"correction", res.CorrectionM}, {"standard deviation", res.SigmaM}} {
			if err := finite("the "+f.what+" of "+name, f.v); err != nil {
				return err
			}
		}
		if res.Value != nil {
			unit := ""
			if res.Unit != nil {
				unit = *res.Unit
			}
			u, err := units.Parse(unit)
			if err != nil {
				return refuse("the unit of "+name, err)
			}
			if err := checkValueRange(*res.Value, u); err != nil {
				return refuse(fmt.Sprintf("the height of %s to publish (%s %s)", name, *res.Value, u), err)
			}
		}
	}
	for _, s := range sections {
		what := fmt.Sprintf("run %d, section %d (%s to %s)", s.RunID, s.Seq, s.From, s.To)
		for _, v := range []*float64{&s.ResidualM, &s.ResidualSDM, s.W} {
			if err := finite("the residual of "+what, v); err != nil {
				return err
			}
		}
	}
	return nil
}
