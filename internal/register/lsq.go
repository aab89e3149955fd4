package register

import (
	"context"
	"errors"
	"fmt"
	"math"
	"strconv"
	"strings"

	"github.com/jackc/pgx/v5"

	"cairn/internal/adjust"
	"cairn/internal/standards"
	"cairn/internal/store"
	"cairn/internal/units"
)

// checkLeastSquares checks the settings of a least-squares adjustment and
// fills their defaults; for a proportional one, it refuses them.
func checkLeastSquares(p *AdjustParams) error {
	o := &p.LeastSquares
	if p.Method != MethodLeastSquares {
		switch {
		case o.Weighting != adjust.WeightByLength:
			return inputErr("weight", "weighting goes with --method %s", MethodLeastSquares)
		case o.SigmaM != 0 || o.Alpha != 0 || o.SnoopCritical != 0:
			return inputErr("method", "sigma, alpha and the critical value of data snooping go with --method %s", MethodLeastSquares)
		case o.Minimal:
			return inputErr("minimal", "a minimally constrained adjustment needs --method %s", MethodLeastSquares)
		}
		return nil
	}
	if p.Distribution != adjust.ByDistance {
		return inputErr("by", "--by spreads a proportional misclosure; least squares weighs sections with --weight")
	}
	switch {
	case o.Weighting != adjust.WeightByLength && o.Weighting != adjust.WeightBySetups:
		return inputErr("weight", "unknown weighting %d", o.Weighting)
	case o.SigmaM == 0:
		o.SigmaM = 0.001
	case !(o.SigmaM > 0) || math.IsInf(o.SigmaM, 0):
		return inputErr("sigma", "the a-priori standard deviation must be a positive number of millimetres, not %v", o.SigmaM*1000)
	}
	switch {
	case o.Alpha == 0:
		o.Alpha = 0.05
	case !(o.Alpha > 0 && o.Alpha < 1):
		return inputErr("alpha", "the significance level must lie between 0 and 1, not %v", o.Alpha)
	}
	switch {
	case o.SnoopCritical == 0:
		o.SnoopCritical = adjust.DefaultSnoopCritical
	case !(o.SnoopCritical > 0) || math.IsInf(o.SnoopCritical, 0):
		return inputErr("snoop-critical", "the critical value of data snooping must be positive, not %v", o.SnoopCritical)
	}
	if p.Near != nil && !(p.RadiusM > 0) {
		return inputErr("within", "give the radius of the area, more than zero")
	}
	return nil
}

// splitHold splits a --hold entry: DESIGNATION holds fixed (sd 0),
// DESIGNATION:SD_MM weighted, sd returned in metres. A designation has no
// colon, so the form is unambiguous.
func splitHold(h string) (string, float64, error) {
	d, mm, weighted := strings.Cut(strings.TrimSpace(h), ":")
	if !weighted {
		return d, 0, nil
	}
	v, err := strconv.ParseFloat(strings.TrimSuffix(strings.TrimSpace(mm), "mm"), 64)
	if err != nil || !(v > 0) || math.IsInf(v, 0) {
		return "", 0, inputErr("hold", "%q: after the colon give the held height's standard deviation in millimetres, more than zero (e.g. %s:5)", h, d)
	}
	return d, v / 1000, nil
}

// runsTouching returns the runs with a section from or to one of the marks
// chosen by p.Marks or p.Near (none if neither is given).
func (r *Register) runsTouching(ctx context.Context, tx pgx.Tx, p AdjustParams) ([]int64, error) {
	var ids []int64
	for _, d := range p.Marks {
		m, err := r.mark(ctx, tx, "marks", strings.TrimSpace(d), false)
		if err != nil {
			return nil, err
		}
		ids = append(ids, m.ID)
	}
	if len(p.Marks) > 0 {
		runs, err := store.RunIDsTouchingMarks(ctx, tx, ids)
		if err != nil {
			return nil, err
		}
		if len(runs) == 0 {
			return nil, inputErr("marks", "no recorded run has a section from or to %s", strings.Join(p.Marks, ", "))
		}
		ids = runs
	} else {
		ids = nil
	}
	if p.Near == nil {
		return ids, nil
	}
	near, err := store.MarkList(ctx, tx, store.MarkListParams{Near: p.Near, RadiusM: p.RadiusM})
	if err != nil {
		return nil, err
	}
	where := fmt.Sprintf("%g,%g within %g m", p.Near.Lat, p.Near.Lon, p.RadiusM)
	if len(near) == 0 {
		return nil, inputErr("area", "no mark with a position lies within %s", where)
	}
	mids := make([]int64, len(near))
	for i, m := range near {
		mids[i] = m.ID
	}
	runs, err := store.RunIDsTouchingMarks(ctx, tx, mids)
	if err != nil {
		return nil, err
	}
	if len(runs) == 0 {
		return nil, inputErr("area", "no recorded run has a section from or to the %d mark(s) within %s", len(near), where)
	}
	return append(ids, runs...), nil
}

// lsqParameters records the settings of a least-squares adjustment.
func lsqParameters(p AdjustParams, holdSD map[string]float64, out *Parameters) {
	o := p.LeastSquares
	out.Weighting = "length"
	if o.Weighting == adjust.WeightBySetups {
		out.Weighting = "setups"
	}
	out.SigmaMM, out.Alpha, out.SnoopCritical, out.Minimal = o.SigmaM*1000, o.Alpha, o.SnoopCritical, o.Minimal
	for d, sd := range holdSD {
		if out.HoldSDMM == nil {
			out.HoldSDMM = map[string]float64{}
		}
		out.HoldSDMM[d] = sd * 1000
	}
	out.Marks = p.Marks
	if p.Near != nil {
		out.Area = fmt.Sprintf("%g,%g within %g m", p.Near.Lat, p.Near.Lon, p.RadiusM)
	}
}

// leastSquares adjusts the runs' sections as one network (adjust.
// SolveNetwork): a mark reached by several runs is one unknown. Held marks
// are results with held set, their adjusted height, σ and correction
// (adjusted minus held: 0 for a mark held fixed); with Minimal, every held
// mark but the first is a check mark, adjusted but never published.
func leastSquares(p AdjustParams, secs []store.Section, markIDs map[string]int64, holds []store.Mark,
	heldM, holdSD map[string]float64, class standards.Class, unit units.Unit, decimals int, v *AdjustmentView) error {
	o := p.LeastSquares
	net := adjust.NewNetwork(len(secs))
	for _, s := range secs {
		km := 0.0
		if s.LengthM != nil {
			km = *s.LengthM / 1000
		} else if o.Weighting == adjust.WeightByLength {
			return inputErr("weight", "run %d, section %d (%s to %s, book lines %d-%d) has no length: weigh by setups (--weight setups)",
				s.RunID, s.Seq, s.From, s.To, s.FirstLine, s.LastLine)
		}
		net.AddSection(adjust.Section{From: s.From, To: s.To, DhM: s.DifferenceM, LengthKm: km, Setups: s.Setups})
	}
	for _, m := range holds {
		net.AddHeld(adjust.HeldMark{Point: m.Designation, HeightM: heldM[m.Designation], SigmaM: holdSD[m.Designation]})
	}
	sol, err := adjust.SolveNetwork(net, o)
	var se *adjust.SectionError
	var he *adjust.HeldError
	var ue *adjust.UncontrolledError
	switch {
	case errors.As(err, &se):
		s := secs[se.Index]
		return inputErr("run", "run %d, section %d (%s to %s, book lines %d-%d): %s: %v; leave the run out or adjust it proportionally",
			s.RunID, s.Seq, s.From, s.To, s.FirstLine, s.LastLine, se.Field, se.Err)
	case errors.As(err, &he):
		return inputErr("hold", "%s: %v", he.Point, he.Err)
	case errors.As(err, &ue):
		return inputErr("hold", "%v: hold a mark in each part of the network, or leave out the runs that reach them", ue)
	case errors.Is(err, adjust.ErrEmptyNetwork):
		return inputErr("run", "run(s) %s have no sections between marks to adjust", joinIDs(v.Adjustment.RunIDs))
	case err != nil:
		return err
	}

	isHeld := map[string]bool{}
	for _, m := range holds {
		isHeld[m.Designation] = true
	}
	for _, pt := range sol.Points {
		sd := pt.SDM
		res := store.AdjustmentResult{MarkID: markIDs[pt.Point], Designation: pt.Point, AdjustedM: pt.HeightM,
			SigmaM: &sd, Class: string(class)}
		if isHeld[pt.Point] {
			corr := pt.HeightM - heldM[pt.Point]
			res.Held, res.CorrectionM = true, &corr
		} else {
			value, u, dec := units.Format(unit.FromMetres(pt.HeightM), decimals), unit.String(), decimals
			res.Value, res.Unit, res.Decimals = &value, &u, &dec
		}
		v.Results = append(v.Results, res)
	}
	for i, r := range sol.Sections {
		s := secs[i]
		v.Sections = append(v.Sections, store.AdjustmentSection{RunID: s.RunID, Seq: s.Seq, From: s.From, To: s.To,
			FirstLine: s.FirstLine, LastLine: s.LastLine, ResidualM: r.ResidualM, ResidualSDM: r.SDM,
			W: finitePtr(r.W), Flagged: r.Flagged})
	}
	ns := NewNetworkStat(sol)
	for k, m := range holds {
		if holdSD[m.Designation] > 0 && !(o.Minimal && k > 0) {
			h := sol.Held[k]
			ns.Held = append(ns.Held, HeldStat{Mark: m.Designation, ResidualM: h.ResidualM, SDM: h.SDM, W: finitePtr(h.W), Flagged: h.Flagged})
		}
	}
	v.Statistics.Network = ns
	return nil
}

// NewNetworkStat gives the statistics of a network solution as they are
// stored and shown (values that need redundancy are nil without it). The
// held marks' pseudo-observations are left to the caller, which knows how
// each was held.
func NewNetworkStat(sol *adjust.NetworkSolution) *NetworkStat {
	st := sol.Stats
	return &NetworkStat{Points: len(sol.Points), Sections: len(sol.Sections), Observations: st.Observations,
		Unknowns: st.Unknowns, Redundancy: st.Redundancy, VTPV: st.VTPV, VarianceFactor: finitePtr(st.VarianceFactor),
		Alpha: st.ChiSquare.Alpha, ChiSquareLower: finitePtr(st.ChiSquare.Lower), ChiSquareUpper: finitePtr(st.ChiSquare.Upper),
		ChiSquarePass: st.ChiSquare.Pass, SnoopCritical: st.SnoopCritical, Flagged: st.Flagged}
}

func finitePtr(x float64) *float64 {
	if math.IsNaN(x) || math.IsInf(x, 0) {
		return nil
	}
	return &x
}
