package reduce

import (
	"errors"
	"fmt"
	"iter"

	"cairn/internal/levelbook"
)

// ReduceScan reduces a book read by levelbook.Summarize, whose sightings
// sightings gives one at a time in field order (a levelbook.Scanner over
// the same bytes), keeping no row or setup: memory grows with the book's
// sections, intermediate sights and failures, not with its sightings. The
// result is Reduce's, its Rows and Setups left empty: the same sections,
// misclosures, double runs, connections, spot heights, held sights,
// checks, failures and summary. It fails as Reduce does.
func ReduceScan(book *levelbook.Book, sightings iter.Seq[*levelbook.Sighting], opts Options) (*Result, error) {
	if book == nil || book.Count == 0 {
		return nil, fmt.Errorf("reduce: empty book")
	}
	r, err := newResult(book, opts)
	if err != nil {
		return nil, err
	}
	return r.scan(book, sightings, opts.Published, nil)
}

// ScanRows reduces the book again, a sighting at a time, and calls each
// with every row as Reduce keeps it in Rows, in field order, and, for a
// foresight, the setup it closes as Reduce keeps it in Setups (nil for
// other sightings); it stops early, with no error, when each returns
// false. r is the result of reducing the same book (ReduceScan or
// Reduce): its held height and its correction for curvature and
// refraction make the rows' heights. A report of every row is written
// this way without holding them.
func (r *Result) ScanRows(book *levelbook.Book, sightings iter.Seq[*levelbook.Sighting], each func(Row, *Setup) bool) error {
	if book == nil || book.Count == 0 {
		return fmt.Errorf("reduce: empty book")
	}
	// The rows alone: no class, standards or held marks to judge by.
	again := &Result{Name: r.Name, Meta: r.Meta, Unit: r.Unit, Reading: r.Reading, CurvatureRefraction: r.CurvatureRefraction,
		Book: book, Sections: []Section{}, Misclosures: []Misclosure{}, Checks: []Check{}, Failures: []Failure{}}
	shift := r.shiftM
	stopped := false
	_, err := again.scan(book, sightings, nil, func(row Row, st *Setup) bool {
		row.HeightM += shift
		row.HeightOfInstrumentM += shift
		if st != nil {
			c := *st
			c.HeightOfInstrumentM += shift
			c.ForeHeightM += shift
			st = &c
		}
		if !each(row, st) {
			stopped = true
			return false
		}
		return true
	})
	if stopped {
		return nil
	}
	return err
}

// scan is ReduceScan from r, begun by newResult, calling each, if set,
// with every row and the setup a foresight closes, before the held height
// is applied; it stops, failing, when each returns false.
func (r *Result) scan(book *levelbook.Book, sightings iter.Seq[*levelbook.Sighting], published map[string]float64, each func(Row, *Setup) bool) (*Result, error) {
	r.Rows, r.Setups = []Row{}, []Setup{}
	r.rc = r.newRowCheck()
	r.lens = make([]setupLen, 0, book.Count/2)
	var (
		u             = book.Meta.Unit
		h             float64 // height of the current backsight point
		cur           Setup
		backH         float64 // the height of cur's backsight point
		setups        int
		sec           = -1 // index in Sections of the open section
		cumLen        float64
		cumSetups     int
		anchorH       float64
		seen, anyRows int
	)
	for s := range sightings {
		i := seen
		seen++
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
				return nil, fmt.Errorf("%s:%d: curvature and refraction need the sight's length, and this sighting has none", book.Name, s.Line)
			}
			row.CorrectionM = CurvatureRefractionM(row.DistanceM)
			row.ReadingM -= row.CorrectionM
		}
		fore := false
		switch s.Sight {
		case levelbook.Backsight:
			setups++
			cur = Setup{
				Number:              setups,
				Back:                i,
				BackPoint:           s.Point,
				BackLine:            s.Line,
				BacksightM:          row.ReadingM,
				HeightOfInstrumentM: h + row.ReadingM,
				BackDistanceM:       row.DistanceM,
				HasDistances:        row.HasDistance,
			}
			row.HeightM, backH = h, h
		case levelbook.Intermediate:
			row.HeightM = cur.HeightOfInstrumentM - row.ReadingM
			cur.Intermediate = append(cur.Intermediate, i)
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
			fore = true
		}
		row.Setup = setups
		row.HeightOfInstrumentM = cur.HeightOfInstrumentM
		r.rc.sighting(s)
		r.rc.row(&row)
		if row.Sight == levelbook.Intermediate {
			r.sideRows = append(r.sideRows, row)
		} else if _, ok := r.Held[row.Point]; ok && !r.anchored {
			r.anchorAt, r.anchored, anchorH = row, true, row.HeightM
		}
		if !fore {
			if each != nil && !each(row, nil) {
				return nil, errStopped
			}
			continue
		}
		// The setup is complete: it joins its section (buildSections).
		anyRows++
		if sec < 0 {
			r.Sections = append(r.Sections, Section{
				Number:      len(r.Sections) + 1,
				From:        cur.BackPoint,
				FromLine:    cur.BackLine,
				FirstSetup:  cur.Number,
				HasLength:   true,
				FromHeightM: backH,
			})
			sec = len(r.Sections) - 1
		}
		sc := &r.Sections[sec]
		cur.Section = sc.Number
		sc.Setups++
		sc.DifferenceM += cur.DifferenceM
		if cur.HasDistances {
			sc.LengthM += cur.BackDistanceM + cur.ForeDistanceM
			sc.ImbalanceM += cur.ImbalanceM
		} else {
			sc.HasLength = false
		}
		cur.AccumulatedImbalanceM = sc.ImbalanceM
		if !s.TurningPoint {
			sc.To, sc.ToLine, sc.LastSetup = cur.ForePoint, cur.ForeLine, cur.Number
			sc.ToHeightM = cur.ForeHeightM
			cumLen += sc.LengthM
			cumSetups += sc.Setups
			sc.CumulativeLengthM, sc.CumulativeSetups = cumLen, cumSetups
			sec = -1
		}
		r.rc.setup(&cur)
		r.lens = append(r.lens, setupLen{back: cur.BackDistanceM, fore: cur.ForeDistanceM, has: cur.HasDistances})
		if each != nil && !each(row, &cur) {
			return nil, errStopped
		}
	}
	if seen != book.Count || anyRows == 0 || sec >= 0 {
		return nil, fmt.Errorf("reduce: %s gave %d sightings, not the %d it was read with", book.Name, seen, book.Count)
	}
	first, last := r.Sections[0], r.Sections[len(r.Sections)-1]
	r.Start, r.End = first.From, last.To
	r.Loop = r.Start == r.End

	// anchor, on what is kept.
	r.Relative = !r.anchored
	if r.anchored {
		if shift := r.Held[r.anchorAt.Point] - anchorH; shift != 0 {
			r.shiftM = shift
			for i := range r.sideRows {
				r.sideRows[i].HeightM += shift
				r.sideRows[i].HeightOfInstrumentM += shift
			}
			for i := range r.Sections {
				r.Sections[i].FromHeightM += shift
				r.Sections[i].ToHeightM += shift
			}
		}
	}
	r.buildMisclosures()
	r.buildDoubleRuns()
	r.buildConnections(published)
	r.spotHeights(r.sideRows)
	r.lens = nil // the held sights had them; nothing else does
	r.check()
	return r, nil
}

// Republish makes the check connections again with published, the known
// heights of marks not held (Options.Published), and every check: the
// result is that of a reduction with those options.
func (r *Result) Republish(published map[string]float64) {
	r.buildConnections(published)
	r.Checks, r.Failures = []Check{}, []Failure{}
	r.check()
}

// errStopped ends a scan whose caller asked no more rows.
var errStopped = errors.New("reduce: the scan was stopped")
