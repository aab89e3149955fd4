package store

import (
	"context"
	"encoding/json"
	"fmt"
	"strings"
	"time"

	"github.com/jackc/pgx/v5"
)

// Copier is a DBTX that can also COPY rows in: a connection or a
// transaction.
type Copier interface {
	DBTX
	CopyFrom(ctx context.Context, table pgx.Identifier, columns []string, src pgx.CopyFromSource) (int64, error)
}

// copyRows stores items in table with one COPY, row giving each item's
// values in the order of columns; what names the rows in an error. The
// rows are made as COPY reads them, not all at once.
func copyRows[T any](ctx context.Context, db Copier, table string, columns []string, items []T, what string, row func(*T) []any) (int64, error) {
	i := 0
	n, err := db.CopyFrom(ctx, pgx.Identifier{table}, columns, pgx.CopyFromFunc(func() ([]any, error) {
		if i == len(items) {
			return nil, nil
		}
		i++
		return row(&items[i-1]), nil
	}))
	if err != nil {
		return n, fmt.Errorf("copy %s: %w", what, translate(err))
	}
	return n, nil
}

// Run is a recorded level circuit, without its book's bytes.
type Run struct {
	ID int64
	// Name, ObservedOn, Crew, Instrument, Rod, Datum and Class come from
	// the book's metadata; empty (nil) when it does not give them.
	Name       string
	ObservedOn *time.Time
	Crew       string
	Instrument string
	Rod        string
	Datum      string
	Class      string
	// Unit is the unit of the book's readings and distances.
	Unit string
	// Meta is every metadata key as parsed, as JSON.
	Meta json.RawMessage
	// FileName is the base name of the book's file; BookSHA256 the SHA-256
	// of its bytes and BookSize their number.
	FileName   string
	BookSHA256 []byte
	BookSize   int64
	RecordedBy string
	RecordedAt time.Time
	// ChecksFailed counts the failed checks; Checks holds the check
	// summary as JSON; AcceptedReason says why a run with failed checks
	// was recorded ("" when every check passed).
	ChecksFailed   int
	Checks         json.RawMessage
	AcceptedReason string
	// Sightings, Sections and LengthM count the run's rows and sum its
	// sections' lengths (sections without a length add nothing).
	Sightings int
	Sections  int
	LengthM   float64
	// ObservationsSHA256 is the fingerprint of the book's observations
	// (levelbook.Book.ObservationsSHA256); nil for a run recorded before
	// schema v7, whose fingerprint is recomputed from its sightings when
	// needed.
	ObservationsSHA256 []byte
	// Standards is the profile that judged the run: its name, version (a
	// built-in's edition, or "sha256:…" of the file), source, and the
	// file's bytes for a file profile; all empty for a run recorded
	// before schema v15 (not recorded).
	Standards RunStandards
	// CheckOnly says the run is a check run (check_run, migrations/00016):
	// it adjusts nothing.
	CheckOnly bool
	// Voided is the run's void, nil while it stands.
	Voided *RunVoid
}

// RunStandards is what a run keeps of the standards profile that judged
// it (migrations/00015).
type RunStandards struct {
	Profile string
	Version string
	Source  string
	File    []byte
}

const runColumns = `r.id, r.name, r.observed_on, r.crew, r.instrument, r.rod, r.datum, r.class, r.unit, r.meta,
	r.file_name, r.book_sha256, octet_length(r.book), r.recorded_by, r.recorded_at, r.checks_failed, r.checks,
	coalesce(r.accepted_reason, ''),
	coalesce((SELECT g.seq FROM sighting g WHERE g.run_id = r.id ORDER BY g.seq DESC LIMIT 1), 0),
	rs.sections, rs.length_m,
	r.observations_sha256,
	coalesce(r.standards_profile, ''), coalesce(r.standards_version, ''), coalesce(r.standards_source, ''), r.standards_file,
	EXISTS (SELECT 1 FROM check_run c WHERE c.run_id = r.id),
	rv.id, rv.reason, rv.recorded_by, rv.recorded_at`

// runJoins follow "run r" in the FROM of runColumns: the run's sections
// counted and their lengths summed in one pass, and its void (one at most:
// run_event_once). Its sightings are counted by the last one's number,
// one probe of the key: they are numbered 1, 2, 3, ... in field order
// (migrations/00002), where count(*) read every sighting of every run
// (0.45 s of 0.9 s for 3,020 runs of a million sightings).
const runJoins = ` LEFT JOIN LATERAL (SELECT count(*) AS sections, coalesce(sum(s.length_m), 0) AS length_m
		FROM section s WHERE s.run_id = r.id) rs ON true
	LEFT JOIN run_event rv ON rv.run_id = r.id AND rv.kind = 'voided'`

func scanRun(row pgx.Row) (Run, error) {
	var r Run
	var voidID *int64
	var voidReason, voidBy *string
	var voidAt *time.Time
	err := row.Scan(&r.ID, &r.Name, &r.ObservedOn, &r.Crew, &r.Instrument, &r.Rod, &r.Datum, &r.Class, &r.Unit, &r.Meta,
		&r.FileName, &r.BookSHA256, &r.BookSize, &r.RecordedBy, &r.RecordedAt, &r.ChecksFailed, &r.Checks,
		&r.AcceptedReason, &r.Sightings, &r.Sections, &r.LengthM, &r.ObservationsSHA256,
		&r.Standards.Profile, &r.Standards.Version, &r.Standards.Source, &r.Standards.File,
		&r.CheckOnly, &voidID, &voidReason, &voidBy, &voidAt)
	if err == nil && voidID != nil {
		r.Voided = &RunVoid{ID: *voidID, RunID: r.ID, Reason: *voidReason, RecordedBy: *voidBy, RecordedAt: *voidAt}
	}
	return r, translate(err)
}

// RunInsertParams are the fields of a new run.
type RunInsertParams struct {
	Name       string
	ObservedOn *time.Time
	Crew       string
	Instrument string
	Rod        string
	Datum      string
	Class      string
	Unit       string
	Meta       json.RawMessage
	FileName   string
	// Book is the file's bytes, kept verbatim; BookSHA256 their SHA-256
	// (the database checks it).
	Book       []byte
	BookSHA256 []byte
	// ObservationsSHA256 is the fingerprint of the book's observations;
	// ObservationsSeq the number of runs of the same observations
	// recorded before (all voided). The pair is unique.
	ObservationsSHA256 []byte
	ObservationsSeq    int
	RecordedBy         string
	// ChecksFailed, Checks and AcceptedReason: see Run. AcceptedReason
	// must be given exactly when ChecksFailed > 0.
	ChecksFailed   int
	Checks         json.RawMessage
	AcceptedReason string
	// Standards is the profile that judged the run (see Run).
	Standards RunStandards
}

// RunInsert adds a run and returns its identifier; ErrAlreadyExists when a
// run with the same book, or the same observations, is recorded (or being
// recorded: the insert waits for that transaction to end).
func RunInsert(ctx context.Context, db DBTX, p RunInsertParams) (int64, error) {
	var observed *string
	if p.ObservedOn != nil {
		s := pgDate(*p.ObservedOn)
		observed = &s
	}
	var reason *string
	if p.AcceptedReason != "" {
		reason = &p.AcceptedReason
	}
	meta, checks := p.Meta, p.Checks
	if meta == nil {
		meta = json.RawMessage("{}")
	}
	if checks == nil {
		checks = json.RawMessage("{}")
	}
	var seq *int
	if p.ObservationsSHA256 != nil {
		seq = &p.ObservationsSeq
	}
	var id int64
	err := db.QueryRow(ctx, `INSERT INTO run (name, observed_on, crew, instrument, rod, datum, class, unit, meta,
		file_name, book, book_sha256, recorded_by, checks_failed, checks, accepted_reason,
		observations_sha256, observations_seq, standards_profile, standards_version, standards_source, standards_file)
		VALUES ($1, $2, $3, $4, $5, $6, $7, $8, $9, $10, $11, $12, $13, $14, $15, $16, $17, $18,
		nullif($19, ''), nullif($20, ''), CASE WHEN $19 = '' THEN NULL ELSE $21 END, $22) RETURNING id`,
		p.Name, observed, p.Crew, p.Instrument, p.Rod, p.Datum, p.Class, p.Unit, string(meta),
		p.FileName, p.Book, p.BookSHA256, p.RecordedBy, p.ChecksFailed, string(checks), reason,
		p.ObservationsSHA256, seq, p.Standards.Profile, p.Standards.Version, p.Standards.Source, p.Standards.File).Scan(&id)
	if err != nil {
		return 0, fmt.Errorf("insert run: %w", translate(err))
	}
	return id, nil
}

// RunGet returns the run with identifier id; ErrNotFound if none.
func RunGet(ctx context.Context, db DBTX, id int64) (Run, error) {
	return scanRun(db.QueryRow(ctx, "SELECT "+runColumns+" FROM run r"+runJoins+" WHERE r.id = $1", id))
}

// RunListByIDs returns the runs with these identifiers (those that
// exist), by identifier, in one statement: an adjustment of 2,947 runs
// reads them at once rather than one statement a run.
func RunListByIDs(ctx context.Context, db DBTX, ids []int64) ([]Run, error) {
	rows, err := db.Query(ctx, "SELECT "+runColumns+` FROM (SELECT DISTINCT unnest($1::bigint[]) AS id) AS u
		JOIN run r ON r.id = u.id`+runJoins+` ORDER BY r.id`, ids)
	if err != nil {
		return nil, translate(err)
	}
	return collect(rows, scanRun)
}

// RunGetBySHA256 returns the run whose book has SHA-256 sum; ErrNotFound if
// none.
func RunGetBySHA256(ctx context.Context, db DBTX, sum []byte) (Run, error) {
	return scanRun(db.QueryRow(ctx, "SELECT "+runColumns+" FROM run r"+runJoins+" WHERE r.book_sha256 = $1", sum))
}

// RunListByObservations returns the runs whose observations have the
// fingerprint sum, oldest first (every one but the newest voided; runs
// recorded before schema v7 have no stored fingerprint: see
// RunListUnfingerprinted).
func RunListByObservations(ctx context.Context, db DBTX, sum []byte) ([]Run, error) {
	rows, err := db.Query(ctx, "SELECT "+runColumns+" FROM run r"+runJoins+" WHERE r.observations_sha256 = $1 ORDER BY r.id", sum)
	if err != nil {
		return nil, translate(err)
	}
	return collect(rows, scanRun)
}

// RunListUnfingerprintedParams choose the runs without a stored
// fingerprint that could hold the same observations as a book: those of
// its unit with as many sightings.
type RunListUnfingerprintedParams struct {
	Unit      string
	Sightings int
}

// RunListUnfingerprinted lists, oldest first, the runs recorded before
// schema v7 (no stored observations fingerprint) of p.Unit with
// p.Sightings sightings.
func RunListUnfingerprinted(ctx context.Context, db DBTX, p RunListUnfingerprintedParams) ([]Run, error) {
	rows, err := db.Query(ctx, "SELECT "+runColumns+" FROM run r"+runJoins+`
		WHERE r.observations_sha256 IS NULL AND r.unit = $1
		AND (SELECT count(*) FROM sighting g WHERE g.run_id = r.id) = $2
		ORDER BY r.id`, p.Unit, p.Sightings)
	if err != nil {
		return nil, translate(err)
	}
	return collect(rows, scanRun)
}

// RunBookEach calls fn with each of the runs' stored books, by run
// identifier, in one statement, streaming the rows: one book in memory at
// a time, however many runs. fn must not use db: its rows are still being
// read.
func RunBookEach(ctx context.Context, db DBTX, ids []int64, fn func(id int64, book []byte) error) error {
	rows, err := db.Query(ctx, `SELECT r.id, r.book FROM (SELECT DISTINCT unnest($1::bigint[]) AS id) AS u
		JOIN run r ON r.id = u.id ORDER BY r.id`, ids)
	if err != nil {
		return translate(err)
	}
	defer rows.Close()
	for rows.Next() {
		var id int64
		var book []byte
		if err := rows.Scan(&id, &book); err != nil {
			return translate(err)
		}
		if err := fn(id, book); err != nil {
			return err
		}
	}
	return translate(rows.Err())
}

// RunIDsWithSideSights returns, in order, those of the runs whose books
// hold an intermediate sight on a point that is neither a turning point
// nor a spot height (a side shot on a mark): the runs whose books a draft
// must read again. One probe a run of the partial index sighting_side
// (migrations/00025), which holds such sightings alone.
func RunIDsWithSideSights(ctx context.Context, db DBTX, runIDs []int64) ([]int64, error) {
	rows, err := db.Query(ctx, `SELECT u.run_id FROM (SELECT DISTINCT unnest($1::bigint[]) AS run_id) AS u
		WHERE EXISTS (SELECT 1 FROM sighting g WHERE g.run_id = u.run_id AND g.sight = 'IS' AND NOT g.turning_point AND NOT g.spot)
		ORDER BY u.run_id`, runIDs)
	if err != nil {
		return nil, translate(err)
	}
	return collect(rows, func(r pgx.Row) (int64, error) {
		var id int64
		return id, translate(r.Scan(&id))
	})
}

// RunMarkIDsByRuns returns the marks the runs touched, by designation, in
// one statement.
func RunMarkIDsByRuns(ctx context.Context, db DBTX, runIDs []int64) (map[string]int64, error) {
	rows, err := db.Query(ctx, `SELECT DISTINCT rm.mark_id, `+markDesignation("rm.mark_id")+`
		FROM (SELECT DISTINCT unnest($1::bigint[]) AS run_id) AS u JOIN run_mark rm ON rm.run_id = u.run_id`, runIDs)
	if err != nil {
		return nil, translate(err)
	}
	out := map[string]int64{}
	defer rows.Close()
	for rows.Next() {
		var id int64
		var d string
		if err := rows.Scan(&id, &d); err != nil {
			return nil, translate(err)
		}
		out[d] = id
	}
	return out, translate(rows.Err())
}

// RunGetBook returns the stored bytes of run id's book; ErrNotFound if
// there is no such run.
func RunGetBook(ctx context.Context, db DBTX, id int64) ([]byte, error) {
	var b []byte
	if err := db.QueryRow(ctx, "SELECT book FROM run WHERE id = $1", id).Scan(&b); err != nil {
		return nil, translate(err)
	}
	return b, nil
}

// RunListParams filter a listing of runs; the zero value lists them all.
type RunListParams struct {
	// MarkID, if set, keeps the runs that touched the mark.
	MarkID *int64
	// Since, if set, keeps the runs observed on or after this date (the
	// book's date; the day of recording, in UTC, for a book without one).
	Since *time.Time
}

// RunList lists runs, oldest first.
func RunList(ctx context.Context, db DBTX, p RunListParams) ([]Run, error) {
	var where []string
	var args []any
	if p.MarkID != nil {
		args = append(args, *p.MarkID)
		where = append(where, fmt.Sprintf("EXISTS (SELECT 1 FROM run_mark rm WHERE rm.run_id = r.id AND rm.mark_id = $%d)", len(args)))
	}
	if p.Since != nil {
		args = append(args, pgDate(*p.Since))
		where = append(where, fmt.Sprintf("coalesce(r.observed_on, (r.recorded_at AT TIME ZONE 'UTC')::date) >= $%d::date", len(args)))
	}
	q := "SELECT " + runColumns + " FROM run r" + runJoins
	if len(where) > 0 {
		q += " WHERE " + strings.Join(where, " AND ")
	}
	rows, err := db.Query(ctx, q+" ORDER BY coalesce(r.observed_on, (r.recorded_at AT TIME ZONE 'UTC')::date), r.id", args...)
	if err != nil {
		return nil, translate(err)
	}
	return collect(rows, scanRun)
}

// RunMark is a mark a run touched, with the condition report that was the
// mark's latest when the run was recorded.
type RunMark struct {
	RunID       int64
	MarkID      int64
	Designation string // filled when read
	// Condition is the report current at recording; nil when the mark had
	// none.
	Condition *Condition
	// Created says whether recording the run created the mark.
	Created bool
}

// RunMarkCopyParams are the marks a run touched.
type RunMarkCopyParams struct {
	RunID int64
	Marks []RunMark
}

// RunMarkCopy stores the marks a run touched with COPY.
func RunMarkCopy(ctx context.Context, db Copier, p RunMarkCopyParams) (int64, error) {
	return copyRows(ctx, db, "run_mark", []string{"run_id", "mark_id", "condition_id", "created"}, p.Marks, "marks of run", func(m *RunMark) []any {
		var cid *int64
		if m.Condition != nil {
			cid = &m.Condition.ID
		}
		return []any{p.RunID, m.MarkID, cid, m.Created}
	})
}

// RunMarkListByRun returns the marks a run touched, by designation.
func RunMarkListByRun(ctx context.Context, db DBTX, runID int64) ([]RunMark, error) {
	rows, err := db.Query(ctx, `SELECT rm.run_id, rm.mark_id, `+markDesignation("rm.mark_id")+` AS designation, rm.created,
		c.id, c.condition, c.note, c.observed_on, c.recorded_at, c.recorded_by
		FROM run_mark rm LEFT JOIN mark_condition c ON c.id = rm.condition_id
		WHERE rm.run_id = $1 ORDER BY designation`, runID)
	if err != nil {
		return nil, translate(err)
	}
	return collect(rows, func(r pgx.Row) (RunMark, error) {
		var m RunMark
		var cid *int64
		var cond, note, by *string
		var on, at *time.Time
		if err := r.Scan(&m.RunID, &m.MarkID, &m.Designation, &m.Created, &cid, &cond, &note, &on, &at, &by); err != nil {
			return RunMark{}, translate(err)
		}
		if cid != nil {
			m.Condition = &Condition{ID: *cid, MarkID: m.MarkID, Condition: *cond, Note: *note, ObservedOn: *on, RecordedAt: *at, RecordedBy: *by}
		}
		return m, nil
	})
}
