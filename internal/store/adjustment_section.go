package store

import (
	"context"

	"github.com/jackc/pgx/v5"
)

// AdjustmentSection is the outcome of one section of a run in a
// least-squares adjustment.
type AdjustmentSection struct {
	RunID int64
	Seq   int
	// From, To, FirstLine and LastLine are the section's, filled when read.
	From, To            string
	FirstLine, LastLine int
	// ResidualM is adjusted minus observed, in metres; ResidualSDM its
	// a-priori standard deviation.
	ResidualM, ResidualSDM float64
	// W is Baarda's standardized residual; nil when the section cannot be
	// tested (no redundancy).
	W       *float64
	Flagged bool
}

// AdjustmentSectionCopyParams are an adjustment's section outcomes to store.
type AdjustmentSectionCopyParams struct {
	AdjustmentID int64
	Sections     []AdjustmentSection
}

// AdjustmentSectionCopy stores section outcomes with COPY.
func AdjustmentSectionCopy(ctx context.Context, db Copier, p AdjustmentSectionCopyParams) (int64, error) {
	return copyRows(ctx, db, "adjustment_section", []string{"adjustment_id", "run_id", "seq", "residual_m", "residual_sd_m", "w", "flagged"},
		p.Sections, "sections of adjustment", func(s *AdjustmentSection) []any {
			return []any{p.AdjustmentID, s.RunID, s.Seq, s.ResidualM, s.ResidualSDM, s.W, s.Flagged}
		})
}

// AdjustmentSectionList returns an adjustment's section outcomes by run and
// along each run, with the sections' marks and book lines.
func AdjustmentSectionList(ctx context.Context, db DBTX, adjustmentID int64) ([]AdjustmentSection, error) {
	// The designations by join, not a subquery for each end of each
	// section (SectionList).
	rows, err := db.Query(ctx, `SELECT a.run_id, a.seq, f.designation, t.designation, s.first_line, s.last_line,
		a.residual_m, a.residual_sd_m, a.w, a.flagged
		FROM adjustment_section a JOIN section s ON s.run_id = a.run_id AND s.seq = a.seq
		JOIN mark f ON f.id = s.from_mark_id JOIN mark t ON t.id = s.to_mark_id
		WHERE a.adjustment_id = $1 ORDER BY a.run_id, a.seq`, adjustmentID)
	if err != nil {
		return nil, translate(err)
	}
	return collect(rows, func(r pgx.Row) (AdjustmentSection, error) {
		var s AdjustmentSection
		err := r.Scan(&s.RunID, &s.Seq, &s.From, &s.To, &s.FirstLine, &s.LastLine, &s.ResidualM, &s.ResidualSDM, &s.W, &s.Flagged)
		return s, translate(err)
	})
}
