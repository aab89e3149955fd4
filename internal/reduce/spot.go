package reduce

import (
	"fmt"

	"cairn/internal/levelbook"
	"cairn/internal/standards"
)

// SpotHeight is the reduced height of a spot height: a point that is not a
// mark (a floor level, an invert, a ground shot), declared in the book and
// sighted by an intermediate sight.
type SpotHeight struct {
	// Line is the sighting's line in the book; Setup the 1-based number of
	// its setup.
	Line  int    `json:"line"`
	Setup int    `json:"setup"`
	Point string `json:"point"`
	// HeightM is the point's height: the setup's height of instrument
	// minus the intermediate sight.
	HeightM float64 `json:"height_m"`
	Note    string  `json:"note,omitempty"`
}

// HeldSight is an intermediate sight on a held mark, compared with the
// mark's held height as a check.
type HeldSight struct {
	Line  int    `json:"line"`
	Setup int    `json:"setup"`
	Point string `json:"point"`
	// HeightM is the height the sight gives (height of instrument minus
	// the sight), HeldM the mark's held height, DifferenceM = HeightM −
	// HeldM.
	HeightM     float64 `json:"height_m"`
	HeldM       float64 `json:"held_m"`
	DifferenceM float64 `json:"difference_m"`
	// LengthM is the length levelled between the first held mark the run
	// reaches (from which the heights are computed) and the sighted mark,
	// the intermediate sight included; meaningful when HasLength.
	LengthM   float64 `json:"length_m"`
	HasLength bool    `json:"has_length"`
	// AllowableM is the class's allowable misclosure over LengthM;
	// meaningful when HasAllowable. Pass reports |DifferenceM| ≤
	// AllowableM.
	AllowableM   float64 `json:"allowable_m"`
	HasAllowable bool    `json:"has_allowable"`
	Pass         bool    `json:"pass"`
}

// spotHeights lists the spot heights and the intermediate sights on held
// marks, after the heights are anchored.
func (r *Result) spotHeights(rows []Row) {
	r.SpotHeights = []SpotHeight{}
	r.HeldSights = []HeldSight{}
	for _, row := range rows {
		if row.Sight != levelbook.Intermediate {
			continue
		}
		if row.Spot {
			r.SpotHeights = append(r.SpotHeights, SpotHeight{Line: row.Line, Setup: row.Setup, Point: row.Point, HeightM: row.HeightM, Note: row.Note})
			continue
		}
		held, ok := r.Held[row.Point]
		if !ok || !r.anchored {
			continue
		}
		hs := HeldSight{Line: row.Line, Setup: row.Setup, Point: row.Point, HeightM: row.HeightM, HeldM: held, DifferenceM: row.HeightM - held}
		hs.LengthM, hs.HasLength = r.lengthFromAnchor(row)
		if r.Tolerances != nil && hs.HasLength && hs.LengthM > 0 {
			hs.AllowableM = r.Tolerances.AllowableLoopM(hs.LengthM)
			hs.HasAllowable = true
			hs.Pass = standards.Within(hs.DifferenceM, hs.AllowableM)
		}
		r.HeldSights = append(r.HeldSights, hs)
	}
}

// lengthFromAnchor returns the length levelled between the anchoring row
// (the first backsight or foresight on a held mark) and the intermediate
// sight Rows[i]: the backsight and foresight lengths of the setups between
// them, and of the intermediate sight's own setup the backsight (anchor
// before it) or the foresight (anchor after it), plus the intermediate
// sight itself. ok is false when a sight on the way has no length.
func (r *Result) lengthFromAnchor(row Row) (length float64, ok bool) {
	k := row.Setup - 1
	st := r.setupLen(k)
	if !row.HasDistance || !st.has {
		return 0, false
	}
	a := r.anchorAt
	// The anchor is the backsight point of setup ja (0-based), or the end
	// of the run when ja == len(r.Setups).
	ja := a.Setup - 1
	if a.Sight == levelbook.Foresight {
		ja++
	}
	from, to := ja, k
	length = st.back + row.DistanceM
	if ja > k {
		from, to = k+1, ja
		length = st.fore + row.DistanceM
	}
	for j := from; j < to; j++ {
		sj := r.setupLen(j)
		if !sj.has {
			return 0, false
		}
		length += sj.back + sj.fore
	}
	return length, true
}

// setupLen gives the sight lengths of setup j (0-based).
func (r *Result) setupLen(j int) setupLen {
	if r.lens != nil {
		return r.lens[j]
	}
	st := &r.Setups[j]
	return setupLen{back: st.BackDistanceM, fore: st.ForeDistanceM, has: st.HasDistances}
}

// checkHeldSights makes the held-sight check: each intermediate sight on a
// held mark within the class's allowable misclosure over the length
// levelled from the first held mark.
func (r *Result) checkHeldSights(c *Check, fail func(k CheckKind, line int, subject string, value, limit float64, format string, a ...any), f, fd func(float64) string) {
	c.Tolerance = "an intermediate sight on a held mark within the allowable misclosure over the length levelled from the first held mark"
	c.Source = "common practice: the class's loop constant, as for a line between two held marks (the standards give no tolerance for an intermediate sight)"
	switch {
	case len(r.HeldSights) == 0:
		c.NotMade, c.Why, c.NotApplicable = "no intermediate sight on a held mark", "no intermediate sight on a held mark", true
		return
	case r.Tolerances == nil:
		c.NotMade, c.Why = "no accuracy class: the differences are shown but not judged", "no class"
		return
	}
	c.Tolerance = fmt.Sprintf("within %g mm·√km over the length levelled from the first held mark (%s)", r.Tolerances.LoopMmSqrtKm, r.Tolerances.Class)
	if r.Tolerances.Source != "" {
		c.Source += "; " + r.Tolerances.Source
	}
	signed := func(m float64) string {
		if s := f(m); m < 0 || s[0] == '-' {
			return s
		} else {
			return "+" + s
		}
	}
	for _, hs := range r.HeldSights {
		c.Checked++
		if !hs.HasAllowable {
			fail(CheckHeldSight, hs.Line, hs.Point, hs.DifferenceM, 0,
				"intermediate sight gives %s, %s from the held height %s, and cannot be judged: a sight on the way has no length",
				f(hs.HeightM), signed(hs.DifferenceM), f(hs.HeldM))
			continue
		}
		if !hs.Pass {
			fail(CheckHeldSight, hs.Line, hs.Point, hs.DifferenceM, hs.AllowableM,
				"intermediate sight gives %s, %s from the held height %s: more than the allowable %s over %s",
				f(hs.HeightM), signed(hs.DifferenceM), f(hs.HeldM), f(hs.AllowableM), fd(hs.LengthM))
		}
	}
}

// checkDoubleRuns makes the double-run check: forward + backward of each
// section levelled both ways within the class's section tolerance over its
// one-way length.
func (r *Result) checkDoubleRuns(c *Check, fail func(k CheckKind, line int, subject string, value, limit float64, format string, a ...any), f, fd func(float64) string) {
	c.Tolerance = "forward + backward of a section levelled both ways within the section tolerance over its one-way length"
	c.Source = "FGCC 1984 §3.5, section misclosure (backward and forward), K the one-way length"
	switch {
	case len(r.DoubleRuns) == 0:
		c.NotMade, c.Why, c.NotApplicable = "no section is levelled both ways", "no double-run section", true
		return
	case r.Tolerances == nil:
		c.NotMade, c.Why = "no accuracy class: the closures are shown but not judged", "no class"
		return
	}
	c.Tolerance = fmt.Sprintf("forward + backward within %g mm·√K, K the one-way length in km (%s)", r.Tolerances.SectionMmSqrtKm, r.Tolerances.Class)
	if r.Tolerances.Source != "" {
		c.Source = r.Tolerances.Source + "; section misclosure, K the one-way length"
	}
	for _, d := range r.DoubleRuns {
		c.Checked++
		subject := d.From + " to " + d.To
		other := "section " + fmt.Sprint(d.Backward)
		if d.OtherRun != 0 {
			other = fmt.Sprintf("run %d, section %d", d.OtherRun, d.Backward)
		}
		line := d.BackwardLines[1]
		if d.OtherRun != 0 {
			line = d.ForwardLines[1]
		}
		if !d.HasAllowable {
			fail(CheckDoubleRun, line, subject, d.ClosureM, 0,
				"forward %s and backward %s (%s) close by %s and cannot be judged: a section has no length",
				f(d.ForwardM), f(d.BackwardM), other, f(d.ClosureM))
			continue
		}
		if !d.Pass {
			fail(CheckDoubleRun, line, subject, d.ClosureM, d.AllowableM,
				"forward %s and backward %s (%s) close by %s, more than the allowable %s over %s one way",
				f(d.ForwardM), f(d.BackwardM), other, f(d.ClosureM), f(d.AllowableM), fd(d.OneWayM))
		}
	}
}
