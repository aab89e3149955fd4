package register

import (
	"context"
	"errors"
	"fmt"
	"regexp"
	"strings"
	"sync"

	"github.com/jackc/pgx/v5"

	"cairn/internal/names"
	"cairn/internal/store"
)

var codePattern = sync.OnceValue(func() *regexp.Regexp { return regexp.MustCompile(`^[A-Za-z0-9][A-Za-z0-9._-]{0,31}$`) })

// DatumAddParams are the fields of a new datum.
type DatumAddParams struct {
	Code string // short code used on the command line, e.g. NAVD88
	Name string // official or full name
	Note string
	By   string // who adds it
}

// DatumAdd adds a datum to the register.
func (r *Register) DatumAdd(ctx context.Context, p DatumAddParams) (store.Datum, error) {
	p.Code, p.Name = strings.TrimSpace(p.Code), strings.TrimSpace(p.Name)
	if err := nameProblem("code", "datum code", p.Code); err != nil {
		return store.Datum{}, err
	}
	if names.Normal(p.Code) == p.Code && !codePattern().MatchString(p.Code) {
		return store.Datum{}, inputErr("code", "%q is not a datum code: use at most 32 letters, digits and . _ -, starting with a letter or digit", p.Code)
	}
	if p.Name == "" {
		return store.Datum{}, inputErr("name", "a datum needs its full name")
	}
	if p.By = strings.TrimSpace(p.By); p.By == "" {
		return store.Datum{}, inputErr("by", "say who adds the datum")
	}
	// In a transaction of its own, like every write: a statement sent on
	// its own commits when the server finishes it, even if the process
	// that sent it has died meanwhile; a transaction commits only when
	// asked to.
	var d store.Datum
	err := r.withTx(ctx, pgx.TxOptions{}, func(tx pgx.Tx) error {
		// The same code written another way is refused naming the datum
		// that has it; the unique index on the folded form settles a race.
		existing, err := store.DatumGetFolded(ctx, tx, names.Fold(p.Code))
		if err != nil && !errors.Is(err, store.ErrNotFound) {
			return fmt.Errorf("look up datums named like %s: %w", p.Code, err)
		}
		if err := sameNameProblem("code", "datum", p.Code, existing.Code); err != nil {
			return err
		}
		if !codePattern().MatchString(p.Code) {
			return inputErr("code", "%q is not a datum code: use at most 32 letters, digits and . _ -, starting with a letter or digit", p.Code)
		}
		d, err = store.DatumInsert(ctx, tx, store.DatumInsertParams{Code: p.Code, Name: p.Name, Note: p.Note, CreatedBy: p.By})
		if errors.Is(err, store.ErrAlreadyExists) {
			return inputErr("code", "datum %s is already in the register", p.Code)
		}
		return err
	})
	return d, err
}

// DatumList returns every datum by code.
func (r *Register) DatumList(ctx context.Context) ([]store.Datum, error) {
	return store.DatumList(ctx, r.pool)
}
