package store

import (
	"context"
	"time"

	"github.com/jackc/pgx/v5"
)

// CheckConnection is one check connection of a run: two marks of known
// height it tied to, compared (migrations/00016).
type CheckConnection struct {
	RunID int64
	Seq   int
	// FromMarkID and ToMarkID are the marks; From and To their
	// designations (filled when read).
	FromMarkID, ToMarkID int64
	From, To             string
	// FromHeightID and ToHeightID are the published versions compared;
	// nil for a height typed for the book.
	FromHeightID, ToHeightID *int64
	// ObservedM is H(To) − H(From) along the run, KnownM the known
	// difference, in metres.
	ObservedM, KnownM float64
	// LengthM is the length levelled between them; nil without distances.
	LengthM *float64
	// AllowableM and Pass are nil when the connection was not judged.
	AllowableM *float64
	Pass       *bool
	// AsClosure says the comparison is a line's misclosure, judged there.
	AsClosure bool
	// RunRecordedAt is the run's recording time (filled when read).
	RunRecordedAt time.Time
}

var checkConnectionColumns = []string{"run_id", "seq", "from_mark_id", "to_mark_id", "from_height_id", "to_height_id",
	"observed_m", "known_m", "length_m", "allowable_m", "pass", "as_closure"}

// CheckConnectionCopyParams are a run's check connections to store.
type CheckConnectionCopyParams struct {
	RunID       int64
	Connections []CheckConnection
}

// CheckConnectionCopy stores check connections with COPY.
func CheckConnectionCopy(ctx context.Context, db Copier, p CheckConnectionCopyParams) (int64, error) {
	return copyRows(ctx, db, "check_connection", checkConnectionColumns, p.Connections, "check connections", func(c *CheckConnection) []any {
		return []any{p.RunID, c.Seq, c.FromMarkID, c.ToMarkID, c.FromHeightID, c.ToHeightID, c.ObservedM, c.KnownM, c.LengthM, c.AllowableM, c.Pass, c.AsClosure}
	})
}

const checkConnectionSelect = `SELECT c.run_id, c.seq, c.from_mark_id, c.to_mark_id, f.designation, t.designation,
	c.from_height_id, c.to_height_id, c.observed_m, c.known_m, c.length_m, c.allowable_m, c.pass, c.as_closure, r.recorded_at
	FROM check_connection c JOIN mark f ON f.id = c.from_mark_id JOIN mark t ON t.id = c.to_mark_id JOIN run r ON r.id = c.run_id`

func scanCheckConnection(r pgx.Row) (CheckConnection, error) {
	var c CheckConnection
	err := r.Scan(&c.RunID, &c.Seq, &c.FromMarkID, &c.ToMarkID, &c.From, &c.To, &c.FromHeightID, &c.ToHeightID,
		&c.ObservedM, &c.KnownM, &c.LengthM, &c.AllowableM, &c.Pass, &c.AsClosure, &c.RunRecordedAt)
	return c, translate(err)
}

// CheckConnectionListByRun returns run runID's check connections in order.
func CheckConnectionListByRun(ctx context.Context, db DBTX, runID int64) ([]CheckConnection, error) {
	rows, err := db.Query(ctx, checkConnectionSelect+" WHERE c.run_id = $1 ORDER BY c.seq", runID)
	if err != nil {
		return nil, translate(err)
	}
	return collect(rows, scanCheckConnection)
}

// CheckConnectionLatestByMarks returns, for each of the marks, the judged
// check connections (not as a closure) that involve it in the latest run
// not voided that judged one of its connections: the rows of those runs,
// by run and seq. A mark with none is absent.
func CheckConnectionLatestByMarks(ctx context.Context, db DBTX, markIDs []int64) ([]CheckConnection, error) {
	rows, err := db.Query(ctx, `WITH judged AS (
		SELECT c.*, m.mark_id FROM check_connection c
		CROSS JOIN LATERAL (VALUES (c.from_mark_id), (c.to_mark_id)) AS m (mark_id)
		WHERE m.mark_id = ANY($1) AND c.pass IS NOT NULL AND NOT c.as_closure
		AND NOT EXISTS (SELECT 1 FROM run_event e WHERE e.run_id = c.run_id AND e.kind = 'voided')),
	latest AS (SELECT mark_id, max(run_id) AS run_id FROM judged GROUP BY mark_id)
	`+checkConnectionSelect+`
	WHERE (c.run_id, c.seq) IN (SELECT j.run_id, j.seq FROM judged j JOIN latest l ON l.mark_id = j.mark_id AND l.run_id = j.run_id)
	ORDER BY c.run_id, c.seq`, markIDs)
	if err != nil {
		return nil, translate(err)
	}
	return collect(rows, scanCheckConnection)
}
