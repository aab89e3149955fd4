package register

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"sort"
	"strings"
	"unicode"

	"github.com/jackc/pgx/v5"

	"cairn/internal/adjust"
	"cairn/internal/standards"
	"cairn/internal/store"
	"cairn/internal/units"
)

// Methods of adjustment.
const (
	MethodProportional = "proportional"
	MethodLeastSquares = "least-squares"
)

// AdjustParams ask for an adjustment of recorded runs against held marks.
type AdjustParams struct {
	// RunIDs are the runs to adjust.
	RunIDs []int64
	// Hold are the marks held at their current heights on Datum: a
	// designation holds the mark fixed; DESIGNATION:SD_MM (least squares
	// only) holds it weighted, with that standard deviation in millimetres.
	Hold []string
	// Marks and Near select, besides RunIDs, every run with a section from
	// or to one of the marks named, or one of the marks within RadiusM
	// metres of Near.
	Marks   []string
	Near    *store.LatLon
	RadiusM float64
	// Datum is the datum code; "" means the one datum on which every held
	// mark has a current height.
	Datum string
	// Method is MethodProportional ("" means it) or MethodLeastSquares.
	Method string
	// LeastSquares are the settings of a least-squares adjustment; its
	// Progress, if set, hears each phase of the solution.
	LeastSquares adjust.NetworkOptions
	// Distribution spreads a proportional adjustment's misclosure by
	// distance or by setups.
	Distribution adjust.Distribution
	// Unit and Decimals set how the heights will be published; "" and nil
	// mean the unit of the held heights and the precision of the runs'
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

// Parameters are the settings of an adjustment, kept with it as JSON.
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
	Weighting     string             `json:"weighting,omitempty"`
	SigmaMM       float64            `json:"sigma_mm,omitempty"`
	Alpha         float64            `json:"alpha,omitempty"`
	SnoopCritical float64            `json:"snoop_critical,omitempty"`
	Minimal       bool               `json:"minimal,omitempty"`
	HoldSDMM      map[string]float64 `json:"hold_sd_mm,omitempty"`
	// How the runs were chosen, besides by number.
	Marks []string `json:"marks,omitempty"`
	Area  string   `json:"area,omitempty"`
}

// Statistics are what an adjustment reports of its fit, kept with it as
// JSON. A proportional adjustment fills Stretches, a least-squares one
// Network.
type Statistics struct {
	Stretches []StretchStat `json:"stretches,omitempty"`
	Network   *NetworkStat  `json:"network,omitempty"`
}

// NetworkStat are the statistics of a least-squares adjustment. Values
// that do not exist without redundancy are null.
type NetworkStat struct {
	Points       int `json:"points"`
	Sections     int `json:"sections"`
	Observations int `json:"observations"` // sections and marks held weighted
	Unknowns     int `json:"unknowns"`
	Redundancy   int `json:"redundancy"`
	// VTPV is vᵀ·Σ⁻¹·v, the χ² test's statistic.
	VTPV           float64  `json:"vtpv"`
	VarianceFactor *float64 `json:"variance_factor"`
	Alpha          float64  `json:"alpha"`
	ChiSquareLower *float64 `json:"chi_square_lower"`
	ChiSquareUpper *float64 `json:"chi_square_upper"`
	// ChiSquarePass is false as well when there is no redundancy.
	ChiSquarePass bool    `json:"chi_square_pass"`
	SnoopCritical float64 `json:"snoop_critical"`
	// Flagged counts the observations (sections and weighted held marks)
	// with |w| over SnoopCritical.
	Flagged int `json:"flagged"`
	// Held are the pseudo-observations of the marks held weighted.
	Held []HeldStat `json:"held,omitempty"`
}

// HeldStat is the outcome of a mark held weighted: adjusted minus held.
type HeldStat struct {
	Mark      string   `json:"mark"`
	ResidualM float64  `json:"residual_m"`
	SDM       float64  `json:"residual_sd_m"`
	W         *float64 `json:"w"`
	Flagged   bool     `json:"flagged"`
}

// StretchStat is the closure of one stretch of a run between held marks.
type StretchStat struct {
	RunID   int64   `json:"run_id"`
	From    string  `json:"from"`
	To      string  `json:"to"`
	LengthM float64 `json:"length_m"`
	Setups  float64 `json:"setups"`
	// MisclosureM is computed minus held at To: positive when the run came
	// in high.
	MisclosureM float64 `json:"misclosure_m"`
	// Class, AllowableM and Pass are set when the run's class is known and
	// the stretch has a length.
	Class      string   `json:"class,omitempty"`
	AllowableM *float64 `json:"allowable_m,omitempty"`
	Pass       *bool    `json:"pass,omitempty"`
}

// AdjustmentView is an adjustment with everything its report shows.
type AdjustmentView struct {
	// Adjustment has ID 0 for a dry run.
	Adjustment store.Adjustment
	Parameters Parameters
	Statistics Statistics
	Runs       []store.Run
	Held       []store.Held
	Results    []store.AdjustmentResult
	// Sections are a least-squares adjustment's section outcomes.
	Sections []store.AdjustmentSection
	// InDoubt are the adjusted (not held) marks whose latest condition
	// report is disturbed, destroyed or not found, as of when the view was
	// made: a height published for them describes a mark that may have
	// moved or be gone.
	InDoubt []MarkInDoubt
}

// MarkInDoubt is an adjusted mark whose latest condition report puts it in
// doubt.
type MarkInDoubt struct {
	Designation string
	Condition   store.Condition
}

// markDoubts fills v.InDoubt from the latest condition reports of the
// marks v adjusts.
func markDoubts(ctx context.Context, db store.DBTX, v *AdjustmentView) error {
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

// Failed counts the stretches whose misclosure exceeds the allowable, or
// for least squares the flagged observations and a failed χ² test.
func (v *AdjustmentView) Failed() int {
	n := 0
	if st := v.Statistics.Network; st != nil {
		n += st.Flagged
		if st.Redundancy > 0 && !st.ChiSquarePass {
			n++
		}
	}
	for _, s := range v.Statistics.Stretches {
		if s.Pass != nil && !*s.Pass {
			n++
		}
	}
	return n
}

// conditionsInDoubt are the conditions that stop a mark being held
// without --allow-condition.
var conditionsInDoubt = map[string]bool{"disturbed": true, "destroyed": true, "not-found": true}

// Adjust adjusts runs against held marks and stores the result as a draft
// (unless DryRun). Nothing is published: see Publish.
func (r *Register) Adjust(ctx context.Context, p AdjustParams) (*AdjustmentView, error) {
	if p.Method == "" {
		p.Method = MethodProportional
	}
	switch {
	case p.Method != MethodProportional && p.Method != MethodLeastSquares:
		return nil, inputErr("method", "unknown method %q (want %s or %s)", p.Method, MethodProportional, MethodLeastSquares)
	case len(p.RunIDs) == 0 && len(p.Marks) == 0 && p.Near == nil:
		return nil, inputErr("run", "name at least one run to adjust (see cairn run list), or choose them with --marks or --area")
	case len(p.Hold) == 0:
		return nil, inputErr("hold", "hold at least one mark (a loop closes on its starting mark; a line needs a mark at each end)")
	case p.AllowCondition && strings.TrimSpace(p.ConditionReason) == "":
		return nil, inputErr("reason", "say why marks in doubt may be held (--reason)")
	case !p.DryRun && strings.TrimSpace(p.By) == "":
		return nil, inputErr("by", "say who makes the adjustment")
	}
	var unit units.Unit
	if p.Unit != "" {
		u, err := units.Parse(p.Unit)
		if err != nil {
			return nil, inputErr("unit", "%v", err)
		}
		unit = u
	}
	if p.Decimals != nil && (*p.Decimals < 0 || *p.Decimals > MaxDecimals) {
		return nil, inputErr("decimals", "%d is outside 0 to %d", *p.Decimals, MaxDecimals)
	}
	if err := checkLeastSquares(&p); err != nil {
		return nil, err
	}
	v := &AdjustmentView{}
	err := r.withTx(ctx, pgx.TxOptions{IsoLevel: pgx.RepeatableRead}, func(tx pgx.Tx) error {
		if err := r.adjust(ctx, tx, p, unit, v); err != nil {
			return err
		}
		if p.DryRun {
			return nil
		}
		return r.storeDraft(ctx, tx, p, v)
	})
	if err != nil {
		return nil, fmt.Errorf("adjust: %w", err)
	}
	return v, nil
}

// adjust computes the adjustment into v.
func (r *Register) adjust(ctx context.Context, tx pgx.Tx, p AdjustParams, unit units.Unit, v *AdjustmentView) error {
	seen := map[int64]bool{}
	for _, id := range p.RunIDs {
		if seen[id] {
			return inputErr("run", "run %d is named twice", id)
		}
		seen[id] = true
	}
	chosen, err := r.runsTouching(ctx, tx, p)
	if err != nil {
		return err
	}
	runIDs := append([]int64(nil), p.RunIDs...)
	for _, id := range chosen {
		if !seen[id] {
			seen[id] = true
			runIDs = append(runIDs, id)
		}
	}
	for _, id := range runIDs {
		run, err := r.run(ctx, tx, id)
		if err != nil {
			return err
		}
		v.Runs = append(v.Runs, run)
	}
	var holds []store.Mark
	heldNames := map[string]bool{}
	holdSD := map[string]float64{} // metres
	for _, h := range p.Hold {
		d, sd, err := splitHold(h)
		if err != nil {
			return err
		}
		m, err := r.mark(ctx, tx, "hold", d, false)
		if err != nil {
			return err
		}
		if heldNames[m.Designation] {
			return inputErr("hold", "%s is held twice", m.Designation)
		}
		heldNames[m.Designation] = true
		holds = append(holds, m)
		if sd > 0 {
			if p.Method != MethodLeastSquares {
				return inputErr("hold", "%s is held weighted (%s); only --method %s holds marks weighted", m.Designation, h, MethodLeastSquares)
			}
			holdSD[m.Designation] = sd
		}
	}
	if len(holds) == 0 {
		return inputErr("hold", "hold at least one mark")
	}
	datum, err := r.adjustDatum(ctx, tx, p.Datum, v.Runs, holds)
	if err != nil {
		return err
	}
	v.Adjustment = store.Adjustment{Method: p.Method, DatumID: datum.ID, DatumCode: datum.Code,
		Status: store.StatusDraft, CreatedBy: strings.TrimSpace(p.By)}
	for _, run := range v.Runs {
		v.Adjustment.RunIDs = append(v.Adjustment.RunIDs, run.ID)
	}

	// The held versions, exactly as current now.
	heldM := map[string]float64{}
	var doubt []string
	for _, m := range holds {
		h, err := store.HeightLatest(ctx, tx, store.HeightLatestParams{MarkID: m.ID, DatumID: datum.ID})
		if errors.Is(err, store.ErrNotFound) || err == nil && h.Value == nil {
			return inputErr("hold", "%s has no current height on %s to hold", m.Designation, datum.Code)
		}
		if err != nil {
			return err
		}
		hm, err := heightMetres(h)
		if err != nil {
			return err
		}
		heldM[m.Designation] = hm
		held := store.Held{Height: h}
		if m.Latest != nil {
			held.ConditionID = &m.Latest.ID
			if conditionsInDoubt[m.Latest.Condition] {
				doubt = append(doubt, fmt.Sprintf("%s (%s, reported %s)", m.Designation, m.Latest.Condition, m.Latest.ObservedOn.Format("2006-01-02")))
			}
		}
		v.Held = append(v.Held, held)
		if unit == "" {
			unit = units.Unit(*h.Unit)
		}
	}
	if len(doubt) > 0 {
		if !p.AllowCondition {
			return inputErr("hold", "the latest condition report of %s puts it in doubt: verify it in the field, or give --allow-condition with --reason to hold it anyway",
				strings.Join(doubt, ", "))
		}
		v.Adjustment.ConditionReason = strings.TrimSpace(p.ConditionReason)
	}

	class := worstClass(v.Runs)
	decimals := adjust.PublishDecimals(class, unit)
	if p.Decimals != nil {
		decimals = *p.Decimals
	}
	v.Parameters = Parameters{Distribution: p.Distribution.String(), Unit: unit.String(), Decimals: decimals,
		Class: string(class)}
	for _, m := range holds {
		v.Parameters.Hold = append(v.Parameters.Hold, m.Designation)
	}
	if p.Method == MethodLeastSquares {
		v.Parameters.Distribution = ""
		lsqParameters(p, holdSD, &v.Parameters)
	}

	secs, err := store.SectionList(ctx, tx, store.SectionListParams{RunIDs: v.Adjustment.RunIDs})
	if err != nil {
		return err
	}
	byRun := map[int64][]store.Section{}
	markIDs := map[string]int64{}
	for _, s := range secs {
		byRun[s.RunID] = append(byRun[s.RunID], s)
		markIDs[s.From], markIDs[s.To] = s.FromMarkID, s.ToMarkID
	}
	reached := map[string]string{} // adjusted mark -> where
	for _, m := range holds {
		if _, ok := markIDs[m.Designation]; !ok {
			return inputErr("hold", "%s is not on run(s) %s", m.Designation, joinIDs(v.Adjustment.RunIDs))
		}
	}
	if p.Method == MethodLeastSquares {
		if err := leastSquares(p, secs, markIDs, holds, heldM, holdSD, class, unit, decimals, v); err != nil {
			return err
		}
	}
	for _, run := range v.Runs {
		if p.Method == MethodLeastSquares {
			break
		}
		stations, err := stationsOf(run, byRun[run.ID], p.Distribution)
		if err != nil {
			return err
		}
		sol, err := adjust.Proportional(adjust.ProportionalInput{Stations: stations, HeldM: heldM,
			Distribution: p.Distribution, Unit: unit, Decimals: decimals})
		if err != nil {
			return inputErr("hold", "run %d: %v", run.ID, strings.TrimPrefix(err.Error(), "adjust: "))
		}
		tol, hasClass := tolerancesOf(run)
		for _, st := range sol.Stretches {
			s := StretchStat{RunID: run.ID, From: st.From, To: st.To, LengthM: st.LengthM, Setups: st.Setups, MisclosureM: st.MisclosureM}
			if hasClass && st.LengthM > 0 {
				a := tol.AllowableLoopM(st.LengthM)
				pass := abs(st.MisclosureM) <= a
				s.Class, s.AllowableM, s.Pass = string(tol.Class), &a, &pass
			}
			v.Statistics.Stretches = append(v.Statistics.Stretches, s)
		}
		for k, sr := range sol.Stations {
			where := fmt.Sprintf("run %d, point %d", run.ID, k+1)
			if sr.Held {
				if _, dup := reached[sr.Point]; !dup {
					reached[sr.Point] = where
					v.Results = append(v.Results, store.AdjustmentResult{MarkID: markIDs[sr.Point], Designation: sr.Point,
						Held: true, AdjustedM: sr.AdjustedM, Class: string(class)})
				}
				continue
			}
			if before, dup := reached[sr.Point]; dup {
				return inputErr("run", "%s is reached twice (%s and %s): a proportional adjustment would give it two heights; adjust the runs separately or by least squares",
					sr.Point, before, where)
			}
			reached[sr.Point] = where
			computed, corr := sr.ComputedM, sr.CorrectionM
			value, u, dec := sr.Published, unit.String(), decimals
			v.Results = append(v.Results, store.AdjustmentResult{MarkID: markIDs[sr.Point], Designation: sr.Point,
				ComputedM: &computed, CorrectionM: &corr, AdjustedM: sr.AdjustedM,
				Value: &value, Unit: &u, Decimals: &dec, Class: string(class)})
		}
	}

	// The versions publishing would replace.
	ids := make([]int64, len(v.Results))
	for i := range v.Results {
		ids[i] = v.Results[i].MarkID
		v.Results[i].Seq = i + 1
	}
	latest, err := store.HeightLatestMany(ctx, tx, store.HeightLatestManyParams{MarkIDs: ids, DatumID: datum.ID})
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

// storeDraft writes the adjustment computed into v.
func (r *Register) storeDraft(ctx context.Context, tx pgx.Tx, p AdjustParams, v *AdjustmentView) error {
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

// adjustDatum resolves the datum of an adjustment: the one named; else the
// one the runs' books all name (by code or name, ignoring case, spaces and
// punctuation); else the only one on which every held mark has a current
// height.
func (r *Register) adjustDatum(ctx context.Context, tx pgx.Tx, code string, runs []store.Run, holds []store.Mark) (store.Datum, error) {
	if code != "" {
		return r.datum(ctx, tx, "datum", code)
	}
	named := ""
	for i, run := range runs {
		if i > 0 && looseKey(run.Datum) != looseKey(named) {
			named = ""
			break
		}
		named = run.Datum
	}
	if looseKey(named) != "" {
		all, err := store.DatumList(ctx, tx)
		if err != nil {
			return store.Datum{}, err
		}
		for _, d := range all {
			if looseKey(d.Code) == looseKey(named) || looseKey(d.Name) == looseKey(named) {
				return d, nil
			}
		}
	}
	common := map[string]int{}
	for _, m := range holds {
		hs, err := store.HeightAsOf(ctx, tx, store.HeightAsOfParams{MarkID: m.ID})
		if err != nil {
			return store.Datum{}, err
		}
		n := 0
		for _, h := range hs {
			if h.Value != nil {
				common[h.DatumCode]++
				n++
			}
		}
		if n == 0 {
			return store.Datum{}, inputErr("hold", "%s has no current height to hold", m.Designation)
		}
	}
	var codes []string
	for c, n := range common {
		if n == len(holds) {
			codes = append(codes, c)
		}
	}
	sort.Strings(codes)
	switch len(codes) {
	case 1:
		return r.datum(ctx, tx, "datum", codes[0])
	case 0:
		return store.Datum{}, inputErr("hold", "the held marks have no datum on which all of them have a current height")
	}
	return store.Datum{}, inputErr("datum", "the held marks have heights on %s: choose one with --datum", strings.Join(codes, " and "))
}

// stationsOf lays a run's sections end to end as the stations of a
// proportional adjustment: rise, distance and setups from the run's first
// mark.
func stationsOf(run store.Run, secs []store.Section, by adjust.Distribution) ([]adjust.Station, error) {
	if len(secs) == 0 {
		return nil, inputErr("run", "run %d has no sections between marks to adjust", run.ID)
	}
	st := []adjust.Station{{Point: secs[0].From}}
	for i, s := range secs {
		prev := st[len(st)-1]
		if s.From != prev.Point {
			return nil, fmt.Errorf("run %d: section %d starts at %s, not at %s where section %d ended", run.ID, s.Seq, s.From, prev.Point, i)
		}
		next := adjust.Station{Point: s.To, RiseM: prev.RiseM + s.DifferenceM, DistanceM: prev.DistanceM, Setups: prev.Setups + float64(s.Setups)}
		if s.LengthM != nil {
			next.DistanceM += *s.LengthM
		} else if by == adjust.ByDistance {
			return nil, inputErr("by", "run %d has no lengths for section %d (%s to %s): distribute by setups", run.ID, s.Seq, s.From, s.To)
		}
		st = append(st, next)
	}
	return st, nil
}

// worstClass is the lowest accuracy class among the runs' classes; "" if
// any run has none that cairn knows.
func worstClass(runs []store.Run) standards.Class {
	worst := -1
	for _, run := range runs {
		c, err := standards.ParseClass(run.Class)
		if err != nil {
			return ""
		}
		for i, k := range standards.Classes {
			if k == c && i > worst {
				worst = i
			}
		}
	}
	if worst < 0 {
		return ""
	}
	return standards.Classes[worst]
}

func tolerancesOf(run store.Run) (standards.Tolerances, bool) {
	c, err := standards.ParseClass(run.Class)
	if err != nil {
		return standards.Tolerances{}, false
	}
	return standards.For(c), true
}

// heightMetres returns a version's value in metres.
func heightMetres(h store.Height) (float64, error) {
	u, err := units.Parse(*h.Unit)
	if err != nil {
		return 0, err
	}
	v, err := units.ParseRat(*h.Value)
	if err != nil {
		return 0, err
	}
	v.Mul(v, u.Rat())
	f, _ := v.Float64()
	return f, nil
}

// looseKey is s in upper case without spaces and punctuation.
func looseKey(s string) string {
	return strings.Map(func(r rune) rune {
		if unicode.IsLetter(r) || unicode.IsDigit(r) {
			return unicode.ToUpper(r)
		}
		return -1
	}, s)
}

func joinIDs(ids []int64) string {
	s := make([]string, len(ids))
	for i, id := range ids {
		s[i] = fmt.Sprint(id)
	}
	return strings.Join(s, ", ")
}

func abs(x float64) float64 {
	if x < 0 {
		return -x
	}
	return x
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
	if v.Runs, err = store.AdjustmentRunList(ctx, db, id); err != nil {
		return err
	}
	if v.Held, err = store.AdjustmentHeldList(ctx, db, id); err != nil {
		return err
	}
	if v.Results, err = store.AdjustmentResultList(ctx, db, id); err != nil {
		return err
	}
	if v.Adjustment.Method == MethodLeastSquares {
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
