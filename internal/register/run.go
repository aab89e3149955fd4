package register

import (
	"bytes"
	"context"
	"crypto/sha256"
	"encoding/json"
	"errors"
	"fmt"
	"maps"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"time"

	"github.com/jackc/pgx/v5"

	"cairn/internal/levelbook"
	"cairn/internal/names"
	"cairn/internal/reduce"
	"cairn/internal/standards"
	"cairn/internal/store"
	"cairn/internal/units"
)

// RecordParams describe a field book to record as a run.
type RecordParams struct {
	// Path names the book in errors, as given; the run keeps its base name.
	Path string
	// Book is the file's bytes, kept verbatim.
	Book []byte
	// Hold gives known heights by mark, in the book's unit; Class
	// overrides the book's accuracy class; CurvatureRefraction corrects
	// the readings: the options of the reduction, as for `run check`.
	Hold                map[string]float64
	Class               standards.Class
	CurvatureRefraction bool
	// Standards is the profile that judges the run, overriding the book's
	// "# standards:"; nil keeps the book's (a built-in, or a file read
	// from the book's directory), else the default. The run keeps its
	// name, version and source, and a file profile's bytes.
	Standards *standards.Profile
	// HoldCurrent names marks held at their current published height on
	// the book's datum, in the book's unit (see HeldHeights); the run
	// keeps the versions held. A mark is held once, here or in Hold.
	// AllowCondition holds those whose latest condition report is
	// disturbed, destroyed or not found; ConditionReason, required with
	// it, says why and is kept with the run.
	HoldCurrent     []string
	AllowCondition  bool
	ConditionReason string
	// By says who records the run.
	By string
	// NewMarks creates the marks the register lacks, each with a first
	// condition report "unverified" and no height. Without it, a book that
	// names a mark the register lacks is refused.
	NewMarks bool
	// AcceptFailedChecks records a book whose checks fail; Reason, required
	// with it, says why and is kept with the run.
	AcceptFailedChecks bool
	Reason             string
	// Today is the recorder's calendar date (Today when zero): a book
	// dated after it is refused.
	Today time.Time
	// CheckOnly records the book as a check run: a check between marks of
	// known height (a crew's two-mark check before a job) that adjusts
	// nothing. It must tie to two marks of known height.
	CheckOnly bool
	// KeepNotes keeps the reduced notes (Recorded.Result's Rows and
	// Setups, and its Book's Sightings), for a report that shows them:
	// the memory recording takes then grows with the book. Without it
	// the book is read a sighting at a time, as it is reduced and stored,
	// and the result has every section, check and failure but no rows.
	KeepNotes bool

	// beforeSections, if set, sees the sections just before they are
	// stored (tests use it to make the write fail part way).
	beforeSections func([]store.Section)
}

// Recorded is a run just recorded.
type Recorded struct {
	Run store.Run
	// Result is the book's reduction (the same as `run check` shows;
	// without RecordParams.KeepNotes, no rows or setups, and its Book has
	// the book's metadata and no points or sightings).
	Result *reduce.Result
	// Marks are the marks the run touched, with the condition current at
	// recording.
	Marks []store.RunMark
	// Cautions name the touched marks whose latest condition report says
	// they are disturbed, destroyed or not found.
	Cautions []string
	// Held are the marks the book was reduced from, by designation.
	Held []store.RunHeld
	// Warnings are what the register says of the book without refusing
	// it (BookWarnings): marks taken as turning points, a date before a
	// mark's earliest record.
	Warnings []string
	// Connections are the run's check connections as stored; Suspect the
	// marks every one of whose judged connections failed (they are in
	// doubt until a later check passes or a condition report is made).
	Connections []store.CheckConnection
	Suspect     []string
	// CheckOnly says the run was recorded as a check run.
	CheckOnly bool
}

// CheckSummary is what a run keeps of its reduction's checks, as they
// stood when it was recorded.
type CheckSummary struct {
	// Class is the accuracy class checked against ("" when none).
	Class standards.Class `json:"class,omitempty"`
	// Standards names the profile that judged the run (nil for runs
	// recorded before it was kept).
	Standards *standards.Ref `json:"standards,omitempty"`
	// HeldM are the held heights in metres, by mark.
	HeldM               map[string]float64  `json:"held_m,omitempty"`
	CurvatureRefraction bool                `json:"curvature_refraction"`
	Start               string              `json:"start"`
	End                 string              `json:"end"`
	Loop                bool                `json:"loop"`
	Misclosures         []reduce.Misclosure `json:"misclosures"`
	// DoubleRuns are the sections levelled both ways, in the book and
	// against the runs recorded before it (absent for runs recorded
	// before they were compared).
	DoubleRuns []reduce.DoubleRun `json:"double_runs,omitempty"`
	// Connections are the check connections (absent for runs recorded
	// before they were made).
	Connections []reduce.Connection `json:"check_connections,omitempty"`
	Checks      []reduce.Check      `json:"checks"`
	Failures    []reduce.Failure    `json:"failures"`
	// Summary is the reduction's one-sentence summary of its checks
	// (empty for runs recorded before it was kept).
	Summary string `json:"summary,omitempty"`
}

func summaryOf(res *reduce.Result) CheckSummary {
	ref := res.Standards
	return CheckSummary{
		Class: res.Class, Standards: &ref, HeldM: res.Held, CurvatureRefraction: res.CurvatureRefraction,
		Start: res.Start, End: res.End, Loop: res.Loop,
		Misclosures: res.Misclosures, DoubleRuns: res.DoubleRuns, Connections: res.Connections, Checks: res.Checks, Failures: res.Failures, Summary: res.Summary,
	}
}

// UnknownMarksError refuses a book that names marks the register lacks;
// nothing was written. The marks can be added first, or created with the
// run (RecordParams.NewMarks): the caller words that advice in its own
// terms, between Problem and "; nothing was written".
type UnknownMarksError struct {
	File  string
	Marks []UnknownMark
}

// UnknownMark is a designation the register lacks and the book line that
// first names it.
type UnknownMark struct {
	Designation string
	Line        int
}

// Problem says which marks are missing, without advice:
//
//	north-loop.csv: 2 marks are not in the register: TC-0412 (line 16), TC-0413 (line 21)
func (e *UnknownMarksError) Problem() string {
	names := make([]string, len(e.Marks))
	for i, m := range e.Marks {
		names[i] = fmt.Sprintf("%s (line %d)", m.Designation, m.Line)
	}
	what := "mark is"
	if len(e.Marks) != 1 {
		what = "marks are"
	}
	return fmt.Sprintf("%s: %d %s not in the register: %s", e.File, len(e.Marks), what, strings.Join(names, ", "))
}

func (e *UnknownMarksError) Error() string {
	return e.Problem() + "; add them to the register first, or create them with the run; nothing was written"
}

// AlreadyRecordedError refuses a book whose bytes are already recorded;
// Run is the run that holds them.
type AlreadyRecordedError struct {
	File string
	Run  store.Run
}

func (e *AlreadyRecordedError) Error() string {
	s := fmt.Sprintf("%s is already recorded as run %d (from %s, recorded %s by %s)",
		e.File, e.Run.ID, e.Run.FileName, e.Run.RecordedAt.UTC().Format("2006-01-02 15:04:05Z"), e.Run.RecordedBy)
	if e.Run.Voided != nil {
		s += fmt.Sprintf("; run %d is voided, and the register keeps each file once: to record its observations again, add a comment to the book saying why", e.Run.ID)
	}
	return s + "; nothing was written"
}

// SameObservationsError refuses a book whose observations are those of a
// run already recorded and not voided, whatever its bytes (the same
// sightings with other line ends, comments, column order or spacing): an
// adjustment would count the same field work twice. Run is the run that
// holds them. The book can be recorded only once that run is voided (the
// caller words that advice in its own terms, after Problem).
type SameObservationsError struct {
	File string
	Run  store.Run
}

// Problem says which run holds the observations, without advice:
//
//	north-loop-2.csv holds the same observations as run 3 (from north-loop.csv, recorded 2024-05-14 16:02:11Z by R. Okafor)
func (e *SameObservationsError) Problem() string {
	return fmt.Sprintf("%s holds the same observations as run %d (from %s, recorded %s by %s)",
		e.File, e.Run.ID, e.Run.FileName, e.Run.RecordedAt.UTC().Format("2006-01-02 15:04:05Z"), e.Run.RecordedBy)
}

func (e *SameObservationsError) Error() string {
	return fmt.Sprintf("%s: the same field work is recorded once; if run %d is wrong, void it first; nothing was written", e.Problem(), e.Run.ID)
}

// ChecksFailedError refuses a book whose checks fail; Result holds the
// reduction with every failure. The book can be recorded anyway with a
// reason (RecordParams.AcceptFailedChecks and Reason): the caller words
// that advice in its own terms, on a line after the message.
type ChecksFailedError struct {
	File   string
	Result *reduce.Result
}

func (e *ChecksFailedError) Error() string {
	var b strings.Builder
	fmt.Fprintf(&b, "%s: %d check(s) failed, nothing was recorded:", e.File, len(e.Result.Failures))
	const most = 20
	for i, f := range e.Result.Failures {
		if i == most {
			fmt.Fprintf(&b, "\n  ... and %d more (see cairn run check)", len(e.Result.Failures)-most)
			break
		}
		fmt.Fprintf(&b, "\n  line %d: %s: %s: %s", f.Line, f.Kind, f.Subject, f.Message)
	}
	return b.String()
}

// errAlreadyRecorded leaves the recording transaction when the book's
// SHA-256 is taken; the run holding it is looked up afterwards, when the
// other transaction has committed.
var errAlreadyRecorded = errors.New("book already recorded")

// Record reads and reduces a field book and, in one transaction, stores it
// as a run: its metadata and bytes with their SHA-256, every sighting in
// field order, the sections between consecutive marks, and the condition
// of each mark it touched. Every mark the book names must exist (or
// p.NewMarks creates them); a book already recorded (the same bytes:
// AlreadyRecordedError), a book of the observations of a run not voided
// (SameObservationsError), or a book whose checks fail without
// p.AcceptFailedChecks, is refused. A refused book, or a failure
// part way, writes nothing.
func (r *Register) Record(ctx context.Context, p RecordParams) (*Recorded, error) {
	if strings.TrimSpace(p.By) == "" {
		return nil, inputErr("by", "say who records the run")
	}
	if p.AcceptFailedChecks && strings.TrimSpace(p.Reason) == "" {
		return nil, inputErr("reason", "say why a book whose checks fail is recorded")
	}
	// The book is read once for its checks, its points and its
	// fingerprint, then again, a sighting at a time, to be reduced and to
	// be stored: no copy of its sightings is held.
	book, err := levelbook.Summarize(p.Path, p.Book)
	if err != nil {
		return nil, err
	}
	if err := CheckBookDate(book, p.Today); err != nil {
		return nil, err
	}
	prof := p.Standards
	if prof == nil {
		if prof, err = standards.Resolve(book.Meta.Standards, filepath.Dir(p.Path)); err != nil {
			return nil, &InputError{Field: "standards", Msg: err.Error()}
		}
	}
	opts := reduce.Options{Class: p.Class, Standards: prof, CurvatureRefraction: p.CurvatureRefraction}
	if len(p.Hold) > 0 || len(p.HoldCurrent) > 0 {
		if opts.Hold, err = TypedHoldM(book.Meta.Unit, p.Hold, len(p.HoldCurrent)); err != nil {
			return nil, err
		}
	}
	var held []HeldHeight
	if len(p.HoldCurrent) > 0 {
		for _, name := range p.HoldCurrent {
			if _, typed := p.Hold[strings.TrimSpace(name)]; typed {
				return nil, inputErr("hold", "%s is held twice", strings.TrimSpace(name))
			}
		}
		if held, err = r.HeldHeights(ctx, HeldHeightsParams{Book: book, Marks: p.HoldCurrent,
			AllowCondition: p.AllowCondition, ConditionReason: p.ConditionReason}); err != nil {
			return nil, err
		}
		for _, h := range held {
			opts.Hold[h.Designation] = h.ValueM
		}
	} else if p.AllowCondition || strings.TrimSpace(p.ConditionReason) != "" {
		return nil, inputErr("allow-condition", "only marks held at their register height have their condition checked: there are none")
	}
	res, err := reduceBook(p, book, opts)
	if err != nil {
		return nil, err
	}
	if !res.Passed() && !p.AcceptFailedChecks {
		return nil, &ChecksFailedError{File: p.Path, Result: res}
	}
	run, err := runInsertParams(p, book, res, prof, failedReason(p, res))
	if err != nil {
		return nil, err
	}

	// The marks the book names, in the order it first names them.
	var names []string
	firstLine := map[string]int{}
	for _, pt := range book.Points {
		if pt.Mark() {
			firstLine[pt.Name] = pt.Line
			names = append(names, pt.Name)
		}
	}

	out := &Recorded{Result: res}
	err = r.withTx(ctx, pgx.TxOptions{}, func(tx pgx.Tx) error {
		// Refuse a book already recorded before writing anything, so a
		// refusal uses up no run number; the unique SHA-256 settles a race.
		if _, err := store.RunGetBySHA256(ctx, tx, run.BookSHA256); err == nil {
			return errAlreadyRecorded
		} else if !errors.Is(err, store.ErrNotFound) {
			return err
		}
		// And a book of the same observations; the unique fingerprint and
		// count settle a race.
		holder, seq, err := sameObservations(ctx, tx, book, run.ObservationsSHA256)
		if err != nil {
			return err
		}
		if holder != nil {
			return &SameObservationsError{File: p.Path, Run: *holder}
		}
		run.ObservationsSeq = seq
		byName, missing, err := findMarks(ctx, tx, p, names, firstLine)
		if err != nil {
			return err
		}
		// The heights held from the register are still current, and
		// their marks' conditions are those that were judged.
		if err := checkHeldCurrent(ctx, tx, held, byName); err != nil {
			return err
		}
		// Said before the run's own records count among the marks'.
		if out.Warnings, err = bookWarnings(ctx, tx, book); err != nil {
			return err
		}
		// The book's points have served (its marks are named, its
		// warnings said): a book of the largest size has half a million,
		// let go before its bytes are sent.
		book.Points = nil
		// The checks against the register: the published heights of the
		// book's other marks (check connections) and the sections other
		// runs levelled the other way (double-run sections).
		pub, err := publishedHeights(ctx, tx, book, names, byName, held, opts.Hold)
		if err != nil {
			return err
		}
		published := map[string]float64{}
		for name, h := range pub {
			published[name] = h.ValueM
		}
		res.Republish(published)
		others, err := otherRunSections(ctx, tx, res, byName)
		if err != nil {
			return err
		}
		res.CompareOtherRuns(others)
		out.Result = res
		if p.CheckOnly && len(res.Connections) == 0 {
			return inputErr("check-only", "a check run compares marks of known height, and %s ties to fewer than two (hold them, or publish their heights first)", p.Path)
		}
		if !res.Passed() && !p.AcceptFailedChecks {
			return &ChecksFailedError{File: p.Path, Result: res}
		}
		if run, err = runInsertParams(p, book, res, prof, failedReason(p, res)); err != nil {
			return err
		}
		run.ObservationsSeq = seq
		id, err := store.RunInsert(ctx, tx, run)
		if errors.Is(err, store.ErrAlreadyExists) {
			return errAlreadyRecorded
		}
		if err != nil {
			return err
		}
		marks, err := createMarks(ctx, tx, p, book, names, byName, missing)
		if err != nil {
			return err
		}
		if err := copySightings(ctx, tx, p, book, id); err != nil {
			return err
		}
		ids := map[string]int64{}
		for _, m := range marks {
			ids[m.Designation] = m.MarkID
		}
		secs := make([]store.Section, len(res.Sections))
		for i, s := range res.Sections {
			secs[i] = store.Section{
				Seq: s.Number, FromMarkID: ids[s.From], ToMarkID: ids[s.To], From: s.From, To: s.To,
				DifferenceM: s.DifferenceM, Setups: s.Setups, FirstLine: s.FromLine, LastLine: s.ToLine,
			}
			if s.HasLength {
				secs[i].LengthM = &s.LengthM
			}
		}
		if p.beforeSections != nil {
			p.beforeSections(secs)
		}
		if _, err := store.SectionCopy(ctx, tx, store.SectionCopyParams{RunID: id, Sections: secs}); err != nil {
			return err
		}
		if _, err := store.RunMarkCopy(ctx, tx, store.RunMarkCopyParams{RunID: id, Marks: marks}); err != nil {
			return err
		}
		if rh := runHeldOf(p, held, ids); len(rh) > 0 {
			if _, err := store.RunHeldCopy(ctx, tx, store.RunHeldCopyParams{RunID: id, Held: rh}); err != nil {
				return err
			}
			if out.Held, err = store.RunHeldListByRun(ctx, tx, id); err != nil {
				return err
			}
		}
		if p.CheckOnly {
			if err := store.CheckRunInsert(ctx, tx, id); err != nil {
				return err
			}
			out.CheckOnly = true
		}
		if cs := connectionsOf(res, ids, pub, held); len(cs) > 0 {
			if _, err := store.CheckConnectionCopy(ctx, tx, store.CheckConnectionCopyParams{RunID: id, Connections: cs}); err != nil {
				return err
			}
			if out.Connections, err = store.CheckConnectionListByRun(ctx, tx, id); err != nil {
				return err
			}
			out.Suspect = res.SuspectMarks()
		}
		if out.Run, err = store.RunGet(ctx, tx, id); err != nil {
			return err
		}
		out.Marks, err = store.RunMarkListByRun(ctx, tx, id)
		return err
	})
	if errors.Is(err, errAlreadyRecorded) {
		holder, err := store.RunGetBySHA256(ctx, r.pool, run.BookSHA256)
		if errors.Is(err, store.ErrNotFound) {
			// The other recorder's book had other bytes and the same
			// observations.
			return nil, r.sameObservationsAfterRace(ctx, p.Path, run.ObservationsSHA256)
		}
		if err != nil {
			return nil, fmt.Errorf("look up the run that holds %s: %w", p.Path, err)
		}
		return nil, &AlreadyRecordedError{File: p.Path, Run: holder}
	}
	if isRefusal(err) {
		return nil, err // it names the book or the field already
	}
	if err != nil {
		return nil, fmt.Errorf("record %s: %w", p.Path, asConflict(err))
	}
	out.Cautions = cautions(out.Marks)
	return out, nil
}

// failedReason is the reason kept with a run whose checks failed ("" when
// they passed).
func failedReason(p RecordParams, res *reduce.Result) string {
	if res.Passed() {
		return ""
	}
	return strings.TrimSpace(p.Reason)
}

// PublishedHeights returns the current published heights of the marks
// book names that are not in hold (designations), on the book's datum (or
// that of held, the heights held from the register), for its check
// connections. Nothing is written.
func (r *Register) PublishedHeights(ctx context.Context, book *levelbook.Book, held []HeldHeight, hold []string) (map[string]PublishedHeight, error) {
	var out map[string]PublishedHeight
	err := r.withTx(ctx, readTx, func(tx pgx.Tx) error {
		var names []string
		for _, pt := range points(book) {
			if pt.Mark() {
				names = append(names, pt.Name)
			}
		}
		known, err := store.MarkListByDesignations(ctx, tx, names)
		if err != nil {
			return err
		}
		byName := map[string]store.Mark{}
		for _, m := range known {
			byName[m.Designation] = m
		}
		skip := map[string]float64{}
		for _, h := range hold {
			skip[h] = 0
		}
		out, err = publishedHeights(ctx, tx, book, names, byName, held, skip)
		return err
	})
	return out, err
}

// PublishedHeight is the published height of a mark a book names, not
// held, for its check connections.
type PublishedHeight struct {
	Version store.Height
	ValueM  float64
}

// publishedHeights finds the current published heights of the marks of
// names that are not held, on the datum the book names (else the datum of
// the heights held from the register; else none is looked for). A datum
// the register lacks gives none: the held heights' lookup refuses it when
// it matters.
func publishedHeights(ctx context.Context, db store.DBTX, book *levelbook.Book, names []string, byName map[string]store.Mark,
	held []HeldHeight, hold map[string]float64) (map[string]PublishedHeight, error) {
	var datumID int64
	if named := book.Meta.Datum; looseKey(named) != "" {
		d, ok, err := datumNamed(ctx, db, named)
		if err != nil {
			return nil, err
		}
		if ok {
			datumID = d.ID
		}
	} else if len(held) > 0 {
		datumID = held[0].Version.DatumID
	}
	out := map[string]PublishedHeight{}
	if datumID == 0 {
		return out, nil
	}
	// A mark whose latest condition report puts it in doubt is no control
	// to check into: it is in doubt already (DoubtCondition).
	var ids []int64
	for _, n := range names {
		if _, isHeld := hold[n]; !isHeld {
			if m, ok := byName[n]; ok && (m.Latest == nil || !conditionsInDoubt[m.Latest.Condition]) {
				ids = append(ids, m.ID)
			}
		}
	}
	latest, err := store.HeightLatestMany(ctx, db, store.HeightLatestManyParams{MarkIDs: ids, DatumID: datumID})
	if err != nil {
		return nil, fmt.Errorf("look up the published heights of %s's marks: %w", book.Name, err)
	}
	for _, h := range latest {
		if h.Value == nil {
			continue
		}
		hm, err := heightMetres(h)
		if err != nil {
			return nil, err
		}
		out[h.Designation] = PublishedHeight{Version: h, ValueM: hm}
	}
	return out, nil
}

// otherRunSections are the sections of runs not voided levelled the other
// way between the marks of res's sections.
func otherRunSections(ctx context.Context, db store.DBTX, res *reduce.Result, byName map[string]store.Mark) ([]reduce.OtherSection, error) {
	var p store.SectionListBetweenParams
	for _, s := range res.Sections {
		from, ok1 := byName[s.From]
		to, ok2 := byName[s.To]
		if ok1 && ok2 {
			p.FromMarkIDs, p.ToMarkIDs = append(p.FromMarkIDs, to.ID), append(p.ToMarkIDs, from.ID)
		}
	}
	if len(p.FromMarkIDs) == 0 {
		return nil, nil
	}
	secs, err := store.SectionListBetween(ctx, db, p)
	if err != nil {
		return nil, fmt.Errorf("look up sections levelled the other way: %w", err)
	}
	out := make([]reduce.OtherSection, len(secs))
	for i, s := range secs {
		out[i] = reduce.OtherSection{RunID: s.RunID, Seq: s.Seq, From: s.From, To: s.To, DhM: s.DifferenceM, LengthM: s.LengthM, FirstLine: s.FirstLine, LastLine: s.LastLine}
	}
	return out, nil
}

// connectionsOf gives the rows of check_connection: res's connections
// with the published versions compared.
func connectionsOf(res *reduce.Result, ids map[string]int64, pub map[string]PublishedHeight, held []HeldHeight) []store.CheckConnection {
	version := map[string]*int64{}
	for name, h := range pub {
		version[name] = &h.Version.ID
	}
	for _, h := range held {
		version[h.Designation] = &h.Version.ID
	}
	out := make([]store.CheckConnection, len(res.Connections))
	for i, c := range res.Connections {
		sc := store.CheckConnection{Seq: i + 1, FromMarkID: ids[c.From], ToMarkID: ids[c.To], From: c.From, To: c.To,
			FromHeightID: version[c.From], ToHeightID: version[c.To], ObservedM: c.ObservedM, KnownM: c.KnownM, AsClosure: c.AsClosure}
		if c.HasLength {
			sc.LengthM = &c.LengthM
		}
		if c.HasAllowable {
			sc.AllowableM, sc.Pass = &c.AllowableM, &c.Pass
		}
		out[i] = sc
	}
	return out
}

// sameObservations finds the run, not voided, that holds the observations
// of book (fingerprint sum): among the runs with that fingerprint stored,
// and among the runs recorded before schema v7, whose fingerprints are
// recomputed from their stored sightings (the same function over the same
// parsed values, so exact). With none, seq is the number of voided runs
// with the fingerprint stored: the new run's observations_seq.
func sameObservations(ctx context.Context, tx pgx.Tx, book *levelbook.Book, sum []byte) (holder *store.Run, seq int, err error) {
	runs, err := store.RunListByObservations(ctx, tx, sum)
	if err != nil {
		return nil, 0, fmt.Errorf("look up runs of the same observations: %w", err)
	}
	for i := range runs {
		if runs[i].Voided == nil {
			return &runs[i], 0, nil
		}
	}
	seq = len(runs)
	old, err := store.RunListUnfingerprinted(ctx, tx, store.RunListUnfingerprintedParams{Unit: string(book.Meta.Unit), Sightings: book.Count})
	if err != nil {
		return nil, 0, fmt.Errorf("look up runs recorded before observations were fingerprinted: %w", err)
	}
	for i := range old {
		if old[i].Voided != nil {
			continue
		}
		fp, err := storedObservations(ctx, tx, old[i])
		if err != nil {
			return nil, 0, err
		}
		if bytes.Equal(fp[:], sum) {
			return &old[i], 0, nil
		}
	}
	return nil, seq, nil
}

// storedObservations recomputes the observations fingerprint of a stored
// run from its sightings and metadata, as levelbook parsed them when it was
// recorded.
func storedObservations(ctx context.Context, db store.DBTX, run store.Run) ([sha256.Size]byte, error) {
	var meta levelbook.Meta
	if err := json.Unmarshal(run.Meta, &meta); err != nil {
		return [sha256.Size]byte{}, fmt.Errorf("decode metadata of run %d: %w", run.ID, err)
	}
	meta.Unit = units.Unit(run.Unit)
	gs, err := store.SightingListByRun(ctx, db, run.ID)
	if err != nil {
		return [sha256.Size]byte{}, fmt.Errorf("read the sightings of run %d: %w", run.ID, err)
	}
	book := &levelbook.Book{Meta: meta, Sightings: make([]levelbook.Sighting, len(gs))}
	for i, g := range gs {
		s := levelbook.Sighting{Line: g.Line, Point: g.Point, Sight: levelbook.Sight(g.Sight), TurningPoint: g.TurningPoint,
			Middle: g.Middle, DistanceFrom: levelbook.DistanceFrom(g.DistanceFrom), Note: g.Note}
		if g.Upper != nil && g.Lower != nil {
			s.Upper, s.Lower, s.ThreeWire = *g.Upper, *g.Lower, true
		}
		if g.Distance != nil {
			s.Distance = *g.Distance
		}
		book.Sightings[i] = s
	}
	return book.ObservationsSHA256(), nil
}

// sameObservationsAfterRace is the refusal of a book that lost the race to
// record its observations: the standing run that holds them now.
func (r *Register) sameObservationsAfterRace(ctx context.Context, path string, sum []byte) error {
	runs, err := store.RunListByObservations(ctx, r.pool, sum)
	if err != nil {
		return fmt.Errorf("look up the run that holds the observations of %s: %w", path, err)
	}
	for _, run := range runs {
		if run.Voided == nil {
			return &SameObservationsError{File: path, Run: run}
		}
	}
	return &ConflictError{Err: fmt.Errorf("record %s: another run of the same observations was recorded meanwhile", path)}
}

// isRefusal says whether err is one of the typed refusals of Record (bad
// input, a bad book, unknown marks, a book already recorded, failed checks,
// a conflict), which name the book or the field at fault already.
func isRefusal(err error) bool {
	var (
		ie  *InputError
		le  *levelbook.Error
		ume *UnknownMarksError
		are *AlreadyRecordedError
		soe *SameObservationsError
		cfe *ChecksFailedError
		ce  *ConflictError
	)
	return errors.As(err, &ie) || errors.As(err, &le) || errors.As(err, &ume) ||
		errors.As(err, &are) || errors.As(err, &soe) || errors.As(err, &cfe) || errors.As(err, &ce)
}

// runInsertParams gathers the run's row from the book and its reduction.
func runInsertParams(p RecordParams, book *levelbook.Book, res *reduce.Result, prof *standards.Profile, reason string) (store.RunInsertParams, error) {
	m := book.Meta
	meta, err := json.Marshal(m)
	if err != nil {
		return store.RunInsertParams{}, fmt.Errorf("encode metadata of %s: %w", p.Path, err)
	}
	checks, err := json.Marshal(summaryOf(res))
	if err != nil {
		return store.RunInsertParams{}, fmt.Errorf("encode checks of %s: %w", p.Path, err)
	}
	var observed *time.Time
	if m.Date != "" {
		d, err := time.Parse("2006-01-02", m.Date)
		if err != nil {
			return store.RunInsertParams{}, &levelbook.Error{File: p.Path, Line: m.Lines["date"], Field: "date", Msg: "not a date (want YYYY-MM-DD)"}
		}
		// A date after today was refused already (CheckBookDate).
		observed = &d
	}
	sum := sha256.Sum256(p.Book)
	obs := book.ObservationsSHA256()
	// The profile that judged the run: a built-in by name and edition, an
	// office's file by its SHA-256 and its bytes.
	kept := store.RunStandards{Profile: prof.Name, Version: prof.Version(), Source: prof.Source}
	if !prof.Builtin {
		kept.File = prof.Data
	}
	return store.RunInsertParams{ObservationsSHA256: obs[:], Standards: kept,
		Name: m.Run, ObservedOn: observed, Crew: m.Crew, Instrument: m.Instrument, Rod: m.Rod, Datum: m.Datum,
		Class: string(res.Class), Unit: string(m.Unit), Meta: meta,
		FileName: filepath.Base(p.Path), Book: p.Book, BookSHA256: sum[:],
		RecordedBy: strings.TrimSpace(p.By), ChecksFailed: len(res.Failures), Checks: checks, AcceptedReason: reason,
	}, nil
}

// findMarks looks up the marks the book names, with their latest
// condition; missing are those the register lacks. Without p.NewMarks, a
// missing mark refuses the book.
func findMarks(ctx context.Context, tx pgx.Tx, p RecordParams, named []string, firstLine map[string]int) (byName map[string]store.Mark, missing []UnknownMark, err error) {
	known, err := store.MarkListByDesignations(ctx, tx, named)
	if err != nil {
		return nil, nil, fmt.Errorf("look up the marks of %s: %w", p.Path, err)
	}
	byName = map[string]store.Mark{}
	for _, m := range known {
		byName[m.Designation] = m
	}
	for _, n := range named {
		if _, ok := byName[n]; !ok {
			missing = append(missing, UnknownMark{Designation: n, Line: firstLine[n]})
		}
	}
	// A name the register holds written another way (tc-0412 for
	// TC-0412) is that mark misspelt, never a new one: all the missing
	// names looked up at once, the first in the book's order named.
	if len(missing) > 0 {
		folded := make([]string, len(missing))
		for i, u := range missing {
			folded[i] = names.Fold(u.Designation)
		}
		like, err := store.MarkListByFolded(ctx, tx, folded)
		if err != nil {
			return nil, nil, fmt.Errorf("look up marks named like those of %s: %w", p.Path, err)
		}
		existing := map[string]string{}
		for _, m := range like {
			existing[names.Fold(m.Designation)] = m.Designation
		}
		for i, u := range missing {
			if e, ok := existing[folded[i]]; ok {
				return nil, nil, &levelbook.Error{File: p.Path, Line: u.Line, Field: "point",
					Msg: fmt.Sprintf("%q is not in the register, but mark %s is the same name written another way (case or character forms): write %s", u.Designation, e, e)}
			}
		}
		// An alias names a mark, but a book names its marks by designation.
		held, err := store.AliasHolders(ctx, tx, folded)
		if err != nil {
			return nil, nil, fmt.Errorf("look up the aliases among the names of %s: %w", p.Path, err)
		}
		for i, u := range missing {
			if h, ok := held[folded[i]]; ok {
				return nil, nil, &levelbook.Error{File: p.Path, Line: u.Line, Field: "point",
					Msg: fmt.Sprintf("%q is an alias of mark %s (%s): a book names its marks by designation; write %s", u.Designation, h.Designation, h.Alias, h.Designation)}
			}
		}
	}
	if len(missing) > 0 && !p.NewMarks {
		return nil, nil, &UnknownMarksError{File: p.Path, Marks: missing}
	}
	return byName, missing, nil
}

// createMarks creates the missing marks, each with a first condition
// report "unverified", adds them to byName, and returns every mark the
// book names in its order.
func createMarks(ctx context.Context, tx pgx.Tx, p RecordParams, book *levelbook.Book, names []string, byName map[string]store.Mark, missing []UnknownMark) ([]store.RunMark, error) {
	observed := Today()
	if book.Meta.Date != "" {
		if d, err := time.Parse("2006-01-02", book.Meta.Date); err == nil {
			observed = d
		}
	}
	created := map[string]bool{}
	designations := make([]string, len(missing))
	for i, u := range missing {
		if err := nameProblem("point", "designation", u.Designation); err != nil {
			return nil, &levelbook.Error{File: p.Path, Line: u.Line, Field: "point", Msg: err.(*InputError).Msg}
		}
		if !designationPattern().MatchString(u.Designation) {
			return nil, &levelbook.Error{File: p.Path, Line: u.Line, Field: "point",
				Msg: fmt.Sprintf("%q cannot be a mark's designation (use at most 64 letters, digits and . _ / -, starting with a letter or digit), or name it as a turning point", u.Designation)}
		}
		designations[i] = u.Designation
	}
	if len(missing) > 0 {
		// The marks and their first reports, each in one statement.
		ids, err := store.MarkInsertMany(ctx, tx, store.MarkInsertManyParams{Designations: designations, CreatedBy: p.By})
		if errors.Is(err, store.ErrAlreadyExists) {
			return nil, &ConflictError{Err: err}
		}
		if err != nil {
			return nil, err
		}
		markIDs := make([]int64, len(designations))
		for i, d := range designations {
			markIDs[i] = ids[d]
		}
		cs, err := store.ConditionInsertMany(ctx, tx, store.ConditionInsertManyParams{
			MarkIDs: markIDs, Condition: Unverified, ObservedOn: observed, RecordedBy: p.By,
			Note: fmt.Sprintf("created when %s was recorded", filepath.Base(p.Path)),
		})
		if err != nil {
			return nil, err
		}
		for i, d := range designations {
			c := cs[markIDs[i]]
			byName[d] = store.Mark{ID: markIDs[i], Designation: d, Latest: &c}
			created[d] = true
		}
	}
	marks := make([]store.RunMark, len(names))
	for i, n := range names {
		m := byName[n]
		marks[i] = store.RunMark{MarkID: m.ID, Designation: n, Condition: m.Latest, Created: created[n]}
	}
	return marks, nil
}

// runHeldOf gives the rows of run_held: the typed heights as given and
// the heights held from the register with their versions, by mark.
func runHeldOf(p RecordParams, held []HeldHeight, ids map[string]int64) []store.RunHeld {
	var out []store.RunHeld
	for _, name := range slices.Sorted(maps.Keys(p.Hold)) {
		out = append(out, store.RunHeld{MarkID: ids[name], Designation: name, Value: strconv.FormatFloat(p.Hold[name], 'f', -1, 64)})
	}
	for _, h := range held {
		rh := store.RunHeld{MarkID: h.MarkID, Designation: h.Designation, HeightID: &h.Version.ID, Value: h.Value}
		if h.InDoubt {
			rh.ConditionReason = strings.TrimSpace(p.ConditionReason)
		}
		out = append(out, rh)
	}
	return out
}

// reduceBook reduces the book of p (read by levelbook.Summarize) with
// opts, a sighting at a time; with p.KeepNotes, whole, keeping its rows.
func reduceBook(p RecordParams, book *levelbook.Book, opts reduce.Options) (*reduce.Result, error) {
	var res *reduce.Result
	if p.KeepNotes {
		full, err := levelbook.Parse(p.Path, p.Book)
		if err != nil {
			return nil, err
		}
		res, err = reduce.Reduce(full, opts)
		if err != nil {
			return nil, &InputError{Field: p.Path, Msg: err.Error()}
		}
		return res, nil
	}
	sc, err := book.Rescan(p.Book)
	if err != nil {
		return nil, err
	}
	res, err = reduce.ReduceScan(book, func(yield func(*levelbook.Sighting) bool) {
		for sc.Next() && yield(sc.Sighting()) {
		}
	}, opts)
	if err := sc.Err(); err != nil {
		return nil, err
	}
	if err != nil {
		return nil, &InputError{Field: p.Path, Msg: err.Error()}
	}
	return res, nil
}

// copySightings stores the sightings of p's book as run id's, read again
// from its bytes a sighting at a time.
func copySightings(ctx context.Context, tx pgx.Tx, p RecordParams, book *levelbook.Book, id int64) error {
	sc, err := book.Rescan(p.Book)
	if err != nil {
		return err
	}
	var g store.Sighting
	seq := 0
	if _, err := store.SightingCopyFunc(ctx, tx, id, func() (*store.Sighting, error) {
		if !sc.Next() {
			return nil, sc.Err()
		}
		seq++
		g = sightingOf(seq, sc.Sighting())
		return &g, nil
	}); err != nil {
		return err
	}
	return sc.Err()
}

// sightingOf is the stored sighting of s, the seq-th of its book; it
// points into s.
func sightingOf(seq int, s *levelbook.Sighting) store.Sighting {
	g := store.Sighting{
		Seq: seq, Line: s.Line, Point: s.Point, Sight: string(s.Sight), TurningPoint: s.TurningPoint, Spot: s.Spot,
		Middle: s.Middle, DistanceFrom: string(levelbook.DistanceNone), Note: s.Note,
	}
	if s.ThreeWire {
		g.Upper, g.Lower = &s.Upper, &s.Lower
	}
	if s.HasDistance() {
		g.Distance, g.DistanceFrom = &s.Distance, string(s.DistanceFrom)
	}
	return g
}

// sightingsOf turns the book's rows into stored sightings.
func sightingsOf(book *levelbook.Book) []store.Sighting {
	out := make([]store.Sighting, len(book.Sightings))
	for i := range book.Sightings {
		out[i] = sightingOf(i+1, &book.Sightings[i])
	}
	return out
}

// points are the points of book in the order it first sights them: its
// Points, or, for a book made without them, those of its sightings.
func points(book *levelbook.Book) []levelbook.Point {
	if len(book.Points) > 0 || len(book.Sightings) == 0 {
		return book.Points
	}
	var out []levelbook.Point
	at := map[string]int{}
	for _, s := range book.Sightings {
		k, seen := at[s.Point]
		if !seen {
			k = len(out)
			at[s.Point] = k
			out = append(out, levelbook.Point{Name: s.Point, Line: s.Line, TurningPoint: s.TurningPoint, Spot: s.Spot})
		}
		if s.Sight != levelbook.Intermediate {
			out[k].Carries = true
		}
	}
	return out
}

// cautions words the conditions worth a caution among marks (see Warning).
func cautions(marks []store.RunMark) []string {
	var out []string
	for _, m := range marks {
		if w := Warning(store.Mark{Designation: m.Designation, Latest: m.Condition}); w != "" {
			out = append(out, w)
		}
	}
	return out
}

// RunView is a recorded run with its checks, sections and the marks it
// touched.
type RunView struct {
	Run      store.Run
	Summary  CheckSummary
	Sections []store.Section
	Marks    []store.RunMark
	Cautions []string
	// Held are the marks the run was reduced from, by designation.
	Held []store.RunHeld
	// CheckOnly says the run is a check run: it adjusts nothing.
	CheckOnly bool
}

// Run returns the run with identifier id, or an InputError if there is
// none.
func (r *Register) Run(ctx context.Context, id int64) (*RunView, error) {
	v := &RunView{}
	err := r.withTx(ctx, readTx, func(tx pgx.Tx) error {
		var err error
		if v.Run, err = r.run(ctx, tx, id); err != nil {
			return err
		}
		if err := json.Unmarshal(v.Run.Checks, &v.Summary); err != nil {
			return fmt.Errorf("decode checks of run %d: %w", id, err)
		}
		if v.Sections, err = store.SectionList(ctx, tx, store.SectionListParams{RunIDs: []int64{id}}); err != nil {
			return err
		}
		if v.Marks, err = store.RunMarkListByRun(ctx, tx, id); err != nil {
			return err
		}
		check, err := store.CheckRunIDs(ctx, tx, []int64{id})
		if err != nil {
			return err
		}
		v.CheckOnly = check[id]
		v.Held, err = store.RunHeldListByRun(ctx, tx, id)
		return err
	})
	if err != nil {
		return nil, err
	}
	v.Cautions = cautions(v.Marks)
	return v, nil
}

func (r *Register) run(ctx context.Context, db store.DBTX, id int64) (store.Run, error) {
	run, err := store.RunGet(ctx, db, id)
	if errors.Is(err, store.ErrNotFound) {
		return store.Run{}, inputErr("run", "no run %d in the register (see cairn run list)", id)
	}
	if err != nil {
		return store.Run{}, fmt.Errorf("look up run %d: %w", id, err)
	}
	return run, nil
}

// RunBook returns the bytes of run id's field book exactly as recorded.
func (r *Register) RunBook(ctx context.Context, id int64) ([]byte, error) {
	b, err := store.RunGetBook(ctx, r.pool, id)
	if errors.Is(err, store.ErrNotFound) {
		return nil, inputErr("run", "no run %d in the register (see cairn run list)", id)
	}
	if err != nil {
		return nil, fmt.Errorf("read the book of run %d: %w", id, err)
	}
	return b, nil
}

// RunListParams filter a listing of runs; the zero value lists them all.
type RunListParams struct {
	// Mark, if set, keeps the runs that touched the mark with this
	// designation.
	Mark string
	// Since, if set, keeps the runs observed on or after this date (the
	// book's date, else the day it was recorded).
	Since *time.Time
}

// RunList lists runs, oldest first.
func (r *Register) RunList(ctx context.Context, p RunListParams) ([]store.Run, error) {
	var runs []store.Run
	err := r.withTx(ctx, readTx, func(tx pgx.Tx) error {
		q := store.RunListParams{Since: p.Since}
		if p.Mark != "" {
			m, err := r.mark(ctx, tx, "mark", p.Mark, false)
			if err != nil {
				return err
			}
			q.MarkID = &m.ID
		}
		var err error
		runs, err = store.RunList(ctx, tx, q)
		return err
	})
	return runs, err
}

// Sections returns the sections of the given runs (by run, along each run)
// — the observed height differences an adjustment uses. Every run must
// exist.
func (r *Register) Sections(ctx context.Context, runIDs []int64) ([]store.Section, error) {
	var secs []store.Section
	err := r.withTx(ctx, readTx, func(tx pgx.Tx) error {
		for _, id := range runIDs {
			if _, err := r.run(ctx, tx, id); err != nil {
				return err
			}
		}
		var err error
		secs, err = store.SectionList(ctx, tx, store.SectionListParams{RunIDs: runIDs})
		return err
	})
	return secs, err
}

// Sightings returns run id's sightings in field order.
func (r *Register) Sightings(ctx context.Context, id int64) ([]store.Sighting, error) {
	var out []store.Sighting
	err := r.withTx(ctx, readTx, func(tx pgx.Tx) error {
		if _, err := r.run(ctx, tx, id); err != nil {
			return err
		}
		var err error
		out, err = store.SightingListByRun(ctx, tx, id)
		return err
	})
	return out, err
}
