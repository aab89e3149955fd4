package reduce

import (
	"fmt"
	"maps"
	"math"
	"slices"
	"strconv"
	"strings"

	"cairn/internal/levelbook"
	"cairn/internal/standards"
	"cairn/internal/units"
)

// Curvature and refraction, after Ghilani & Wolf, "Elementary Surveying":
//
//	h_cr = (1 − k) · d² / (2R)
//
// with d the sight length, R the earth's radius and k the coefficient of
// refraction (refraction taken as k times the curvature). With the
// textbook's k = 0.14 and R = 20,906,000 ft this gives their table (500 ft
// → 0.005142 ft, 1000 ft → 0.020568 ft, 5000 ft → 0.514206 ft) and their
// rounded formula 0.0675 K² m (K in km).
//
// CurvatureEarthRadiusM is that textbook's R, 20,906,000 ft, taken as
// international feet (0.3048 m): 6,372,148.8 m. It is kept, rather than
// store.MeanEarthRadiusM (the IUGG mean radius R1 of GRS 80, 6,371,008.8
// m, with which the register measures distances between marks), because
// the corrections must reproduce the textbook's table; the two differ by
// about 0.02 %. See docs/references.md#earth-radii.
const (
	RefractionK           = 0.14
	CurvatureEarthRadiusM = 20_906_000 * 0.3048 // 20,906,000 international feet
	crCoefficient         = (1 - RefractionK) / (2 * CurvatureEarthRadiusM)
)

// CurvatureRefractionM returns the combined curvature-and-refraction
// correction h_cr in metres of a sight of distanceM metres. A level reading
// is too high by h_cr; the corrected reading is the reading minus h_cr.
func CurvatureRefractionM(distanceM float64) float64 {
	return crCoefficient * distanceM * distanceM
}

// Reduce reduces book with opts. It fails only on options that do not fit
// the book (a held mark not on the line, a turning point held, a correction
// asked for sights without distances); the checks' outcome is in the
// result.
func Reduce(book *levelbook.Book, opts Options) (*Result, error) {
	if book == nil || len(book.Sightings) == 0 {
		return nil, fmt.Errorf("reduce: empty book")
	}
	r, err := newResult(book, opts)
	if err != nil {
		return nil, err
	}
	r.Rows, r.Setups = make([]Row, 0, len(book.Sightings)), make([]Setup, 0, len(book.Sightings)/2)
	if err := r.reduceRows(book); err != nil {
		return nil, err
	}
	r.buildSections()
	r.anchor()
	r.buildMisclosures()
	r.buildDoubleRuns()
	r.buildConnections(opts.Published)
	r.spotHeights(r.Rows)
	r.check()
	return r, nil
}

// newResult begins the reduction of book with opts: its class, standards
// and held marks, checked against the book.
func newResult(book *levelbook.Book, opts Options) (*Result, error) {
	m := book.Meta
	r := &Result{
		Name:                book.Name,
		Meta:                m,
		Unit:                m.Unit,
		Class:               m.Class,
		Reading:             m.Reading,
		CurvatureRefraction: opts.CurvatureRefraction,
		Book:                book,
		Sections:            []Section{},
		Misclosures:         []Misclosure{},
		Checks:              []Check{},
		Failures:            []Failure{},
	}
	if opts.Class != "" {
		r.Class = opts.Class
	}
	prof := opts.Standards
	if prof == nil {
		var err error
		if prof, err = bookProfile(book); err != nil {
			return nil, err
		}
	}
	r.Standards = prof.Ref()
	if r.Class != "" {
		t, err := prof.For(r.Class)
		if err != nil {
			return nil, err
		}
		r.Tolerances = &t
	}
	if err := r.setHeld(book, opts.Hold); err != nil {
		return nil, err
	}
	return r, nil
}

// bookProfile is the profile a book names when the caller gives none: a
// built-in, or the default when the book names none. A book that names a
// profile file is refused here: reading the file is the caller's
// (standards.Resolve), so that a named file is never passed over.
func bookProfile(book *levelbook.Book) (*standards.Profile, error) {
	name := book.Meta.Standards
	if name == "" {
		return standards.Default(), nil
	}
	if p, ok := standards.Builtin(name); ok {
		return p, nil
	}
	return nil, fmt.Errorf("%s names the standards file %q, which was not read (give it with the standards option)", book.Name, name)
}

// setHeld checks the held marks against the book.
func (r *Result) setHeld(book *levelbook.Book, hold map[string]float64) error {
	if len(hold) == 0 {
		return nil
	}
	r.Held = map[string]float64{}
	for _, name := range slices.Sorted(maps.Keys(hold)) {
		h := hold[name]
		if math.IsNaN(h) || math.IsInf(h, 0) {
			return fmt.Errorf("held height of %s is not a number", name)
		}
		if err := CheckHold(book, name); err != nil {
			return err
		}
		r.Held[name] = h
	}
	return nil
}

// CheckHold says whether the point name may be held in book: it must be a
// mark with a backsight or foresight on it, not a turning point nor a spot
// height. Callers that look the held height up elsewhere check it first,
// so that a point that cannot be held is refused for what it is.
func CheckHold(book *levelbook.Book, name string) error {
	if book.IsTurningPoint(name) {
		return fmt.Errorf("cannot hold %s: it is a turning point", name)
	}
	if book.Points == nil {
		// A book made by hand, not read: its sightings say it.
		for _, s := range book.Sightings {
			if s.Point == name && s.Spot {
				return fmt.Errorf("cannot hold %s: it is a spot height (line %d), not a mark", name, s.Line)
			}
		}
		for _, s := range book.Sightings {
			if s.Point == name && s.Sight != levelbook.Intermediate {
				return nil
			}
		}
	}
	for _, p := range book.Points {
		if p.Name != name {
			continue
		}
		if p.Spot {
			return fmt.Errorf("cannot hold %s: it is a spot height (line %d), not a mark", name, p.Line)
		}
		if p.Carries {
			return nil
		}
	}
	return fmt.Errorf("cannot hold %s: no backsight or foresight on it in %s", name, book.Name)
}

// reduceRows computes readings, heights of instrument and point heights
// (from 0 on the first point; anchor shifts them) and the setups.
func (r *Result) reduceRows(book *levelbook.Book) error {
	u := book.Meta.Unit
	h := 0.0 // height of the current backsight point
	var cur *Setup
	for i, s := range book.Sightings {
		row := Row{
			Line:         s.Line,
			Index:        i,
			Point:        s.Point,
			Sight:        s.Sight,
			TurningPoint: s.TurningPoint,
			Spot:         s.Spot,
			ReadingM:     u.ToMetres(s.Reading(book.Meta.Reading)),
			HasDistance:  s.HasDistance(),
			Note:         s.Note,
		}
		if row.HasDistance {
			row.DistanceM = u.ToMetres(s.Distance)
		}
		if r.CurvatureRefraction {
			if !row.HasDistance {
				return fmt.Errorf("%s:%d: curvature and refraction need the sight's length, and this sighting has none", book.Name, s.Line)
			}
			row.CorrectionM = CurvatureRefractionM(row.DistanceM)
			row.ReadingM -= row.CorrectionM
		}
		switch s.Sight {
		case levelbook.Backsight:
			r.Setups = append(r.Setups, Setup{
				Number:              len(r.Setups) + 1,
				Back:                i,
				BackPoint:           s.Point,
				BackLine:            s.Line,
				BacksightM:          row.ReadingM,
				HeightOfInstrumentM: h + row.ReadingM,
				BackDistanceM:       row.DistanceM,
				HasDistances:        row.HasDistance,
			})
			cur = &r.Setups[len(r.Setups)-1]
			row.HeightM = h
		case levelbook.Intermediate:
			cur.Intermediate = append(cur.Intermediate, i)
			row.HeightM = cur.HeightOfInstrumentM - row.ReadingM
		case levelbook.Foresight:
			cur.Fore, cur.ForePoint, cur.ForeLine = i, s.Point, s.Line
			cur.ForesightM = row.ReadingM
			cur.ForeDistanceM = row.DistanceM
			cur.HasDistances = cur.HasDistances && row.HasDistance
			cur.DifferenceM = cur.BacksightM - cur.ForesightM
			row.HeightM = cur.HeightOfInstrumentM - row.ReadingM
			cur.ForeHeightM = row.HeightM
			if cur.HasDistances {
				cur.ImbalanceM = cur.BackDistanceM - cur.ForeDistanceM
			}
			h = row.HeightM
		}
		row.Setup = len(r.Setups)
		row.HeightOfInstrumentM = cur.HeightOfInstrumentM
		r.Rows = append(r.Rows, row)
	}
	return nil
}

// buildSections groups the setups into sections from mark to mark.
func (r *Result) buildSections() {
	var sec *Section
	cumLen, cumSetups := 0.0, 0
	for i := range r.Setups {
		st := &r.Setups[i]
		if sec == nil {
			r.Sections = append(r.Sections, Section{
				Number:      len(r.Sections) + 1,
				From:        st.BackPoint,
				FromLine:    st.BackLine,
				FirstSetup:  st.Number,
				HasLength:   true,
				FromHeightM: r.Rows[st.Back].HeightM,
			})
			sec = &r.Sections[len(r.Sections)-1]
		}
		st.Section = sec.Number
		sec.Setups++
		sec.DifferenceM += st.DifferenceM
		if st.HasDistances {
			sec.LengthM += st.BackDistanceM + st.ForeDistanceM
			sec.ImbalanceM += st.ImbalanceM
		} else {
			sec.HasLength = false
		}
		st.AccumulatedImbalanceM = sec.ImbalanceM
		if !r.Rows[st.Fore].TurningPoint {
			sec.To, sec.ToLine, sec.LastSetup = st.ForePoint, st.ForeLine, st.Number
			sec.ToHeightM = st.ForeHeightM
			cumLen += sec.LengthM
			cumSetups += sec.Setups
			sec.CumulativeLengthM, sec.CumulativeSetups = cumLen, cumSetups
			sec = nil
		}
	}
	first, last := r.Sections[0], r.Sections[len(r.Sections)-1]
	r.Start, r.End = first.From, last.To
	r.Loop = r.Start == r.End
}

// anchor shifts every height so that the first held mark the run reaches
// takes its held height; with none held, heights stay relative to the
// start at 0.
func (r *Result) anchor() {
	shift, found := 0.0, false
	for _, row := range r.Rows {
		if hv, ok := r.Held[row.Point]; ok && row.Sight != levelbook.Intermediate {
			shift, found = hv-row.HeightM, true
			r.anchorAt, r.anchored = row, true
			break
		}
	}
	r.Relative = !found
	r.shiftM = shift
	if shift == 0 {
		return
	}
	for i := range r.Rows {
		r.Rows[i].HeightM += shift
		r.Rows[i].HeightOfInstrumentM += shift
	}
	for i := range r.Setups {
		r.Setups[i].HeightOfInstrumentM += shift
		r.Setups[i].ForeHeightM += shift
	}
	for i := range r.Sections {
		r.Sections[i].FromHeightM += shift
		r.Sections[i].ToHeightM += shift
	}
}

// buildMisclosures closes the loop on itself (when its start is not held)
// and each stretch between consecutive held marks.
func (r *Result) buildMisclosures() {
	// Marks of the line in order: the start, then the end of each section.
	type stop struct {
		mark string
		sec  int // sections before this stop
	}
	stops := []stop{{r.Start, 0}}
	for i, s := range r.Sections {
		stops = append(stops, stop{s.To, i + 1})
	}
	add := func(kind string, a, b stop, known float64) {
		ms := Misclosure{
			Kind:         kind,
			From:         a.mark,
			To:           b.mark,
			FromLine:     r.Sections[a.sec].FromLine,
			ToLine:       r.Sections[b.sec-1].ToLine,
			FirstSection: a.sec + 1,
			LastSection:  b.sec,
			KnownM:       known,
			HasLength:    true,
		}
		for _, s := range r.Sections[a.sec:b.sec] {
			ms.ObservedM += s.DifferenceM
			ms.LengthM += s.LengthM
			ms.Setups += s.Setups
			ms.HasLength = ms.HasLength && s.HasLength
		}
		ms.MisclosureM = ms.ObservedM - ms.KnownM
		if r.Tolerances != nil && ms.HasLength && ms.LengthM > 0 {
			ms.AllowableM = r.Tolerances.AllowableLoopM(ms.LengthM)
			ms.HasAllowable = true
			ms.Pass = standards.Within(ms.MisclosureM, ms.AllowableM)
		}
		r.Misclosures = append(r.Misclosures, ms)
	}
	if _, held := r.Held[r.Start]; r.Loop && !held {
		add("loop", stops[0], stops[len(stops)-1], 0)
	}
	prev := -1
	for i, st := range stops {
		if _, ok := r.Held[st.mark]; !ok {
			continue
		}
		if prev >= 0 {
			a, b := stops[prev], st
			kind := "line"
			if a.mark == b.mark {
				kind = "loop"
			}
			add(kind, a, b, r.Held[b.mark]-r.Held[a.mark])
		}
		prev = i
	}
	// Closures within the run: each time the run comes back to a mark it
	// has passed, the stretch since its last visit closes on it (known
	// difference 0), unless a closure above covers the same sections. A
	// stretch that retraces its own marks (B, C, B) is a spur: its closure
	// is that of its double-run sections (checkDoubleRuns), judged by the
	// section constant, and is not listed here again.
	covered := map[[2]int]bool{}
	for _, ms := range r.Misclosures {
		covered[[2]int{ms.FirstSection, ms.LastSection}] = true
	}
	last := map[string]int{}
	for j, st := range stops {
		i, seen := last[st.mark]
		last[st.mark] = j
		if !seen || covered[[2]int{i + 1, j}] || retraces(stops[i:j+1], func(s stop) string { return s.mark }) {
			continue
		}
		add("loop", stops[i], st, 0)
		r.Misclosures[len(r.Misclosures)-1].Within = true
	}
}

// retraces reports whether the marks of stops read the same both ways
// (B, C, B or B, C, D, C, B): a spur levelled out and back.
func retraces[T any](stops []T, mark func(T) string) bool {
	for i, j := 0, len(stops)-1; i < j; i, j = i+1, j-1 {
		if mark(stops[i]) != mark(stops[j]) {
			return false
		}
	}
	return true
}

// buildDoubleRuns pairs each section with the nearest earlier section of
// the book levelled the other way between the same two marks (B→C, then
// C→B), each section in one pair at most, and compares them.
func (r *Result) buildDoubleRuns() {
	r.DoubleRuns = []DoubleRun{}
	paired := make([]bool, len(r.Sections))
	for j, b := range r.Sections {
		for i := j - 1; i >= 0; i-- {
			a := r.Sections[i]
			if paired[i] || a.From != b.To || a.To != b.From {
				continue
			}
			paired[i], paired[j] = true, true
			r.DoubleRuns = append(r.DoubleRuns, r.compareDoubleRun(DoubleRun{
				From: a.From, To: a.To, Forward: a.Number, Backward: b.Number,
				ForwardLines: [2]int{a.FromLine, a.ToLine}, BackwardLines: [2]int{b.FromLine, b.ToLine},
				ForwardM: a.DifferenceM, BackwardM: b.DifferenceM,
			}, a.LengthM, b.LengthM, a.HasLength && b.HasLength))
			break
		}
	}
}

// compareDoubleRun fills the closure of a double-run section and, with a
// class and both lengths, its allowable and outcome: K is the mean of the
// forward and backward lengths.
func (r *Result) compareDoubleRun(d DoubleRun, fwdLenM, bwdLenM float64, hasLength bool) DoubleRun {
	d.ClosureM = d.ForwardM + d.BackwardM
	if hasLength {
		d.OneWayM, d.HasLength = (fwdLenM+bwdLenM)/2, true
	}
	if r.Tolerances != nil && d.HasLength && d.OneWayM > 0 {
		d.AllowableM, d.HasAllowable = standards.DoubleRunAllowableM(*r.Tolerances, d.OneWayM), true
		d.Pass = standards.Within(d.ClosureM, d.AllowableM)
	}
	return d
}

// check runs the quality checks and lists every failure.
func (r *Result) check() {
	u := r.Unit
	dec := Decimals(u)
	f := func(m float64) string { return units.FormatIn(m, u, dec) + " " + string(u) }
	fd := func(m float64) string { return units.FormatIn(m, u, DistanceDecimals) + " " + string(u) }
	checks := map[CheckKind]*Check{}
	order := []CheckKind{CheckThreeWire, CheckDistance, CheckSightLength, CheckSetupImbalance, CheckSectionImbalance, CheckMisclosure, CheckDoubleRun, CheckConnection, CheckHeldSight, CheckClosure}
	for _, k := range order {
		checks[k] = &Check{Kind: k}
	}
	fail := func(k CheckKind, line int, subject string, value, limit float64, format string, a ...any) {
		checks[k].Failed++
		r.Failures = append(r.Failures, Failure{Kind: k, Line: line, Subject: subject, ValueM: value, LimitM: limit, Message: fmt.Sprintf(format, a...)})
	}
	t := r.Tolerances
	noClass := "no accuracy class: the book names none (\"# class:\") and none was given"

	// Three-wire consistency, every class (EN0593 §4): the profile's limit
	// for the run's class, else the built-in 0.003 m.
	rc := r.rc
	if rc == nil {
		rc = r.newRowCheck()
		for i := range r.Book.Sightings {
			rc.sighting(&r.Book.Sightings[i])
		}
		for i := range r.Rows {
			rc.row(&r.Rows[i])
		}
		for i := range r.Setups {
			rc.setup(&r.Setups[i])
		}
	}
	addAll := func(fs []Failure) {
		for _, f := range fs {
			checks[f.Kind].Failed++
			r.Failures = append(r.Failures, f)
		}
	}
	c := checks[CheckThreeWire]
	c.Tolerance = "half-intervals agree within " + rc.threeWireLimit
	c.Source = rc.threeWireSource
	c.Checked = rc.threeWire
	addAll(rc.threeWireFails)
	if c.Checked == 0 {
		c.NotMade, c.Why, c.NotApplicable = "no sighting has all three wires", "no three-wire sightings", true
	}

	// Class checks: distances, sight length, imbalances.
	for _, k := range []CheckKind{CheckDistance, CheckSightLength, CheckSetupImbalance, CheckSectionImbalance, CheckMisclosure} {
		if t == nil {
			checks[k].NotMade, checks[k].Why = noClass, "no class"
		} else {
			checks[k].Source = t.Source
		}
	}
	if t != nil {
		checks[CheckDistance].Tolerance = "every backsight and foresight has a length"
		checks[CheckSightLength].Tolerance = "sights at most " + fd(t.MaxSightM)
		checks[CheckSetupImbalance].Tolerance = "backsight − foresight length within " + fd(t.MaxSetupImbalanceM) + " per setup"
		checks[CheckSectionImbalance].Tolerance = "within " + fd(t.MaxSectionImbalanceM) + " accumulated per section"
		checks[CheckMisclosure].Tolerance = fmt.Sprintf("%g mm·√km (%s, E = length in km)", t.LoopMmSqrtKm, t.Class)
		checks[CheckDistance].Checked = rc.distance
		checks[CheckSightLength].Checked = rc.sightLength
		addAll(rc.rowFails)
		checks[CheckSetupImbalance].Checked = rc.setupImbalance
		addAll(rc.setupFails)
		for _, s := range r.Sections {
			if !s.HasLength {
				continue
			}
			checks[CheckSectionImbalance].Checked++
			if !standards.Within(s.ImbalanceM, t.MaxSectionImbalanceM) {
				fail(CheckSectionImbalance, s.ToLine, s.From+" to "+s.To, s.ImbalanceM, t.MaxSectionImbalanceM,
					"accumulated imbalance %s exceeds %s", fd(s.ImbalanceM), fd(t.MaxSectionImbalanceM))
			}
		}
		for _, ms := range r.Misclosures {
			subject := ms.From + " to " + ms.To
			checks[CheckMisclosure].Checked++
			if !ms.HasAllowable {
				fail(CheckMisclosure, ms.ToLine, subject, ms.MisclosureM, 0, "misclosure %s cannot be judged: the stretch has no length", f(ms.MisclosureM))
				continue
			}
			if !ms.Pass {
				fail(CheckMisclosure, ms.ToLine, subject, ms.MisclosureM, ms.AllowableM,
					"misclosure %s exceeds the allowable %s over %s", f(ms.MisclosureM), f(ms.AllowableM), fd(ms.LengthM))
			}
		}
		if checks[CheckMisclosure].Checked == 0 {
			checks[CheckMisclosure].NotMade, checks[CheckMisclosure].Why = "the run has no closure", "no closure"
		}
		for k, why := range map[CheckKind]string{
			CheckSightLength:      "no backsight or foresight has a length",
			CheckSetupImbalance:   "no setup has both its sight lengths",
			CheckSectionImbalance: "no section has every sight length",
		} {
			if checks[k].Checked == 0 {
				checks[k].NotMade, checks[k].Why = why, "no distances"
			}
		}
	}
	r.checkDoubleRuns(checks[CheckDoubleRun], fail, f, fd)
	r.checkConnections(checks[CheckConnection], fail, f, fd)
	r.checkHeldSights(checks[CheckHeldSight], fail, f, fd)

	// Closure: the run must be checked by something.
	c = checks[CheckClosure]
	c.Tolerance = "the run closes on itself or joins two held marks"
	c.Source = "common practice: check into two marks"
	c.Checked = 1
	closes := false
	for _, ms := range r.Misclosures {
		closes = closes || !ms.Within
	}
	if !closes {
		last := r.Sections[len(r.Sections)-1]
		held := slices.Sorted(maps.Keys(r.Held))
		why := "no mark is held"
		if len(held) > 0 {
			why = "only " + strings.Join(held, ", ") + " is held"
		}
		fail(CheckClosure, last.ToLine, r.Start+" to "+r.End, 0, 0,
			"the line from %s to %s does not close and %s: its heights are unchecked (give the known heights of two of its marks)", r.Start, r.End, why)
	}
	for _, k := range order {
		r.Checks = append(r.Checks, *checks[k])
	}
	r.summarize()
}

// rowCheck makes the checks of single sightings, rows and setups (three
// wires, distances, sight lengths, setup imbalances) as they come, and
// keeps their counts and failures for check.
type rowCheck struct {
	r                               *Result
	u                               units.Unit
	dec                             int
	threeWireM                      float64
	threeWireLimit, threeWireSource string

	threeWire, distance, sightLength, setupImbalance int // checked
	threeWireFails, rowFails, setupFails             []Failure
}

func (r *Result) newRowCheck() *rowCheck {
	u := r.Unit
	rc := &rowCheck{r: r, u: u, dec: Decimals(u), threeWireM: standards.ThreeWireM, threeWireSource: standards.ThreeWireSource}
	if t := r.Tolerances; t != nil {
		rc.threeWireM, rc.threeWireSource = t.ThreeWireM, t.Profile+": "+t.Provenance[standards.FieldThreeWire].Source+" ("+string(t.Provenance[standards.FieldThreeWire].Status)+")"
	}
	rc.threeWireLimit = strconv.FormatFloat(rc.threeWireM, 'g', -1, 64) + " m"
	if u != units.Metre {
		rc.threeWireLimit += " (" + units.FormatIn(rc.threeWireM, u, 4) + " " + string(u) + ")"
	}
	return rc
}

func (rc *rowCheck) f(m float64) string { return units.FormatIn(m, rc.u, rc.dec) + " " + string(rc.u) }
func (rc *rowCheck) fd(m float64) string {
	return units.FormatIn(m, rc.u, DistanceDecimals) + " " + string(rc.u)
}

// sighting checks the three wires of s.
func (rc *rowCheck) sighting(s *levelbook.Sighting) {
	if !s.ThreeWire {
		return
	}
	rc.threeWire++
	d := rc.u.ToMetres(math.Abs((s.Upper - s.Middle) - (s.Middle - s.Lower)))
	if !standards.Within(d, rc.threeWireM) {
		rc.threeWireFails = append(rc.threeWireFails, Failure{Kind: CheckThreeWire, Line: s.Line, Subject: s.Point, ValueM: d, LimitM: rc.threeWireM,
			Message: fmt.Sprintf("half-intervals %s and %s differ by %s (limit %s): reobserve",
				units.Format(s.Upper-s.Middle, rc.dec), units.Format(s.Middle-s.Lower, rc.dec), rc.f(d), rc.threeWireLimit)})
	}
}

// row checks the length of a backsight or foresight against the class.
func (rc *rowCheck) row(row *Row) {
	t := rc.r.Tolerances
	if t == nil || row.Sight == levelbook.Intermediate {
		return
	}
	rc.distance++
	if !row.HasDistance {
		rc.rowFails = append(rc.rowFails, Failure{Kind: CheckDistance, Line: row.Line, Subject: row.Point,
			Message: fmt.Sprintf("no sight length (book the stadia wires or a distance): class %s cannot be checked", t.Class)})
		return
	}
	rc.sightLength++
	if !standards.Within(row.DistanceM, t.MaxSightM) {
		rc.rowFails = append(rc.rowFails, Failure{Kind: CheckSightLength, Line: row.Line, Subject: row.Point, ValueM: row.DistanceM, LimitM: t.MaxSightM,
			Message: fmt.Sprintf("sight of %s is longer than %s", rc.fd(row.DistanceM), rc.fd(t.MaxSightM))})
	}
}

// setup checks the imbalance of a setup against the class.
func (rc *rowCheck) setup(st *Setup) {
	t := rc.r.Tolerances
	if t == nil || !st.HasDistances {
		return
	}
	rc.setupImbalance++
	if !standards.Within(st.ImbalanceM, t.MaxSetupImbalanceM) {
		rc.setupFails = append(rc.setupFails, Failure{Kind: CheckSetupImbalance, Line: st.ForeLine, Subject: fmt.Sprintf("setup %d", st.Number),
			ValueM: st.ImbalanceM, LimitM: t.MaxSetupImbalanceM,
			Message: fmt.Sprintf("backsight %s, foresight %s: imbalance %s exceeds %s", rc.fd(st.BackDistanceM), rc.fd(st.ForeDistanceM), rc.fd(st.ImbalanceM), rc.fd(t.MaxSetupImbalanceM))})
	}
}

// summarize sets Summary and AllChecksMade from the checks:
//
//	All checks passed.
//	2 checks made and passed; not made: sight lengths, misclosure (no class).
//	2 check(s) failed. Not made: sight lengths (no distances).
//
// A check not made for want of something (a class, sight lengths, a
// closure) is named with the reason; one that does not apply to the book
// (NotApplicable) is not.
func (r *Result) summarize() {
	made := 0
	var reasons []string
	byReason := map[string][]string{}
	for _, c := range r.Checks {
		switch {
		case c.NotMade == "":
			made++
		case !c.NotApplicable:
			why := c.Why
			if why == "" {
				why = c.NotMade
			}
			if _, seen := byReason[why]; !seen {
				reasons = append(reasons, why)
			}
			byReason[why] = append(byReason[why], c.Kind.Words())
		}
	}
	r.AllChecksMade = len(reasons) == 0
	var notMade []string
	for _, why := range reasons {
		notMade = append(notMade, strings.Join(byReason[why], ", ")+" ("+why+")")
	}
	switch {
	case !r.Passed():
		r.Summary = fmt.Sprintf("%d check(s) failed.", len(r.Failures))
		if len(notMade) > 0 {
			r.Summary += " Not made: " + strings.Join(notMade, "; ") + "."
		}
	case len(notMade) == 0:
		r.Summary = "All checks passed."
	default:
		r.Summary = fmt.Sprintf("%d %s made and passed; not made: %s.", made, plural(made, "check", "checks"), strings.Join(notMade, "; "))
	}
}

func plural(n int, one, many string) string {
	if n == 1 {
		return one
	}
	return many
}
