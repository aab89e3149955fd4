package register

import (
	"context"
	"errors"
	"fmt"
	"strconv"
	"strings"

	"cairn/internal/adjust"
	"cairn/internal/store"
	"cairn/internal/units"
)

// DraftMismatchError refuses to publish a draft whose stored results are
// not what its stored inputs give: the sections of its runs, the versions
// it held and its stored settings, computed again by adjust.ComputeDraft.
// The register never makes such a draft; one exists only if its rows were
// written, or altered, outside cairn. Nothing was written.
type DraftMismatchError struct {
	AdjustmentID int64
	// Differences are the marks whose result differs, in the order of
	// the stored results, then the marks only the recomputation reaches.
	Differences []ResultDifference
	// Failed, when not empty, says why the stored inputs cannot be
	// computed again at all (Differences is then empty).
	Failed string
}

// ResultDifference is one mark whose stored result is not the one
// computed again: each side as it would be published ("783.456 m, 3
// decimals, class second-order-class-i"), "held" for a held mark, or
// "none" for a mark the side does not have.
type ResultDifference struct {
	Mark               string
	Stored, Recomputed string
}

func (e *DraftMismatchError) Error() string {
	var b strings.Builder
	fmt.Fprintf(&b, "adjustment %d does not follow from its stored inputs, so it is not published (nothing was written): ", e.AdjustmentID)
	if e.Failed != "" {
		fmt.Fprintf(&b, "its runs' sections and held heights can no longer be adjusted (%s)", e.Failed)
	} else {
		for i, d := range e.Differences {
			if i > 0 {
				b.WriteString("; ")
			}
			fmt.Fprintf(&b, "%s is stored as %s, but its runs and held heights give %s", d.Mark, d.Stored, d.Recomputed)
		}
	}
	b.WriteString("; its rows were written or altered outside cairn: adjust again, and review the new draft")
	return b.String()
}

// reproduce computes draft v again from its stored inputs, read in db
// (the sections of its runs, its held versions, its stored parameters),
// and returns a DraftMismatchError unless every published value, unit,
// decimals and class, and the set of marks, held or not, are the stored
// ones.
func reproduce(ctx context.Context, db store.DBTX, v *AdjustmentView) error {
	in, err := storedInput(ctx, db, v)
	if err != nil {
		return err
	}
	d, err := adjust.ComputeDraft(in)
	var de *adjust.DraftError
	if errors.As(err, &de) {
		return &DraftMismatchError{AdjustmentID: v.Adjustment.ID, Failed: de.Error()}
	}
	if err != nil {
		return fmt.Errorf("compute adjustment %d again: %w", v.Adjustment.ID, err)
	}
	again := map[string]string{}
	var order []string
	for _, m := range d.Marks {
		s := "held"
		if m.HeldAs == adjust.NotHeld {
			s = shownResult(m.Value, d.Unit.String(), d.Decimals, string(d.Class))
		}
		again[m.Point] = s
		order = append(order, m.Point)
	}
	e := &DraftMismatchError{AdjustmentID: v.Adjustment.ID}
	stored := map[string]bool{}
	for _, res := range v.Results {
		stored[res.Designation] = true
		s := "held"
		if !res.Held {
			if res.Value == nil || res.Unit == nil || res.Decimals == nil {
				s = "a result without a value"
			} else {
				s = shownResult(*res.Value, *res.Unit, *res.Decimals, res.Class)
			}
		}
		a, ok := again[res.Designation]
		if !ok {
			a = "none (no run of the adjustment reaches it)"
		}
		if s != a {
			e.Differences = append(e.Differences, ResultDifference{Mark: res.Designation, Stored: s, Recomputed: a})
		}
	}
	for _, p := range order {
		if !stored[p] {
			e.Differences = append(e.Differences, ResultDifference{Mark: p, Stored: "none", Recomputed: again[p]})
		}
	}
	if len(e.Differences) > 0 {
		return e
	}
	return nil
}

// shownResult is a result as it would be published, in one text, the
// value normalised to its decimals so that equal values compare equal.
func shownResult(value, unit string, decimals int, class string) string {
	if !plainDecimal(value, decimals) {
		if r, err := units.ParseRat(value); err == nil {
			value = r.FloatString(decimals)
		}
	}
	s := value + " " + unit + ", " + strconv.Itoa(decimals) + " decimals"
	if class != "" {
		s += ", class " + class
	}
	return s
}

// plainDecimal says whether value is already what FloatString(decimals)
// of its rational gives: an optional minus sign, a whole part without
// leading zeros, and exactly decimals digits after the point (none and no
// point for 0 decimals), not a negative zero. The audit compares every
// published value so, and nearly all are written so already; the others
// go through math/big.
func plainDecimal(value string, decimals int) bool {
	s := value
	neg := strings.HasPrefix(s, "-")
	if neg {
		s = s[1:]
	}
	whole, frac, dot := strings.Cut(s, ".")
	if dot != (decimals > 0) || len(frac) != decimals || whole == "" || len(whole) > 1 && whole[0] == '0' {
		return false
	}
	nonzero := false
	for _, part := range [2]string{whole, frac} {
		for i := 0; i < len(part); i++ {
			if part[i] < '0' || part[i] > '9' {
				return false
			}
			nonzero = nonzero || part[i] != '0'
		}
	}
	return nonzero || !neg
}

// storedInput rebuilds the input of draft v from what the register keeps
// of it: its runs' sections and classes, the versions it held in the
// order of its parameters' Hold, and its method and settings.
func storedInput(ctx context.Context, db store.DBTX, v *AdjustmentView) (adjust.DraftInput, error) {
	pm, a := v.Parameters, v.Adjustment
	in := adjust.DraftInput{}
	m, err := adjust.ParseMethod(a.Method)
	if err != nil {
		return in, fmt.Errorf("adjustment %d: %w", a.ID, err)
	}
	in.Method = m
	ids := make([]int64, len(v.Runs))
	for i, run := range v.Runs {
		ids[i] = run.ID
	}
	secs, err := store.SectionList(ctx, db, store.SectionListParams{RunIDs: ids})
	if err != nil {
		return in, err
	}
	byRun := map[int64][]adjust.DraftSection{}
	for _, s := range secs {
		byRun[s.RunID] = append(byRun[s.RunID], adjust.DraftSection{Seq: s.Seq, From: s.From, To: s.To, DhM: s.DifferenceM,
			LengthM: s.LengthM, Setups: s.Setups, FirstLine: s.FirstLine, LastLine: s.LastLine})
	}
	sides, err := sidesOfRuns(ctx, db, v.Runs)
	if err != nil {
		return in, err
	}
	for _, run := range v.Runs {
		in.Runs = append(in.Runs, adjust.DraftRun{ID: run.ID, Class: run.Class, Sections: byRun[run.ID], Sides: sides[run.ID]})
	}
	held := map[string]store.Held{}
	for _, h := range v.Held {
		held[h.Designation] = h
	}
	if len(held) != len(pm.Hold) {
		return in, &DraftMismatchError{AdjustmentID: a.ID, Failed: fmt.Sprintf("it holds %d version(s) but its settings hold %d mark(s) (%s)",
			len(held), len(pm.Hold), strings.Join(pm.Hold, ", "))}
	}
	for _, d := range pm.Hold {
		h, ok := held[d]
		if !ok || h.Value == nil || h.Unit == nil {
			return in, &DraftMismatchError{AdjustmentID: a.ID, Failed: fmt.Sprintf("its settings hold %s, but it keeps no held height of it", d)}
		}
		hm, err := heightMetres(h.Height)
		if err != nil {
			return in, err
		}
		in.Held = append(in.Held, adjust.DraftHeld{Point: d, HeightM: hm, Unit: units.Unit(*h.Unit), SigmaM: pm.HoldSDMM[d] / 1000})
	}
	if in.Method == adjust.MethodLeastSquares {
		in.Network = adjust.NetworkOptions{Weighting: adjust.WeightByLength, SigmaM: pm.SigmaMM / 1000, Alpha: pm.Alpha,
			SnoopCritical: pm.SnoopCritical, Minimal: pm.Minimal}
		if pm.Weighting == "setups" {
			in.Network.Weighting = adjust.WeightBySetups
		}
		if in.Network.Snooping, err = adjust.ParseSnooping(pm.Snooping); err != nil {
			return in, &DraftMismatchError{AdjustmentID: a.ID, Failed: err.Error()}
		}
	} else if in.Distribution, err = adjust.ParseDistribution(pm.Distribution); err != nil {
		return in, &DraftMismatchError{AdjustmentID: a.ID, Failed: err.Error()}
	}
	if pm.Unit != "" {
		u, err := units.Parse(pm.Unit)
		if err != nil {
			return in, &DraftMismatchError{AdjustmentID: a.ID, Failed: err.Error()}
		}
		in.Unit = u
	}
	dec := pm.Decimals
	in.Decimals = &dec
	return in, nil
}
