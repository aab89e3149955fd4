package adjust

import (
	"cairn/internal/standards"
	"cairn/internal/units"
)

// DraftSide is a mark a run sighted only by an intermediate sight: not a
// point of any section of the draft, so it gets its height carried from
// the adjusted section whose setup took the sight (reduce.SideShot).
type DraftSide struct {
	Point string
	// Line is the sight's book line; Section the seq of its section.
	Line    int
	Section int
	// DhM is H(Point) − H(section's From) as levelled.
	DhM float64
	// AlongM is the length levelled from From to the instrument (nil
	// without distances); AlongSetups the setups to it, its own counted as
	// one half.
	AlongM      *float64
	AlongSetups float64
}

// SideStat says which result is a side shot: a height from one
// intermediate sight, with no check of its own.
type SideStat struct {
	Mark    string `json:"mark"`
	RunID   int64  `json:"run_id"`
	Line    int    `json:"line"`
	Section int    `json:"section"`
	From    string `json:"from"`
}

// DoubleRunStat compares a section of one run with a section of another
// run levelled the other way between the same marks: the two differences
// should sum to zero.
type DoubleRunStat struct {
	From       string   `json:"from"`
	To         string   `json:"to"`
	RunID      int64    `json:"run_id"`
	Seq        int      `json:"section"`
	BackRunID  int64    `json:"back_run_id"`
	BackSeq    int      `json:"back_section"`
	ForwardM   float64  `json:"forward_m"`
	BackwardM  float64  `json:"backward_m"`
	ClosureM   float64  `json:"closure_m"`
	OneWayM    *float64 `json:"one_way_m,omitempty"`
	Class      string   `json:"class,omitempty"`
	AllowableM *float64 `json:"allowable_m,omitempty"`
	Pass       *bool    `json:"pass,omitempty"`
}

// ConnectionStat is a check connection of a draft: two held marks a run
// reaches, the difference it levels between them against their held
// difference.
type ConnectionStat struct {
	RunID      int64    `json:"run_id"`
	From       string   `json:"from"`
	To         string   `json:"to"`
	ObservedM  float64  `json:"observed_m"`
	KnownM     float64  `json:"known_m"`
	LengthM    *float64 `json:"length_m,omitempty"`
	Class      string   `json:"class,omitempty"`
	AllowableM *float64 `json:"allowable_m,omitempty"`
	Pass       *bool    `json:"pass,omitempty"`
	// AsClosure: the pair is a stretch of a proportional draft, judged as
	// its misclosure, not counted twice.
	AsClosure bool `json:"as_closure,omitempty"`
}

// checks adds the draft's side shots, double-run sections between runs
// and check connections, after the method has adjusted the marks.
func (d *Draft) checks(in DraftInput) {
	adjusted := map[string]float64{}
	on := map[string]bool{}
	for _, m := range d.Marks {
		adjusted[m.Point] = m.AdjustedM
	}
	for _, run := range in.Runs {
		for _, s := range run.Sections {
			on[s.From], on[s.To] = true, true
		}
	}
	d.sides(in, adjusted, on)
	d.doubleRuns(in)
	d.connections(in)
}

// sides gives each mark sighted only by intermediate sights its height,
// from its first sight: the section's adjusted From, the levelled
// difference, and the section's correction in proportion to how far
// along it the instrument stood (by length, or by setups when the draft
// distributes or weighs by setups or the section has no length):
//
//	H = H(From) + DhM + f · ((H(To) − H(From)) − dh(section))
//
// For least squares weighted by length this is the height the network
// would give the instrument were its setups points of it (corrections of
// a chain of setups in series are in proportion to their lengths).
func (d *Draft) sides(in DraftInput, adjusted map[string]float64, on map[string]bool) {
	bySetups := in.Method == MethodProportional && in.Distribution == BySetups ||
		in.Method == MethodLeastSquares && in.Network.Weighting == WeightBySetups
	for _, run := range in.Runs {
		for _, sd := range run.Sides {
			if on[sd.Point] {
				continue // a station already: the sight is a check only
			}
			var sec *DraftSection
			for k := range run.Sections {
				if run.Sections[k].Seq == sd.Section {
					sec = &run.Sections[k]
				}
			}
			if sec == nil {
				continue
			}
			from, to := adjusted[sec.From], adjusted[sec.To]
			f := sd.AlongSetups / float64(sec.Setups)
			if !bySetups && sd.AlongM != nil && sec.LengthM != nil && *sec.LengthM > 0 {
				f = *sd.AlongM / *sec.LengthM
			}
			computed := from + sd.DhM
			corr := f * ((to - from) - sec.DhM)
			h := computed + corr
			on[sd.Point] = true
			d.Marks = append(d.Marks, MarkResult{Point: sd.Point, ComputedM: &computed, CorrectionM: &corr, AdjustedM: h,
				Value: units.Format(d.Unit.FromMetres(h), d.Decimals)})
			d.Stats.Sides = append(d.Stats.Sides, SideStat{Mark: sd.Point, RunID: run.ID, Line: sd.Line, Section: sd.Section, From: sec.From})
		}
	}
}

// doubleRuns pairs each section with a section of an earlier run of the
// draft levelled the other way (each once) and compares them against the
// section tolerance of the lower of the two runs' classes
// (standards.DoubleRunAllowableM, K the mean of their lengths).
//
// Each section pairs with the first section, in the draft's order of runs
// and then along the run, that runs between the same marks the other way
// and is not yet paired: the earlier runs' unpaired sections are kept by
// their ends, in that order, so that a draft of 50,000 sections finds its
// pairs in one pass rather than by comparing every two.
func (d *Draft) doubleRuns(in DraftInput) {
	type ends struct{ from, to string }
	type ref struct{ run, sec int }
	waiting := map[ends][]ref{}
	for j := range in.Runs {
		paired := make([]bool, len(in.Runs[j].Sections))
		for b, back := range in.Runs[j].Sections {
			k := ends{back.To, back.From}
			q := waiting[k]
			if len(q) == 0 {
				continue
			}
			i, a := q[0].run, q[0].sec
			if len(q) == 1 {
				delete(waiting, k)
			} else {
				waiting[k] = q[1:]
			}
			paired[b] = true
			fwd := in.Runs[i].Sections[a]
			st := DoubleRunStat{From: fwd.From, To: fwd.To, RunID: in.Runs[i].ID, Seq: fwd.Seq, BackRunID: in.Runs[j].ID, BackSeq: back.Seq,
				ForwardM: fwd.DhM, BackwardM: back.DhM, ClosureM: fwd.DhM + back.DhM}
			if fwd.LengthM != nil && back.LengthM != nil {
				k := (*fwd.LengthM + *back.LengthM) / 2
				st.OneWayM = &k
				if c := WorstClass([]DraftRun{in.Runs[i], in.Runs[j]}); c != "" && k > 0 {
					if tol, ok := in.Runs[i].tolerancesOf(c); ok {
						a := standards.DoubleRunAllowableM(tol, k)
						pass := standards.Within(st.ClosureM, a)
						st.Class, st.AllowableM, st.Pass = string(c), &a, &pass
					}
				}
			}
			d.Stats.DoubleRuns = append(d.Stats.DoubleRuns, st)
		}
		// The run's sections not paired as the return of an earlier one
		// wait for a later run's return.
		for a, fwd := range in.Runs[j].Sections {
			if !paired[a] {
				k := ends{fwd.From, fwd.To}
				waiting[k] = append(waiting[k], ref{j, a})
			}
		}
	}
}

// connections compares, run by run, every two held marks the run reaches
// (each at its first reaching): the difference levelled between them
// against their held difference, within the run's class's tolerance for
// the length between them (standards.CheckConnectionAllowableM).
func (d *Draft) connections(in DraftInput) {
	heldM := map[string]float64{}
	for _, h := range in.Held {
		heldM[h.Point] = h.HeightM
	}
	for _, run := range in.Runs {
		if len(run.Sections) == 0 {
			continue
		}
		type stop struct {
			mark      string
			riseM     float64
			lengthM   float64
			hasLength bool
		}
		var stops []stop
		seen := map[string]bool{}
		rise, length, hasLength := 0.0, 0.0, true
		add := func(mark string) {
			if _, ok := heldM[mark]; ok && !seen[mark] {
				seen[mark] = true
				stops = append(stops, stop{mark, rise, length, hasLength})
			}
		}
		add(run.Sections[0].From)
		// Consecutive held marks along the run, as a proportional draft
		// closes its stretches.
		var order []string
		if _, ok := heldM[run.Sections[0].From]; ok {
			order = append(order, run.Sections[0].From)
		}
		for _, s := range run.Sections {
			rise += s.DhM
			if s.LengthM != nil {
				length += *s.LengthM
			} else {
				hasLength = false
			}
			add(s.To)
			if _, ok := heldM[s.To]; ok {
				order = append(order, s.To)
			}
		}
		stretch := map[[2]string]bool{}
		for k := 1; k < len(order); k++ {
			stretch[[2]string{order[k-1], order[k]}] = true
		}
		tol, hasClass := run.tolerances()
		for i := range stops {
			for j := i + 1; j < len(stops); j++ {
				a, b := stops[i], stops[j]
				c := ConnectionStat{RunID: run.ID, From: a.mark, To: b.mark, ObservedM: b.riseM - a.riseM, KnownM: heldM[b.mark] - heldM[a.mark],
					AsClosure: in.Method == MethodProportional && stretch[[2]string{a.mark, b.mark}]}
				if b.hasLength {
					l := b.lengthM - a.lengthM
					c.LengthM = &l
					if hasClass && l > 0 {
						al := standards.CheckConnectionAllowableM(tol, l)
						pass := standards.Within(c.ObservedM-c.KnownM, al)
						c.Class, c.AllowableM, c.Pass = string(tol.Class), &al, &pass
					}
				}
				d.Stats.Connections = append(d.Stats.Connections, c)
			}
		}
	}
}
