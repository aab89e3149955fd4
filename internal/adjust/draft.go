package adjust

import (
	"errors"
	"fmt"
	"slices"
	"strings"

	"cairn/internal/standards"
	"cairn/internal/units"
)

// Method is a method of adjustment.
type Method string

// Methods of adjustment.
const (
	// MethodProportional spreads each run's misclosure between consecutive
	// held marks over its points (Proportional).
	MethodProportional Method = "proportional"
	// MethodLeastSquares adjusts every section of the runs as one network
	// (SolveNetwork).
	MethodLeastSquares Method = "least-squares"
)

// ParseMethod reads a method's name; "" means MethodProportional.
func ParseMethod(s string) (Method, error) {
	switch m := Method(strings.TrimSpace(s)); m {
	case "":
		return MethodProportional, nil
	case MethodProportional, MethodLeastSquares:
		return m, nil
	}
	return "", fmt.Errorf("unknown method %q (want %s or %s)", s, MethodProportional, MethodLeastSquares)
}

// DraftInput is everything an adjustment is computed from, gathered by the
// caller: the runs with their sections in field order, and the held marks
// with their held heights.
type DraftInput struct {
	Method Method
	Runs   []DraftRun
	// Held are the held marks in the order given; the first is the one a
	// minimally constrained adjustment holds.
	Held []DraftHeld
	// Distribution spreads a proportional adjustment's misclosure.
	Distribution Distribution
	// Network are the settings of a least-squares adjustment, defaulted and
	// validated by the caller (NetworkOptions.WithDefaults, Validate).
	Network NetworkOptions
	// Unit is the unit of the heights to publish; "" means the unit of the
	// first held height.
	Unit units.Unit
	// Decimals are the decimals of the heights to publish; nil means
	// PublishDecimals of the runs' class in Unit.
	Decimals *int
}

// DraftRun is one recorded run of a draft.
type DraftRun struct {
	ID int64
	// Class is the accuracy class the run's book names, as written; one
	// that standards.ParseClass does not know gives the run no allowable
	// misclosure.
	Class    string
	Sections []DraftSection
	// Standards is the profile that judged the run when it was recorded;
	// nil for the default (standards.Default). Its tolerances judge the
	// run's misclosures here too.
	Standards *standards.Profile
	// Sides are the run's intermediate sights on marks, in field order.
	Sides []DraftSide
}

// tolerances returns the tolerances of the run's class in its profile,
// and false if the class is unknown or the profile does not cover it.
func (r DraftRun) tolerances() (standards.Tolerances, bool) {
	if r.Standards == nil {
		return TolerancesOf(r.Class)
	}
	c, err := standards.ParseClass(r.Class)
	if err != nil {
		return standards.Tolerances{}, false
	}
	t, err := r.Standards.For(c)
	return t, err == nil
}

// tolerancesOf returns the tolerances of class c in the run's profile (a
// comparison of two runs judged by the worse class of the two), and false
// if the profile does not cover it.
func (r DraftRun) tolerancesOf(c standards.Class) (standards.Tolerances, bool) {
	if r.Standards == nil {
		return standards.For(c), true
	}
	t, err := r.Standards.For(c)
	return t, err == nil
}

// DraftSection is one section of a run between two marks, in field order.
type DraftSection struct {
	// Seq numbers the sections of a run along it from 1.
	Seq      int
	From, To string
	// DhM is the observed height(To) − height(From), in metres.
	DhM float64
	// LengthM is the distance levelled in metres; nil when the book gives
	// no distances.
	LengthM *float64
	Setups  int
	// FirstLine and LastLine are the book lines of the section.
	FirstLine, LastLine int
}

// DraftHeld is a mark held in a draft at its current height.
type DraftHeld struct {
	Point   string
	HeightM float64
	// Unit is the unit the held height is published in.
	Unit units.Unit
	// SigmaM is the standard deviation of a mark held weighted (least
	// squares only); 0 holds it fixed.
	SigmaM float64
}

// HeldKind says how a mark is held: by a draft, and by the solver for
// each point (so it is one byte).
type HeldKind uint8

// How a mark is held.
const (
	NotHeld      HeldKind = iota // adjusted
	HeldFixed                    // held at its height
	HeldWeighted                 // held with a standard deviation (least squares)
	HeldCheck                    // held in name only: adjusted from the first held mark (minimal constraint)
)

// HoldKind is how the k-th held mark (from 0) with standard deviation
// sigmaM is held: with minimal, only the first is held, fixed, and the rest
// are check marks; otherwise a mark with sigmaM > 0 is held weighted and
// one with sigmaM = 0 fixed. It is the one rule the solver, the drafts and
// their reports share.
func HoldKind(k int, sigmaM float64, minimal bool) HeldKind {
	switch {
	case minimal && k > 0:
		return HeldCheck
	case minimal || sigmaM == 0:
		return HeldFixed
	}
	return HeldWeighted
}

// Draft is a computed adjustment, ready to be stored and reviewed.
type Draft struct {
	Method Method
	// Class is the lowest accuracy class of the runs; "" if any run names
	// none that cairn knows.
	Class    standards.Class
	Unit     units.Unit
	Decimals int
	// Marks are the results, in report order: a proportional draft's in the
	// order the runs reach them (a held mark once), a least-squares draft's
	// in the order the points first appear in the sections.
	Marks []MarkResult
	// Sections are a least-squares draft's sections, run by run in field
	// order.
	Sections []SectionResult
	Stats    Statistics
}

// MarkResult is the outcome of one mark of a draft.
type MarkResult struct {
	Point  string
	HeldAs HeldKind
	// ComputedM is a proportional draft's height carried from the stretch's
	// first held mark; CorrectionM is added to it. For a mark held by least
	// squares, CorrectionM is adjusted minus held (0 for one held fixed).
	// SigmaM is a least-squares draft's standard deviation. Nil when the
	// method does not give them.
	ComputedM, CorrectionM, SigmaM *float64
	// AdjustedM is unrounded, in metres; for a mark held by a proportional
	// draft, its held height.
	AdjustedM float64
	// Value is the height to publish in the draft's Unit and Decimals,
	// rounded half away from zero; "" for a held mark.
	Value string
}

// SectionResult is the outcome of one section of a least-squares draft.
type SectionResult struct {
	RunID               int64
	Seq                 int
	From, To            string
	FirstLine, LastLine int
	Residual
}

// DraftError is input a draft cannot be computed from. Field names the
// part of the input at fault: "run", "hold", "distribute" or "weight".
type DraftError struct {
	Field string
	Msg   string
}

func (e *DraftError) Error() string { return e.Field + ": " + e.Msg }

func draftErr(field, format string, a ...any) error {
	return &DraftError{Field: field, Msg: fmt.Sprintf(format, a...)}
}

// ComputeDraft computes an adjustment of in.Runs against in.Held by
// in.Method. It reads and writes nothing: the caller gathers the input
// (from the register or elsewhere) and keeps the draft.
//
// Each held mark must be a point of the runs; a proportional draft holds
// every mark fixed and refuses a mark it would reach twice (it would get
// two heights). Bad input is a *DraftError.
func ComputeDraft(in DraftInput) (*Draft, error) {
	if len(in.Held) == 0 {
		return nil, draftErr("hold", "hold at least one mark")
	}
	on := map[string]bool{}
	for _, run := range in.Runs {
		for _, s := range run.Sections {
			on[s.From], on[s.To] = true, true
		}
	}
	for _, h := range in.Held {
		if !on[h.Point] {
			return nil, draftErr("hold", "%s is not on run(s) %s", h.Point, runList(in.Runs))
		}
	}
	d := &Draft{Method: in.Method, Class: WorstClass(in.Runs), Unit: in.Unit}
	if d.Unit == "" {
		d.Unit = in.Held[0].Unit
	}
	d.Decimals = PublishDecimals(d.Class, d.Unit)
	if in.Decimals != nil {
		d.Decimals = *in.Decimals
	}
	var err error
	switch in.Method {
	case MethodProportional:
		err = d.proportional(in)
	case MethodLeastSquares:
		err = d.leastSquares(in)
	default:
		panic(fmt.Sprintf("adjust: unknown method %q", in.Method))
	}
	if err != nil {
		return d, err
	}
	d.checks(in)
	return d, nil
}

// proportional adjusts each run on its own between its held marks.
func (d *Draft) proportional(in DraftInput) error {
	heldM := make(map[string]float64, len(in.Held))
	for _, h := range in.Held {
		if h.SigmaM != 0 {
			return draftErr("hold", "%s is held weighted; only a least-squares adjustment holds marks weighted", h.Point)
		}
		heldM[h.Point] = h.HeightM
	}
	reached := map[string]string{} // mark -> where it was first reached
	for _, run := range in.Runs {
		stations, err := stationsOf(run, in.Distribution)
		if err != nil {
			return err
		}
		sol, err := Proportional(ProportionalInput{Stations: stations, HeldM: heldM,
			Distribution: in.Distribution, Unit: d.Unit, Decimals: d.Decimals})
		if err != nil {
			return draftErr("hold", "run %d: %v", run.ID, strings.TrimPrefix(err.Error(), "adjust: "))
		}
		tol, hasClass := run.tolerances()
		for _, st := range sol.Stretches {
			s := StretchStat{RunID: run.ID, From: st.From, To: st.To, LengthM: st.LengthM, Setups: st.Setups, MisclosureM: st.MisclosureM}
			if hasClass {
				s.Class = string(tol.Class)
			}
			if hasClass && st.LengthM > 0 {
				a := tol.AllowableLoopM(st.LengthM)
				pass := standards.Within(st.MisclosureM, a)
				s.AllowableM, s.Pass = &a, &pass
			}
			d.Stats.Stretches = append(d.Stats.Stretches, s)
		}
		for k, sr := range sol.Stations {
			where := fmt.Sprintf("run %d, point %d", run.ID, k+1)
			if sr.Held {
				if _, dup := reached[sr.Point]; !dup {
					reached[sr.Point] = where
					d.Marks = append(d.Marks, MarkResult{Point: sr.Point, HeldAs: HeldFixed, AdjustedM: sr.AdjustedM})
				}
				continue
			}
			if before, dup := reached[sr.Point]; dup {
				return draftErr("run", "%s is reached twice (%s and %s): a proportional adjustment would give it two heights; adjust the runs separately or by least squares",
					sr.Point, before, where)
			}
			reached[sr.Point] = where
			computed, corr := sr.ComputedM, sr.CorrectionM
			d.Marks = append(d.Marks, MarkResult{Point: sr.Point, ComputedM: &computed, CorrectionM: &corr,
				AdjustedM: sr.AdjustedM, Value: sr.Published})
		}
	}
	return nil
}

// stationsOf lays a run's sections end to end as the stations of a
// proportional adjustment: rise, distance and setups from the run's first
// mark.
func stationsOf(run DraftRun, by Distribution) ([]Station, error) {
	secs := run.Sections
	if len(secs) == 0 {
		return nil, draftErr("run", "run %d has no sections between marks to adjust", run.ID)
	}
	st := []Station{{Point: secs[0].From}}
	for i, s := range secs {
		prev := st[len(st)-1]
		if s.From != prev.Point {
			return nil, fmt.Errorf("run %d: section %d starts at %s, not at %s where section %d ended", run.ID, s.Seq, s.From, prev.Point, i)
		}
		next := Station{Point: s.To, RiseM: prev.RiseM + s.DhM, DistanceM: prev.DistanceM, Setups: prev.Setups + float64(s.Setups)}
		if s.LengthM != nil {
			next.DistanceM += *s.LengthM
		} else if by == ByDistance {
			return nil, draftErr("distribute", "run %d has no lengths for section %d (%s to %s): distribute by setups", run.ID, s.Seq, s.From, s.To)
		}
		st = append(st, next)
	}
	return st, nil
}

// leastSquares adjusts every section of the runs as one network: a mark
// reached by several runs is one unknown.
func (d *Draft) leastSquares(in DraftInput) error {
	o := in.Network
	var n int
	for _, run := range in.Runs {
		n += len(run.Sections)
	}
	net := NewNetwork(n)
	secs := make([]SectionResult, 0, n)
	for _, run := range in.Runs {
		for _, s := range run.Sections {
			km := 0.0
			if s.LengthM != nil {
				km = *s.LengthM / 1000
			} else if o.Weighting == WeightByLength {
				return draftErr("weight", "run %d, section %d (%s to %s, book lines %d-%d) has no length: weigh by setups",
					run.ID, s.Seq, s.From, s.To, s.FirstLine, s.LastLine)
			}
			net.AddSection(Section{From: s.From, To: s.To, DhM: s.DhM, LengthKm: km, Setups: s.Setups})
			secs = append(secs, SectionResult{RunID: run.ID, Seq: s.Seq, From: s.From, To: s.To, FirstLine: s.FirstLine, LastLine: s.LastLine})
		}
	}
	heldAs := make(map[string]HeldKind, len(in.Held))
	heldM := make(map[string]float64, len(in.Held))
	for k, h := range in.Held {
		net.AddHeld(HeldMark{Point: h.Point, HeightM: h.HeightM, SigmaM: h.SigmaM})
		heldAs[h.Point], heldM[h.Point] = HoldKind(k, h.SigmaM, o.Minimal), h.HeightM
	}
	sol, err := SolveNetwork(net, o)
	if err != nil {
		return networkError(err, in.Runs, secs)
	}
	d.Marks = make([]MarkResult, len(sol.Points))
	for i, pt := range sol.Points {
		sd := pt.SDM
		m := MarkResult{Point: pt.Point, HeldAs: heldAs[pt.Point], AdjustedM: pt.HeightM, SigmaM: &sd}
		if m.HeldAs != NotHeld {
			corr := pt.HeightM - heldM[pt.Point]
			m.CorrectionM = &corr
		} else {
			m.Value = units.FormatIn(pt.HeightM, d.Unit, d.Decimals)
		}
		d.Marks[i] = m
	}
	for i := range secs {
		secs[i].Residual = sol.Sections[i]
	}
	d.Sections = secs
	ns := NetworkStatOf(sol)
	for k, h := range in.Held {
		if HoldKind(k, h.SigmaM, o.Minimal) == HeldWeighted {
			r := sol.Held[k]
			ns.Held = append(ns.Held, HeldStat{Mark: h.Point, ResidualM: r.ResidualM, SDM: r.SDM, W: Finite(r.W), Flagged: r.Flagged})
		}
	}
	d.Stats.Network = ns
	return nil
}

// networkError says which run, section or held mark a solver error is
// about.
func networkError(err error, runs []DraftRun, secs []SectionResult) error {
	var se *SectionError
	var he *HeldError
	var ue *UncontrolledError
	switch {
	case errors.As(err, &se):
		s := secs[se.Index]
		return draftErr("run", "run %d, section %d (%s to %s, book lines %d-%d): %s: %v; leave the run out or adjust it proportionally",
			s.RunID, s.Seq, s.From, s.To, s.FirstLine, s.LastLine, se.Field, se.Err)
	case errors.As(err, &he):
		return draftErr("hold", "%s: %v", he.Point, he.Err)
	case errors.As(err, &ue):
		return draftErr("hold", "%v: hold a mark in each part of the network, or leave out the runs that reach them", ue)
	case errors.Is(err, ErrEmptyNetwork):
		return draftErr("run", "run(s) %s have no sections between marks to adjust", runList(runs))
	}
	return err
}

// WorstClass is the lowest accuracy class among the runs' classes; "" if
// any run has none that cairn knows.
func WorstClass(runs []DraftRun) standards.Class {
	worst := -1
	for _, run := range runs {
		c, err := standards.ParseClass(run.Class)
		if err != nil {
			return ""
		}
		worst = max(worst, slices.Index(standards.Classes, c))
	}
	if worst < 0 {
		return ""
	}
	return standards.Classes[worst]
}

// TolerancesOf returns the tolerances of the class a run's book names, and
// false if cairn does not know it.
func TolerancesOf(class string) (standards.Tolerances, bool) {
	c, err := standards.ParseClass(class)
	if err != nil {
		return standards.Tolerances{}, false
	}
	return standards.For(c), true
}

func runList(runs []DraftRun) string {
	s := make([]string, len(runs))
	for i, r := range runs {
		s[i] = fmt.Sprint(r.ID)
	}
	return strings.Join(s, ", ")
}
