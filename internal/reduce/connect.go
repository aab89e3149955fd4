package reduce

import (
	"fmt"
	"maps"
	"slices"

	"cairn/internal/standards"
)

// Connection is a check connection: two marks of known height the run
// ties to, the height difference observed between them along the run
// compared with their known (published or held) difference. The 1984
// standards require new work to make such connections at both ends (see
// standards.CheckConnectionAllowableM).
type Connection struct {
	From string `json:"from"`
	To   string `json:"to"`
	// FromLine and ToLine are the book lines where the run reaches each
	// mark (the first time); FirstSection and LastSection the sections
	// between them.
	FromLine     int `json:"from_line"`
	ToLine       int `json:"to_line"`
	FirstSection int `json:"first_section"`
	LastSection  int `json:"last_section"`
	// ObservedM is H(To) − H(From) as levelled; KnownM the known
	// difference; DifferenceM = ObservedM − KnownM.
	ObservedM   float64 `json:"observed_m"`
	KnownM      float64 `json:"known_m"`
	DifferenceM float64 `json:"difference_m"`
	// LengthM is the length levelled between them; meaningful when
	// HasLength.
	LengthM   float64 `json:"length_m"`
	HasLength bool    `json:"has_length"`
	// AllowableM is standards.CheckConnectionAllowableM over LengthM;
	// meaningful when HasAllowable. Pass reports |DifferenceM| ≤
	// AllowableM.
	AllowableM   float64 `json:"allowable_m"`
	HasAllowable bool    `json:"has_allowable"`
	Pass         bool    `json:"pass"`
	// AsClosure is set when both marks are held and consecutive among the
	// held marks: the same comparison is the line's misclosure, judged
	// there, and is not counted twice.
	AsClosure bool `json:"as_closure,omitempty"`
}

// buildConnections compares every two distinct marks of known height
// (held or published) at the ends of sections, each at its first
// reaching.
func (r *Result) buildConnections(published map[string]float64) {
	r.Connections = []Connection{}
	known := map[string]float64{}
	maps.Copy(known, published)
	maps.Copy(known, r.Held)
	type stop struct {
		mark string
		sec  int // sections before it
		line int
	}
	var stops []stop
	seen := map[string]bool{}
	add := func(mark string, sec, line int) {
		if _, ok := known[mark]; ok && !seen[mark] {
			seen[mark] = true
			stops = append(stops, stop{mark, sec, line})
		}
	}
	add(r.Start, 0, r.Sections[0].FromLine)
	for i, s := range r.Sections {
		add(s.To, i+1, s.ToLine)
	}
	// Consecutive held marks (in the order the run reaches them, again or
	// not) are closed as a line already.
	closed := map[[2]string]bool{}
	for _, ms := range r.Misclosures {
		if ms.Kind == "line" {
			closed[[2]string{ms.From, ms.To}] = true
		}
	}
	for i := range stops {
		for j := i + 1; j < len(stops); j++ {
			a, b := stops[i], stops[j]
			c := Connection{From: a.mark, To: b.mark, FromLine: a.line, ToLine: b.line, FirstSection: a.sec + 1, LastSection: b.sec,
				KnownM: known[b.mark] - known[a.mark], HasLength: true, AsClosure: closed[[2]string{a.mark, b.mark}]}
			for _, s := range r.Sections[a.sec:b.sec] {
				c.ObservedM += s.DifferenceM
				c.LengthM += s.LengthM
				c.HasLength = c.HasLength && s.HasLength
			}
			c.DifferenceM = c.ObservedM - c.KnownM
			if r.Tolerances != nil && c.HasLength && c.LengthM > 0 {
				c.AllowableM, c.HasAllowable = standards.CheckConnectionAllowableM(*r.Tolerances, c.LengthM), true
				c.Pass = standards.Within(c.DifferenceM, c.AllowableM)
			}
			r.Connections = append(r.Connections, c)
		}
	}
}

// checkConnections makes the check-connection check.
func (r *Result) checkConnections(c *Check, fail func(k CheckKind, line int, subject string, value, limit float64, format string, a ...any), f, fd func(float64) string) {
	c.Tolerance = "the observed difference between two marks of known height within the class's tolerance for the length between them"
	c.Source = "FGCC 1984, leveling network geometry: check connections at both ends of new work (read, POB \"The GPS Observer\"); tolerance: cairn's choice, the loop constant"
	switch {
	case len(r.Connections) == 0:
		c.NotMade, c.Why, c.NotApplicable = "the run ties to fewer than two marks of known height", "fewer than two known marks", true
		return
	case r.Tolerances == nil:
		c.NotMade, c.Why = "no accuracy class: the differences are shown but not judged", "no class"
		return
	}
	c.Tolerance = fmt.Sprintf("observed − known within %g mm·√km over the length between the marks (%s)", r.Tolerances.LoopMmSqrtKm, r.Tolerances.Class)
	if r.Tolerances.Source != "" {
		c.Source += "; " + r.Tolerances.Source
	}
	for _, cn := range r.Connections {
		if cn.AsClosure {
			continue // judged as the line's misclosure
		}
		c.Checked++
		subject := cn.From + " to " + cn.To
		if !cn.HasAllowable {
			fail(CheckConnection, cn.ToLine, subject, cn.DifferenceM, 0,
				"observed %s, known %s: differs by %s and cannot be judged: a section between them has no length", f(cn.ObservedM), f(cn.KnownM), f(cn.DifferenceM))
			continue
		}
		if !cn.Pass {
			fail(CheckConnection, cn.ToLine, subject, cn.DifferenceM, cn.AllowableM,
				"observed %s, known %s: differs by %s, more than the allowable %s over %s; one of the marks may have moved",
				f(cn.ObservedM), f(cn.KnownM), f(cn.DifferenceM), f(cn.AllowableM), fd(cn.LengthM))
		}
	}
	if c.Checked == 0 {
		c.NotMade, c.Why, c.NotApplicable = "every pair of known marks is a line between held marks, judged as its misclosure", "closed as lines", true
	}
}

// SuspectMarks are the marks of known height every one of whose check
// connections failed (those judged), sorted: with two marks both, with
// more the one that moved when the others agree.
func (r *Result) SuspectMarks() []string {
	judged, failed := map[string]int{}, map[string]int{}
	for _, c := range r.Connections {
		if c.AsClosure || !c.HasAllowable {
			continue
		}
		for _, m := range []string{c.From, c.To} {
			judged[m]++
			if !c.Pass {
				failed[m]++
			}
		}
	}
	var out []string
	for _, m := range slices.Sorted(maps.Keys(judged)) {
		if failed[m] == judged[m] {
			out = append(out, m)
		}
	}
	return out
}

// SideShot is a mark the run sights by an intermediate sight: its height
// observed from the start of the section whose setup took the sight.
type SideShot struct {
	Point string `json:"point"`
	Line  int    `json:"line"`
	// Section is the number of the section the sight's setup belongs to.
	Section int `json:"section"`
	// DhM is H(Point) − H(section's From) as levelled: the differences of
	// the setups before, the backsight of the sight's setup, minus the
	// intermediate sight.
	DhM float64 `json:"dh_m"`
	// AlongM is the length levelled from the section's From to the
	// instrument (meaningful when HasAlong); AlongSetups the setups from
	// From to the instrument, the sight's own setup counted as one half.
	AlongM      float64 `json:"along_m"`
	HasAlong    bool    `json:"has_along"`
	AlongSetups float64 `json:"along_setups"`
}

// SideShots lists the intermediate sights on marks (not spot heights), in
// field order.
func (r *Result) SideShots() []SideShot {
	var out []SideShot
	for _, row := range r.Rows {
		if row.Sight != "IS" || row.Spot || row.TurningPoint {
			continue
		}
		st := r.Setups[row.Setup-1]
		sec := r.Sections[st.Section-1]
		s := SideShot{Point: row.Point, Line: row.Line, Section: sec.Number, DhM: row.HeightM - sec.FromHeightM,
			HasAlong: st.HasDistances, AlongSetups: float64(st.Number-sec.FirstSetup) + 0.5}
		for _, before := range r.Setups[sec.FirstSetup-1 : st.Number-1] {
			s.AlongM += before.BackDistanceM + before.ForeDistanceM
			s.HasAlong = s.HasAlong && before.HasDistances
		}
		s.AlongM += st.BackDistanceM
		out = append(out, s)
	}
	return out
}

// OtherSection is a section of another recorded run, to compare with the
// book's sections levelled the other way (CompareOtherRuns).
type OtherSection struct {
	RunID               int64
	Seq                 int
	From, To            string
	DhM                 float64
	LengthM             *float64
	FirstLine, LastLine int
}

// CompareOtherRuns pairs each section of the book not levelled back in the
// book itself with a section of another run levelled the other way (the
// latest run first, each section once), adds the comparisons to
// DoubleRuns and makes the checks again.
func (r *Result) CompareOtherRuns(others []OtherSection) {
	inBook := map[int]bool{}
	for _, d := range r.DoubleRuns {
		inBook[d.Forward], inBook[d.Backward] = true, true
	}
	used := make([]bool, len(others))
	added := false
	for _, s := range r.Sections {
		if inBook[s.Number] {
			continue
		}
		best := -1
		for k, o := range others {
			if !used[k] && o.From == s.To && o.To == s.From && (best < 0 || o.RunID > others[best].RunID) {
				best = k
			}
		}
		if best < 0 {
			continue
		}
		o := others[best]
		used[best] = true
		olen := 0.0
		if o.LengthM != nil {
			olen = *o.LengthM
		}
		r.DoubleRuns = append(r.DoubleRuns, r.compareDoubleRun(DoubleRun{
			From: s.From, To: s.To, Forward: s.Number, Backward: o.Seq, OtherRun: o.RunID,
			ForwardLines: [2]int{s.FromLine, s.ToLine}, BackwardLines: [2]int{o.FirstLine, o.LastLine},
			ForwardM: s.DifferenceM, BackwardM: o.DhM,
		}, s.LengthM, olen, s.HasLength && o.LengthM != nil))
		added = true
	}
	if added {
		r.Checks, r.Failures = []Check{}, []Failure{}
		r.check()
	}
}
