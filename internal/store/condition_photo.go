package store

import (
	"context"
	"crypto/sha256"
	"fmt"
	"time"

	"github.com/jackc/pgx/v5"
)

// Views of a mark a photograph may show (condition_photo.view,
// migrations/00018).
var PhotoViews = []string{"close-up", "eye-level", "setting", "other"}

// PhotoMaxBytes is the largest photograph the register keeps (the CHECK
// of condition_photo.content): 8 MiB, cairn's own choice, above what a
// phone's camera writes for one photograph (from memory, 2 to 6 MB).
const PhotoMaxBytes = 8 << 20

// Photo is a photograph of a condition report, without its bytes.
type Photo struct {
	ID          int64
	ConditionID int64
	View        string
	MediaType   string
	FileName    string
	Bytes       int64
	SHA256      []byte
	RecordedBy  string
	RecordedAt  time.Time
}

// PhotoInsertParams are a new photograph of a report written in the same
// transaction.
type PhotoInsertParams struct {
	ConditionID int64
	View        string
	MediaType   string
	FileName    string
	Content     []byte
	RecordedBy  string
}

// PhotoInsert keeps a photograph with its SHA-256 (the database checks it)
// and returns its identifier. ErrSealed if the report was made in another
// transaction.
func PhotoInsert(ctx context.Context, db DBTX, p PhotoInsertParams) (int64, error) {
	sum := sha256.Sum256(p.Content)
	var id int64
	err := db.QueryRow(ctx, `INSERT INTO condition_photo (condition_id, view, media_type, file_name, content, sha256, recorded_by)
		VALUES ($1, $2, $3, $4, $5, $6, $7) RETURNING id`,
		p.ConditionID, p.View, p.MediaType, p.FileName, p.Content, sum[:], p.RecordedBy).Scan(&id)
	if err != nil {
		return 0, fmt.Errorf("insert photo %s: %w", p.FileName, translate(err))
	}
	return id, nil
}

// PhotoListByMark returns the photographs of a mark's condition reports,
// without their bytes, in the order they were kept.
func PhotoListByMark(ctx context.Context, db DBTX, markID int64) ([]Photo, error) {
	rows, err := db.Query(ctx, `SELECT p.id, p.condition_id, p.view, p.media_type, p.file_name, octet_length(p.content), p.sha256,
		p.recorded_by, p.recorded_at
		FROM condition_photo p JOIN mark_condition c ON c.id = p.condition_id WHERE c.mark_id = $1 ORDER BY p.id`, markID)
	if err != nil {
		return nil, translate(err)
	}
	return collect(rows, func(r pgx.Row) (Photo, error) {
		var p Photo
		err := r.Scan(&p.ID, &p.ConditionID, &p.View, &p.MediaType, &p.FileName, &p.Bytes, &p.SHA256, &p.RecordedBy, &p.RecordedAt)
		return p, translate(err)
	})
}

// PhotoGet returns photograph id of one of mark markID's reports, with its
// bytes exactly as kept; ErrNotFound if the mark has no such photograph.
func PhotoGet(ctx context.Context, db DBTX, markID, id int64) (Photo, []byte, error) {
	var p Photo
	var content []byte
	err := db.QueryRow(ctx, `SELECT p.id, p.condition_id, p.view, p.media_type, p.file_name, octet_length(p.content), p.sha256,
		p.recorded_by, p.recorded_at, p.content
		FROM condition_photo p JOIN mark_condition c ON c.id = p.condition_id WHERE c.mark_id = $1 AND p.id = $2`, markID, id).
		Scan(&p.ID, &p.ConditionID, &p.View, &p.MediaType, &p.FileName, &p.Bytes, &p.SHA256, &p.RecordedBy, &p.RecordedAt, &content)
	if err != nil {
		return Photo{}, nil, translate(err)
	}
	return p, content, nil
}
