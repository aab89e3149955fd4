package store

import (
	"context"

	"github.com/jackc/pgx/v5"
)

// Section is the observation of a run between two consecutive marks: the
// height difference an adjustment uses.
type Section struct {
	RunID int64
	// Seq numbers the sections of a run along it from 1.
	Seq int
	// FromMarkID and ToMarkID are the marks; From and To their
	// designations (filled when read).
	FromMarkID, ToMarkID int64
	From, To             string
	// DifferenceM is the observed height difference H(To) − H(From) in
	// metres, unrounded.
	DifferenceM float64
	// LengthM is the sum of backsight and foresight lengths in metres; nil
	// when the book gives no distances.
	LengthM *float64
	// Setups is the number of instrument setups.
	Setups int
	// FirstLine and LastLine are the book lines of the first backsight and
	// the last foresight.
	FirstLine, LastLine int
}

var sectionColumns = []string{"run_id", "seq", "from_mark_id", "to_mark_id", "dh_m", "length_m", "setups", "first_line", "last_line"}

// SectionCopyParams are a run's sections to store.
type SectionCopyParams struct {
	RunID    int64
	Sections []Section
}

// SectionCopy stores sections with COPY and returns how many.
func SectionCopy(ctx context.Context, db Copier, p SectionCopyParams) (int64, error) {
	return copyRows(ctx, db, "section", sectionColumns, p.Sections, "sections", func(s *Section) []any {
		return []any{p.RunID, s.Seq, s.FromMarkID, s.ToMarkID, s.DifferenceM, s.LengthM, s.Setups, s.FirstLine, s.LastLine}
	})
}

// SectionListParams choose the sections to list.
type SectionListParams struct {
	// RunIDs are the runs whose sections to list.
	RunIDs []int64
}

// SectionList returns the sections of the given runs, by run and along
// each run.
func SectionList(ctx context.Context, db DBTX, p SectionListParams) ([]Section, error) {
	// The marks' designations by join (the planner may hash the marks
	// once), not a subquery for each end of each section.
	rows, err := db.Query(ctx, `SELECT s.run_id, s.seq, s.from_mark_id, s.to_mark_id, f.designation, t.designation,
		s.dh_m, s.length_m, s.setups, s.first_line, s.last_line
		FROM (SELECT DISTINCT unnest($1::bigint[]) AS run_id) AS u JOIN section s ON s.run_id = u.run_id
		JOIN mark f ON f.id = s.from_mark_id JOIN mark t ON t.id = s.to_mark_id
		ORDER BY s.run_id, s.seq`, p.RunIDs)
	if err != nil {
		return nil, translate(err)
	}
	return collect(rows, func(r pgx.Row) (Section, error) {
		var s Section
		err := r.Scan(&s.RunID, &s.Seq, &s.FromMarkID, &s.ToMarkID, &s.From, &s.To, &s.DifferenceM, &s.LengthM, &s.Setups, &s.FirstLine, &s.LastLine)
		return s, translate(err)
	})
}

// RunIDsTouchingMarks returns, in order, the runs with a section from or to
// any of the marks.
func RunIDsTouchingMarks(ctx context.Context, db DBTX, markIDs []int64) ([]int64, error) {
	// Two probes a mark (section_from_mark, section_to_mark), not an OR of
	// two "= ANY($1)" that may scan every section.
	rows, err := db.Query(ctx, `SELECT s.run_id FROM unnest($1::bigint[]) AS u (mark_id) JOIN section s ON s.from_mark_id = u.mark_id
		UNION
		SELECT s.run_id FROM unnest($1::bigint[]) AS u (mark_id) JOIN section s ON s.to_mark_id = u.mark_id
		ORDER BY 1`, markIDs)
	if err != nil {
		return nil, translate(err)
	}
	return collect(rows, func(r pgx.Row) (int64, error) {
		var id int64
		return id, translate(r.Scan(&id))
	})
}

// SectionListBetweenParams choose sections by their marks: the k-th pair
// is (FromMarkIDs[k], ToMarkIDs[k]).
type SectionListBetweenParams struct {
	FromMarkIDs, ToMarkIDs []int64
}

// SectionListBetween returns the sections of runs not voided from and to
// one of the pairs of marks, by run and seq.
func SectionListBetween(ctx context.Context, db DBTX, p SectionListBetweenParams) ([]Section, error) {
	rows, err := db.Query(ctx, `SELECT s.run_id, s.seq, s.from_mark_id, s.to_mark_id, f.designation, t.designation,
		s.dh_m, s.length_m, s.setups, s.first_line, s.last_line
		FROM section s JOIN mark f ON f.id = s.from_mark_id JOIN mark t ON t.id = s.to_mark_id
		WHERE (s.from_mark_id, s.to_mark_id) IN (SELECT * FROM unnest($1::bigint[], $2::bigint[]))
		AND NOT EXISTS (SELECT 1 FROM run_event e WHERE e.run_id = s.run_id AND e.kind = 'voided')
		ORDER BY s.run_id, s.seq`, p.FromMarkIDs, p.ToMarkIDs)
	if err != nil {
		return nil, translate(err)
	}
	return collect(rows, func(r pgx.Row) (Section, error) {
		var s Section
		err := r.Scan(&s.RunID, &s.Seq, &s.FromMarkID, &s.ToMarkID, &s.From, &s.To, &s.DifferenceM, &s.LengthM, &s.Setups, &s.FirstLine, &s.LastLine)
		return s, translate(err)
	})
}
