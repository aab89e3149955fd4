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
	"cairn/internal/levelbook"
	"cairn/internal/names"
	"cairn/internal/reduce"
	"cairn/internal/store"
	"cairn/internal/units"
)

// gathered is what an adjustment is computed from, read in its
// transaction: the draft's input and the rows it came from.
type gathered struct {
	input adjust.DraftInput
	runs  []store.Run
	datum store.Datum
	// held are the held versions, exactly as current now, in the order of
	// AdjustParams.Hold; holds the held marks.
	held  []store.Held
	holds []store.Mark
	// inDoubt says a held mark's latest condition puts it in doubt (and
	// the condition was allowed).
	inDoubt bool
	// markIDs are the marks of the runs' sections by designation.
	markIDs map[string]int64
	// leftOut are the voided runs that p.Marks or p.Near chose, left out.
	leftOut []store.Run
}

// gather reads, in tx, everything the adjustment p asks for is computed
// from, and refuses held marks without a current height or in doubt.
func (r *Register) gather(ctx context.Context, tx pgx.Tx, p AdjustParams) (*gathered, error) {
	g := &gathered{markIDs: map[string]int64{}}
	runIDs, err := r.chooseRuns(ctx, tx, p)
	if err != nil {
		return nil, err
	}
	named := map[int64]bool{}
	for _, id := range p.RunIDs {
		named[id] = true
	}
	// Check runs adjust nothing: one named is refused, one chosen by marks
	// or area left out.
	checkRuns, err := store.CheckRunIDs(ctx, tx, runIDs)
	if err != nil {
		return nil, err
	}
	var checksLeftOut []int64
	// Every run in one statement, not one a run.
	listed, err := store.RunListByIDs(ctx, tx, runIDs)
	if err != nil {
		return nil, fmt.Errorf("look up %d runs: %w", len(runIDs), err)
	}
	byID := make(map[int64]store.Run, len(listed))
	for _, run := range listed {
		byID[run.ID] = run
	}
	for _, id := range runIDs {
		if checkRuns[id] {
			if named[id] {
				return nil, p.runErr(id, "run %d is a check run (recorded with --check-only): it adjusts nothing", id)
			}
			checksLeftOut = append(checksLeftOut, id)
			continue
		}
		run, ok := byID[id]
		if !ok {
			return nil, p.runErr(id, "no run %d in the register (see cairn run list)", id)
		}
		switch {
		case run.Voided != nil && named[id]:
			return nil, &RunVoidedError{Run: run}
		case run.Voided != nil:
			g.leftOut = append(g.leftOut, run)
		default:
			g.runs = append(g.runs, run)
		}
	}
	if len(g.runs) == 0 {
		field := "marks"
		if len(p.Marks) == 0 {
			field = "area"
		}
		ids := make([]int64, len(g.leftOut))
		for i, run := range g.leftOut {
			ids[i] = run.ID
		}
		var why []string
		if len(ids) > 0 {
			why = append(why, "voided (runs "+joinIDs(ids)+")")
		}
		if len(checksLeftOut) > 0 {
			why = append(why, "check runs, which adjust nothing (runs "+joinIDs(checksLeftOut)+")")
		}
		return nil, inputErr(field, "every run chosen is %s: nothing is left to adjust", strings.Join(why, " or "))
	}
	held := map[string]bool{}
	for _, h := range p.Hold {
		m, err := r.mark(ctx, tx, "hold", h.Designation, false)
		if err != nil {
			return nil, err
		}
		if held[m.Designation] {
			return nil, inputErr("hold", "%s is held twice", m.Designation)
		}
		held[m.Designation] = true
		g.holds = append(g.holds, m)
	}
	if g.datum, err = r.adjustDatum(ctx, tx, p.Datum, g.runs, g.holds); err != nil {
		return nil, err
	}
	var doubt []string
	for k, m := range g.holds {
		h, err := store.HeightCurrent(ctx, tx, store.HeightLatestParams{MarkID: m.ID, DatumID: g.datum.ID})
		if errors.Is(err, store.ErrNotFound) || err == nil && h.Value == nil {
			return nil, inputErr("hold", "%s has no current height on %s to hold", m.Designation, g.datum.Code)
		}
		if err != nil {
			return nil, err
		}
		if err := heldRefusal(ctx, tx, "hold", m, h); err != nil {
			return nil, err
		}
		hm, err := heightMetres(h)
		if err != nil {
			return nil, err
		}
		g.input.Held = append(g.input.Held, adjust.DraftHeld{Point: m.Designation, HeightM: hm, Unit: units.Unit(*h.Unit), SigmaM: p.Hold[k].SigmaM})
		held := store.Held{Height: h}
		if m.Latest != nil {
			held.ConditionID = &m.Latest.ID
			if conditionsInDoubt[m.Latest.Condition] {
				doubt = append(doubt, fmt.Sprintf("%s (%s, reported %s)", m.Designation, m.Latest.Condition, m.Latest.ObservedOn.Format("2006-01-02")))
			}
		}
		g.held = append(g.held, held)
	}
	g.inDoubt = len(doubt) > 0
	if g.inDoubt && !p.AllowCondition {
		return nil, inputErr("hold", "the latest condition report of %s puts it in doubt: verify it in the field, or allow the condition and give the reason to hold it anyway",
			strings.Join(doubt, ", "))
	}

	ids := make([]int64, len(g.runs))
	for i, run := range g.runs {
		ids[i] = run.ID
	}
	secs, err := store.SectionList(ctx, tx, store.SectionListParams{RunIDs: ids})
	if err != nil {
		return nil, err
	}
	byRun := map[int64][]adjust.DraftSection{}
	for _, s := range secs {
		byRun[s.RunID] = append(byRun[s.RunID], adjust.DraftSection{Seq: s.Seq, From: s.From, To: s.To, DhM: s.DifferenceM,
			LengthM: s.LengthM, Setups: s.Setups, FirstLine: s.FirstLine, LastLine: s.LastLine})
		g.markIDs[s.From], g.markIDs[s.To] = s.FromMarkID, s.ToMarkID
	}
	sides, err := sidesOfRuns(ctx, tx, g.runs)
	if err != nil {
		return nil, err
	}
	var withSides []int64
	for _, run := range g.runs {
		if len(sides[run.ID]) > 0 {
			withSides = append(withSides, run.ID)
		}
	}
	if len(withSides) > 0 {
		marks, err := store.RunMarkIDsByRuns(ctx, tx, withSides)
		if err != nil {
			return nil, err
		}
		for d, id := range marks {
			if _, ok := g.markIDs[d]; !ok {
				g.markIDs[d] = id
			}
		}
	}
	for _, run := range g.runs {
		prof, err := runProfile(run.Standards)
		if err != nil {
			return nil, fmt.Errorf("run %d: its standards profile: %w", run.ID, err)
		}
		g.input.Runs = append(g.input.Runs, adjust.DraftRun{ID: run.ID, Class: run.Class, Sections: byRun[run.ID], Sides: sides[run.ID], Standards: prof})
	}
	g.input.Method, g.input.Distribution, g.input.Network = p.Method, p.Distribution, p.LeastSquares
	g.input.Decimals = p.Decimals
	if p.Unit != "" {
		u, _ := units.Parse(p.Unit) // checked by AdjustParams.check
		g.input.Unit = u
	}
	return g, nil
}

// chooseRuns returns the runs p names, then those it chooses by marks or
// area, each once.
func (r *Register) chooseRuns(ctx context.Context, tx pgx.Tx, p AdjustParams) ([]int64, error) {
	chosen, err := r.runsTouching(ctx, tx, p)
	if err != nil {
		return nil, err
	}
	seen := map[int64]bool{}
	ids := append([]int64(nil), p.RunIDs...)
	for _, id := range ids {
		seen[id] = true
	}
	for _, id := range chosen {
		if !seen[id] {
			seen[id] = true
			ids = append(ids, id)
		}
	}
	return ids, nil
}

// runsTouching returns the runs with a section from or to one of the marks
// chosen by p.Marks or p.Near (none if neither is given).
func (r *Register) runsTouching(ctx context.Context, tx pgx.Tx, p AdjustParams) ([]int64, error) {
	var ids []int64
	if len(p.Marks) > 0 {
		// Every name in one statement; the first not found is then
		// resolved alone, for its error and its hint.
		list := make([]string, len(p.Marks))
		folded := make([]string, len(p.Marks))
		for i, d := range p.Marks {
			list[i] = strings.TrimSpace(d)
			folded[i] = names.Fold(list[i])
		}
		found, err := store.MarkIDsByNames(ctx, tx, list, folded)
		if err != nil {
			return nil, err
		}
		for i, d := range list {
			id, ok := found[d]
			if !ok {
				m, err := r.mark(ctx, tx, "marks", d, false)
				var ie *InputError
				if errors.As(err, &ie) && i < len(p.MarksFrom) && p.MarksFrom[i] != "" {
					return nil, &InputError{Field: "marks-file", Msg: p.MarksFrom[i] + ": " + ie.Msg}
				}
				if err != nil {
					return nil, err
				}
				id = m.ID
			}
			ids = append(ids, id)
		}
	}
	if len(p.Marks) > 0 {
		runs, err := store.RunIDsTouchingMarks(ctx, tx, ids)
		if err != nil {
			return nil, err
		}
		if len(runs) == 0 {
			named := strings.Join(p.Marks, ", ")
			if len(p.Marks) > 10 {
				named = fmt.Sprintf("any of the %d marks named", len(p.Marks))
			}
			return nil, inputErr("marks", "no recorded run has a section from or to %s", named)
		}
		ids = runs
	} else {
		ids = nil
	}
	if p.Near == nil {
		return ids, nil
	}
	// The area's marks by their ids alone: their rows, conditions and
	// aliases are not needed to choose runs.
	mids, err := store.MarkIDsWithin(ctx, tx, *p.Near, p.RadiusM)
	if err != nil {
		return nil, err
	}
	where := areaText(p)
	if len(mids) == 0 {
		return nil, inputErr("area", "no mark with a position lies within %s", where)
	}
	runs, err := store.RunIDsTouchingMarks(ctx, tx, mids)
	if err != nil {
		return nil, err
	}
	if len(runs) == 0 {
		return nil, inputErr("area", "no recorded run has a section from or to the %d mark(s) within %s", len(mids), where)
	}
	return append(ids, runs...), nil
}

// areaText describes the area p chooses runs by.
func areaText(p AdjustParams) string {
	return fmt.Sprintf("%g,%g within %g m", p.Near.Lat, p.Near.Lon, p.RadiusM)
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
		if d, ok, err := datumNamed(ctx, tx, named); err != nil || ok {
			return d, err
		}
	}
	codes, bare, err := commonDatums(ctx, tx, holds)
	if err != nil {
		return store.Datum{}, err
	}
	if bare != "" {
		return store.Datum{}, inputErr("hold", "%s has no current height to hold", bare)
	}
	switch len(codes) {
	case 1:
		return r.datum(ctx, tx, "datum", codes[0])
	case 0:
		return store.Datum{}, inputErr("hold", "the held marks have no datum on which all of them have a current height")
	}
	return store.Datum{}, inputErr("datum", "the held marks have heights on %s: choose one", strings.Join(codes, " and "))
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

// datumNamed finds the datum whose code or name is name, ignoring case,
// spaces and punctuation (looseKey), as a book or a user names it.
func datumNamed(ctx context.Context, db store.DBTX, name string) (store.Datum, bool, error) {
	all, err := store.DatumList(ctx, db)
	if err != nil {
		return store.Datum{}, false, err
	}
	for _, d := range all {
		if looseKey(d.Code) == looseKey(name) || looseKey(d.Name) == looseKey(name) {
			return d, true, nil
		}
	}
	return store.Datum{}, false, nil
}

// commonDatums returns, sorted, the codes of the datums on which every
// mark has a current height; bare names the first mark with no current
// height on any datum (codes are then not computed).
func commonDatums(ctx context.Context, db store.DBTX, marks []store.Mark) (codes []string, bare string, err error) {
	common := map[string]int{}
	for _, m := range marks {
		hs, err := store.HeightAsOf(ctx, db, store.HeightAsOfParams{MarkID: m.ID})
		if err != nil {
			return nil, "", err
		}
		n := 0
		for _, h := range hs {
			if h.Value != nil {
				common[h.DatumCode]++
				n++
			}
		}
		if n == 0 {
			return nil, m.Designation, nil
		}
	}
	for c, n := range common {
		if n == len(marks) {
			codes = append(codes, c)
		}
	}
	sort.Strings(codes)
	return codes, "", nil
}

// sidesOfRuns reads the runs' intermediate sights on marks from their
// stored books (sidesOf), the books in one statement, by run: the books of
// the runs whose stored sightings hold such a sight alone
// (store.RunIDsWithSideSights), since a book without one gives none (the
// sightings are the book's, as recorded: audit verify parses the book
// again against them).
func sidesOfRuns(ctx context.Context, db store.DBTX, runs []store.Run) (map[int64][]adjust.DraftSide, error) {
	byID := make(map[int64]store.Run, len(runs))
	all := make([]int64, len(runs))
	for i, run := range runs {
		byID[run.ID], all[i] = run, run.ID
	}
	ids, err := store.RunIDsWithSideSights(ctx, db, all)
	if err != nil {
		return nil, fmt.Errorf("find the runs with side shots among %d: %w", len(runs), err)
	}
	out := map[int64][]adjust.DraftSide{}
	if len(ids) == 0 {
		return out, nil
	}
	err = store.RunBookEach(ctx, db, ids, func(id int64, raw []byte) error {
		sides, err := sidesOf(byID[id], raw)
		if len(sides) > 0 {
			out[id] = sides
		}
		return err
	})
	if err != nil {
		return nil, fmt.Errorf("read the books of %d runs: %w", len(runs), err)
	}
	return out, nil
}

// sidesOf reads run's intermediate sights on marks from its stored book
// raw, reduced again with its stored options (as audit verify does): the
// side shots that give a mark sighted only so its height
// (adjust.DraftSide).
func sidesOf(run store.Run, raw []byte) ([]adjust.DraftSide, error) {
	book, err := levelbook.Parse(run.FileName, raw)
	if err != nil {
		return nil, fmt.Errorf("run %d: its stored book no longer parses: %w", run.ID, err)
	}
	has := false
	for _, s := range book.Sightings {
		has = has || s.Sight == levelbook.Intermediate && !s.Spot && !s.TurningPoint
	}
	if !has {
		return nil, nil
	}
	var sum CheckSummary
	if err := json.Unmarshal(run.Checks, &sum); err != nil {
		return nil, fmt.Errorf("decode checks of run %d: %w", run.ID, err)
	}
	res, err := reduce.Reduce(book, reduce.Options{Class: sum.Class, Hold: sum.HeldM, CurvatureRefraction: sum.CurvatureRefraction})
	if err != nil {
		return nil, fmt.Errorf("run %d: its stored book no longer reduces: %w", run.ID, err)
	}
	var out []adjust.DraftSide
	for _, sh := range res.SideShots() {
		sd := adjust.DraftSide{Point: sh.Point, Line: sh.Line, Section: sh.Section, DhM: sh.DhM, AlongSetups: sh.AlongSetups}
		if sh.HasAlong {
			along := sh.AlongM
			sd.AlongM = &along
		}
		out = append(out, sd)
	}
	return out, nil
}
