package register

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"slices"
	"strconv"
	"time"

	"github.com/jackc/pgx/v5"

	"cairn/internal/levelbook"
	"cairn/internal/reduce"
	"cairn/internal/standards"
	"cairn/internal/store"
)

// Finding is one break the audit found by deriving the register again
// rather than by rehashing it: a stored row that its own inputs do not give,
// or a schema that is not the one the migrations make.
type Finding struct {
	// Kind is book (a sighting or section against its run's book),
	// adjustment (a published adjustment against its stored inputs),
	// height (a version of kind adjustment against its adjustment) or
	// schema (the live catalog against a database freshly migrated).
	Kind string `json:"kind"`
	// Where names the row or object: "run 3, book line 17, sighting 5".
	Where string `json:"where"`
	// Since says from when the break can date: the time the row was
	// written (it was right then: the register checks what it writes), or,
	// for the schema, what the catalog allows saying.
	Since string `json:"since"`
	// What says what differs, both sides.
	What string `json:"what"`
}

// Derived is what AuditVerify derived again besides the hash chains.
type Derived struct {
	// Runs and Adjustments count the runs whose books were parsed and
	// reduced again and the published adjustments computed again.
	Runs        int `json:"runs"`
	Adjustments int `json:"adjustments"`
	// SchemaObjects counts the objects of the schema compared; 0 with
	// SchemaUnchecked saying why when the schema could not be compared.
	SchemaObjects   int    `json:"schema_objects"`
	SchemaUnchecked string `json:"schema_unchecked,omitempty"`
	// SchemaFrom says where the schema compared with came from:
	// SchemaFromScratch or SchemaFromCache ("" when not compared).
	SchemaFrom string `json:"schema_from,omitempty"`
	// Findings are the breaks found by deriving again.
	Findings []Finding `json:"findings"`
}

// Count is the number of breaks of every kind.
func (rep AuditReport) Count() int { return len(rep.Breaks) + len(rep.Findings) }

// mostPerRun bounds the findings of one run's book, so that a run altered
// wholesale does not bury the others.
const mostPerRun = 20

// auditDerive derives the register again and adds what differs to rep:
// every stored book parsed and reduced again against its sightings and
// sections (auditBooks), every published adjustment computed again from
// its stored inputs and compared with its results and with the versions
// that cite it (auditAdjustments), and the schema (auditSchema). The
// rows are read in one snapshot.
//
// With since not nil, only the runs recorded and the adjustments published
// by transactions after that one.
func (r *Register) auditDerive(ctx context.Context, rep *AuditReport, since *uint64) error {
	if rep.Findings == nil {
		rep.Findings = []Finding{}
	}
	err := r.withTx(ctx, readTx, func(tx pgx.Tx) error {
		if err := store.TxNoJIT(ctx, tx); err != nil {
			return err
		}
		if err := auditBooks(ctx, tx, rep, since); err != nil {
			return err
		}
		return r.auditAdjustments(ctx, tx, rep, since)
	})
	if err != nil {
		return err
	}
	return r.auditSchema(ctx, rep)
}

func utc(t time.Time) string { return t.UTC().Format("2006-01-02 15:04:05Z") }

// auditBooks parses and reduces every run's stored book again, one run at
// a time, with the options it was recorded with (its check summary: the
// class, the held heights, curvature and refraction), and compares the
// result, row by row and field by field, with the stored sightings and
// sections.
func auditBooks(ctx context.Context, tx pgx.Tx, rep *AuditReport, since *uint64) error {
	ids, err := store.AuditRunIDs(ctx, tx, since)
	if err != nil {
		return fmt.Errorf("list runs: %w", err)
	}
	for _, id := range ids {
		run, err := store.AuditRunGet(ctx, tx, id)
		if err != nil {
			return fmt.Errorf("read run %d: %w", id, err)
		}
		stored, err := store.SightingListByRun(ctx, tx, id)
		if err != nil {
			return fmt.Errorf("read the sightings of run %d: %w", id, err)
		}
		secs, err := store.SectionList(ctx, tx, store.SectionListParams{RunIDs: []int64{id}})
		if err != nil {
			return fmt.Errorf("read the sections of run %d: %w", id, err)
		}
		rep.Runs++
		rep.Findings = append(rep.Findings, deriveRun(run, stored, secs)...)
	}
	return nil
}

// deriveRun compares one run's stored sightings and sections with its
// book parsed and reduced again.
func deriveRun(run store.AuditRun, stored []store.Sighting, secs []store.Section) []Finding {
	var out []Finding
	since := "after " + utc(run.RecordedAt) + " (run recorded)"
	add := func(where, format string, args ...any) bool {
		if len(out) == mostPerRun {
			out = append(out, Finding{Kind: "book", Where: fmt.Sprintf("run %d", run.ID), Since: since,
				What: fmt.Sprintf("more than %d differences; the rest of the run was not compared", mostPerRun)})
		}
		if len(out) > mostPerRun {
			return false
		}
		out = append(out, Finding{Kind: "book", Where: where, Since: since, What: fmt.Sprintf(format, args...)})
		return true
	}
	runWhere := fmt.Sprintf("run %d (%s)", run.ID, run.FileName)
	book, err := levelbook.Parse(run.FileName, run.Book)
	if err != nil {
		add(runWhere, "its stored book no longer parses: %v", err)
		return out
	}
	var sum CheckSummary
	if err := json.Unmarshal(run.Checks, &sum); err != nil {
		add(runWhere, "its stored check summary is not readable: %v", err)
		return out
	}
	prof, err := runProfile(run.Standards)
	if err != nil {
		add(runWhere, "its stored standards profile is not readable: %v", err)
		return out
	}
	res, err := reduce.Reduce(book, reduce.Options{Class: sum.Class, Hold: sum.HeldM, Standards: prof, CurvatureRefraction: sum.CurvatureRefraction})
	if err != nil {
		add(runWhere, "its stored book no longer reduces with its stored options: %v", err)
		return out
	}

	derived := sightingsOf(book)
	for i := 0; i < max(len(derived), len(stored)); i++ {
		switch {
		case i >= len(stored):
			d := derived[i]
			if !add(fmt.Sprintf("run %d, book line %d, sighting %d", run.ID, d.Line, d.Seq), "the book has this sighting (%s %s) but it is not stored", d.Sight, d.Point) {
				return out
			}
			continue
		case i >= len(derived):
			s := stored[i]
			if !add(fmt.Sprintf("run %d, book line %d, sighting %d", run.ID, s.Line, s.Seq), "a sighting (%s %s) is stored that the book does not have", s.Sight, s.Point) {
				return out
			}
			continue
		}
		d, s := derived[i], stored[i]
		for _, f := range sightingFields(d, s) {
			if !add(fmt.Sprintf("run %d, book line %d, sighting %d, field %s", run.ID, d.Line, d.Seq, f.name),
				"stored as %s, but the book gives %s", f.stored, f.derived) {
				return out
			}
		}
	}

	for i := 0; i < max(len(res.Sections), len(secs)); i++ {
		switch {
		case i >= len(secs):
			d := res.Sections[i]
			if !add(fmt.Sprintf("run %d, book lines %d–%d, section %d", run.ID, d.FromLine, d.ToLine, d.Number),
				"the book gives this section (%s to %s) but it is not stored", d.From, d.To) {
				return out
			}
			continue
		case i >= len(res.Sections):
			s := secs[i]
			if !add(fmt.Sprintf("run %d, book lines %d–%d, section %d", run.ID, s.FirstLine, s.LastLine, s.Seq),
				"a section (%s to %s) is stored that the book does not give", s.From, s.To) {
				return out
			}
			continue
		}
		d, s := res.Sections[i], secs[i]
		for _, f := range sectionFields(d, s) {
			if !add(fmt.Sprintf("run %d, book lines %d–%d, section %d, field %s", run.ID, d.FromLine, d.ToLine, d.Number, f.name),
				"stored as %s, but the book gives %s", f.stored, f.derived) {
				return out
			}
		}
	}
	return out
}

type fieldDiff struct{ name, stored, derived string }

func fl(v float64) string { return strconv.FormatFloat(v, 'g', -1, 64) }

func optFl(v *float64) string {
	if v == nil {
		return "none"
	}
	return fl(*v)
}

func sightingFields(d, s store.Sighting) []fieldDiff {
	var out []fieldDiff
	cmp := func(name, stored, derived string) {
		if stored != derived {
			out = append(out, fieldDiff{name, stored, derived})
		}
	}
	cmp("seq", strconv.Itoa(s.Seq), strconv.Itoa(d.Seq))
	cmp("line", strconv.Itoa(s.Line), strconv.Itoa(d.Line))
	cmp("point", strconv.Quote(s.Point), strconv.Quote(d.Point))
	cmp("sight", s.Sight, d.Sight)
	cmp("turning_point", strconv.FormatBool(s.TurningPoint), strconv.FormatBool(d.TurningPoint))
	cmp("spot", strconv.FormatBool(s.Spot), strconv.FormatBool(d.Spot))
	cmp("upper", optFl(s.Upper), optFl(d.Upper))
	cmp("middle", fl(s.Middle), fl(d.Middle))
	cmp("lower", optFl(s.Lower), optFl(d.Lower))
	cmp("distance", optFl(s.Distance), optFl(d.Distance))
	cmp("distance_from", s.DistanceFrom, d.DistanceFrom)
	cmp("note", strconv.Quote(s.Note), strconv.Quote(d.Note))
	return out
}

func sectionFields(d reduce.Section, s store.Section) []fieldDiff {
	var out []fieldDiff
	cmp := func(name, stored, derived string) {
		if stored != derived {
			out = append(out, fieldDiff{name, stored, derived})
		}
	}
	var length *float64
	if d.HasLength {
		length = &d.LengthM
	}
	cmp("seq", strconv.Itoa(s.Seq), strconv.Itoa(d.Number))
	cmp("from", s.From, d.From)
	cmp("to", s.To, d.To)
	cmp("dh_m", fl(s.DifferenceM), fl(d.DifferenceM))
	cmp("length_m", optFl(s.LengthM), optFl(length))
	cmp("setups", strconv.Itoa(s.Setups), strconv.Itoa(d.Setups))
	cmp("first_line", strconv.Itoa(s.FirstLine), strconv.Itoa(d.FromLine))
	cmp("last_line", strconv.Itoa(s.LastLine), strconv.Itoa(d.ToLine))
	return out
}

// auditAdjustments computes every published adjustment again from its
// stored inputs (reproduce, as publication does) and compares it with its
// stored results, then compares the versions citing it with those results:
// one version of kind adjustment per adjusted mark, with the result's
// value, unit, decimals and class, on the adjustment's datum. A version of
// kind adjustment, or citing one, whose adjustment is not published is a
// break too.
func (r *Register) auditAdjustments(ctx context.Context, tx pgx.Tx, rep *AuditReport, since *uint64) error {
	adjs, err := store.AdjustmentList(ctx, tx, store.AdjustmentListParams{Status: store.StatusPublished})
	if err != nil {
		return fmt.Errorf("list published adjustments: %w", err)
	}
	if since != nil {
		ids, err := store.AuditPublishedAfter(ctx, tx, *since)
		if err != nil {
			return fmt.Errorf("list adjustments published since: %w", err)
		}
		adjs = slices.DeleteFunc(adjs, func(a store.Adjustment) bool { _, found := slices.BinarySearch(ids, a.ID); return !found })
	}
	for _, a := range adjs {
		rep.Adjustments++
		since := "after " + utc(a.CreatedAt) + " (adjustment made)"
		if a.StatusAt != nil {
			since = "after " + utc(*a.StatusAt) + " (adjustment published)"
		}
		where := fmt.Sprintf("adjustment %d", a.ID)
		add := func(where, format string, args ...any) {
			rep.Findings = append(rep.Findings, Finding{Kind: "adjustment", Where: where, Since: since, What: fmt.Sprintf(format, args...)})
		}
		v := &AdjustmentView{}
		if err := r.adjustmentView(ctx, tx, a.ID, v); err != nil {
			return fmt.Errorf("read adjustment %d: %w", a.ID, err)
		}
		err := reproduce(ctx, tx, v)
		var dm *DraftMismatchError
		switch {
		case errors.As(err, &dm) && dm.Failed != "":
			add(where, "its stored inputs can no longer be adjusted: %s", dm.Failed)
		case errors.As(err, &dm):
			for _, d := range dm.Differences {
				add(where+", result of "+d.Mark, "stored as %s, but its runs and held heights give %s", d.Stored, d.Recomputed)
			}
		case err != nil:
			return err
		}

		// The versions citing it against its results.
		results := map[string]string{}
		cited := map[string]int{}
		for _, res := range v.Results {
			if !res.Held {
				results[res.Designation] = resultText(res.Value, res.Unit, res.Decimals, res.Class)
			}
		}
		hs, err := store.AuditHeightsOfAdjustment(ctx, tx, a.ID)
		if err != nil {
			return fmt.Errorf("read the versions of adjustment %d: %w", a.ID, err)
		}
		for _, h := range hs {
			hadd := func(format string, args ...any) {
				hw := fmt.Sprintf("height of %s on %s, version %d (id %d)", h.Designation, h.Datum, h.Version, h.ID)
				rep.Findings = append(rep.Findings, Finding{Kind: "height", Where: hw, Since: "after " + utc(h.RecordedAt) + " (version written)",
					What: fmt.Sprintf(format, args...)})
			}
			if h.SourceKind != "adjustment" {
				hadd("is of kind %s but cites adjustment %d", h.SourceKind, a.ID)
				continue
			}
			cited[h.Designation]++
			want, ok := results[h.Designation]
			got := resultText(h.Value, h.Unit, h.Decimals, h.Class)
			switch {
			case !ok:
				hadd("cites adjustment %d, which gives %s no result to publish", a.ID, h.Designation)
			case got != want:
				hadd("is %s, but adjustment %d produced %s", got, a.ID, want)
			}
			if h.Datum != a.DatumCode {
				hadd("is on datum %s, but adjustment %d is on %s", h.Datum, a.ID, a.DatumCode)
			}
		}
		for _, res := range v.Results {
			if res.Held {
				continue
			}
			switch n := cited[res.Designation]; {
			case n == 0:
				add(where+", result of "+res.Designation, "no height version publishes it")
			case n > 1:
				add(where+", result of "+res.Designation, "%d height versions publish it (want 1)", n)
			}
		}
	}
	hs, err := store.AuditHeightsNotOfPublished(ctx, tx, since)
	if err != nil {
		return fmt.Errorf("read versions citing adjustments: %w", err)
	}
	for _, h := range hs {
		what := "is of kind adjustment but cites no adjustment"
		if h.AdjustmentID != nil {
			status := h.AdjustmentStatus
			if status == "" {
				status = "not in the register"
			}
			what = fmt.Sprintf("cites adjustment %d, which is %s, not published: no height may come from it", *h.AdjustmentID, status)
		}
		rep.Findings = append(rep.Findings, Finding{Kind: "height",
			Where: fmt.Sprintf("height of %s on %s, version %d (id %d)", h.Designation, h.DatumCode, h.Version, h.ID),
			Since: "after " + utc(h.RecordedAt) + " (version written)", What: what})
	}
	return nil
}

// resultText is a published value with its unit, decimals and class, as
// shownResult words it.
func resultText(value, unit *string, decimals *int, class string) string {
	if value == nil || unit == nil || decimals == nil {
		return "no value"
	}
	return shownResult(*value, *unit, *decimals, class)
}

// runProfile is the profile a stored run was judged by: its stored file,
// parsed again, or the built-in it names (a built-in of this binary: its
// edition may be later than the run's); before v15, the default.
func runProfile(s store.RunStandards) (*standards.Profile, error) {
	switch {
	case s.File != nil:
		return standards.Parse(s.Profile+" (stored with the run)", s.File)
	case s.Profile != "":
		if p, ok := standards.Builtin(s.Profile); ok {
			return p, nil
		}
		return nil, fmt.Errorf("built-in profile %q is not known to this cairn", s.Profile)
	}
	return standards.Default(), nil
}
