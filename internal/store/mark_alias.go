package store

import (
	"context"
	"fmt"
	"time"

	"github.com/jackc/pgx/v5"
)

// Kinds of alias (mark_alias.kind, migrations/00018).
const (
	AliasAgency  = "agency"  // another agency's number for the mark
	AliasFormer  = "former"  // a designation the mark had before
	AliasStamped = "stamped" // what is stamped on the mark
)

// Alias is another name of a mark.
type Alias struct {
	Alias      string
	Kind       string
	Agency     string // whose number, for AliasAgency
	Note       string
	RecordedBy string
	RecordedAt time.Time
}

// AliasInsertParams are the fields of a new alias.
type AliasInsertParams struct {
	MarkID                        int64
	Alias, Kind, Agency, Note, By string
}

// AliasInsert gives a mark another name: ErrAlreadyExists if the alias
// (folded) is one already, ErrNameTaken if it is a designation.
func AliasInsert(ctx context.Context, db DBTX, p AliasInsertParams) error {
	_, err := db.Exec(ctx, `INSERT INTO mark_alias (mark_id, alias, kind, agency, note, recorded_by) VALUES ($1, $2, $3, $4, $5, $6)`,
		p.MarkID, p.Alias, p.Kind, p.Agency, p.Note, p.By)
	if err != nil {
		return fmt.Errorf("insert alias %s: %w", p.Alias, translate(err))
	}
	return nil
}

// AliasListByMark returns a mark's aliases in the order they were given.
func AliasListByMark(ctx context.Context, db DBTX, markID int64) ([]Alias, error) {
	rows, err := db.Query(ctx, `SELECT alias, kind, agency, note, recorded_by, recorded_at FROM mark_alias
		WHERE mark_id = $1 ORDER BY id`, markID)
	if err != nil {
		return nil, translate(err)
	}
	return collect(rows, func(r pgx.Row) (Alias, error) {
		var a Alias
		return a, translate(r.Scan(&a.Alias, &a.Kind, &a.Agency, &a.Note, &a.RecordedBy, &a.RecordedAt))
	})
}

// AliasHolder returns the designation of the mark that has an alias of
// folded form folded (see MarkGetFolded), and that alias; ErrNotFound if
// none.
func AliasHolder(ctx context.Context, db DBTX, folded string) (designation, alias string, err error) {
	err = db.QueryRow(ctx, `SELECT m.designation, a.alias FROM mark_alias a JOIN mark m ON m.id = a.mark_id
		WHERE lower(normalize(a.alias, NFKC)) = $1`, folded).Scan(&designation, &alias)
	return designation, alias, translate(err)
}

// AliasHeld is an alias and the designation of the mark that holds it.
type AliasHeld struct {
	Designation string
	Alias       string
}

// AliasHolders returns, by folded name, the marks whose alias folds to one
// of folded: AliasHolder for many names in one statement.
func AliasHolders(ctx context.Context, db DBTX, folded []string) (map[string]AliasHeld, error) {
	rows, err := db.Query(ctx, `SELECT lower(normalize(a.alias, NFKC)), m.designation, a.alias
		FROM mark_alias a JOIN mark m ON m.id = a.mark_id
		WHERE lower(normalize(a.alias, NFKC)) = ANY ($1::text[])`, folded)
	if err != nil {
		return nil, translate(err)
	}
	defer rows.Close()
	held := map[string]AliasHeld{}
	for rows.Next() {
		var f string
		var h AliasHeld
		if err := rows.Scan(&f, &h.Designation, &h.Alias); err != nil {
			return nil, translate(err)
		}
		held[f] = h
	}
	return held, translate(rows.Err())
}
