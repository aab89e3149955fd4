package register

import (
	"context"
	"errors"
	"fmt"
	"strings"
	"time"
	"unicode"

	"github.com/jackc/pgx/v5"

	"cairn/internal/levelbook"
	"cairn/internal/names"
	"cairn/internal/store"
)

// nameScript is the script of the register's names: designations and
// datum codes are written in Latin letters, digits and punctuation
// (migrations/00001), so a letter of another script is one that can pass
// for a Latin one (Cyrillic Т for T).
const nameScript = "Latin"

// nameProblem refuses, before the database is asked, a new name (what is
// "designation" or "datum code") with a control character, white space
// around it, or a letter outside nameScript.
func nameProblem(field, what, s string) error {
	switch {
	case strings.ContainsFunc(s, unicode.IsControl):
		return inputErr(field, "%q is not a %s: it holds a control character", s, what)
	case names.Spaced(s):
		return inputErr(field, "%q is not a %s: it begins or ends with white space (write it without)", s, what)
	}
	if foreign := names.Foreign(s, nameScript); len(foreign) > 0 {
		var cs []string
		for _, r := range foreign {
			cs = append(cs, names.Describe(r))
		}
		return inputErr(field, "%q is not a %s: it mixes scripts, %s %s not Latin; a %s is written in Latin letters, digits and punctuation, and a letter of another script can look exactly like a Latin one",
			s, what, strings.Join(cs, " and "), map[bool]string{true: "is", false: "are"}[len(cs) == 1], what)
	}
	return nil
}

// sameNameProblem refuses a new name whose folded form is that of
// existing, the name already in the register, or that is written with
// compatibility characters (fullwidth letters): the register holds each
// name once, however it is typed.
func sameNameProblem(field, kind, s, existing string) error {
	switch {
	case existing == s:
		return inputErr(field, "%s %s is already in the register", kind, existing)
	case existing != "" && names.Normal(s) != s:
		return inputErr(field, "%s %s is already in the register: %q is the same name once its characters are normalised (NFKC) and case folded", kind, existing, s)
	case existing != "":
		return inputErr(field, "%s %s is already in the register: %q is the same name in another case", kind, existing, s)
	case names.Normal(s) != s:
		return inputErr(field, "%q is written with compatibility characters (fullwidth or other forms, NFKC): write it as %s", s, names.Normal(s))
	}
	return nil
}

// foldName is names.Fold, for where a variable named names hides the
// package.
func foldName(s string) string { return names.Fold(s) }

// markFolded returns the designation of the mark whose folded form is
// that of s, or "".
func markFolded(ctx context.Context, db store.DBTX, s string) (string, error) {
	m, err := store.MarkGetFolded(ctx, db, names.Fold(s))
	if errors.Is(err, store.ErrNotFound) {
		return "", nil
	}
	if err != nil {
		return "", fmt.Errorf("look up marks named like %s: %w", s, err)
	}
	return m.Designation, nil
}

// Today is the machine's calendar date, as a date at midnight UTC (the
// form the register's dates take): the date after which no field record
// may be dated.
func Today() time.Time {
	n := time.Now()
	return time.Date(n.Year(), n.Month(), n.Day(), 0, 0, 0, 0, time.UTC)
}

// CheckBookDate refuses a book dated after today (the machine's date,
// Today when today is zero): field work not done yet cannot be recorded.
// The error names the book's line and its date field.
func CheckBookDate(book *levelbook.Book, today time.Time) error {
	if book.Meta.Date == "" {
		return nil
	}
	if today.IsZero() {
		today = Today()
	}
	d, err := time.Parse(time.DateOnly, book.Meta.Date)
	if err != nil {
		return &levelbook.Error{File: book.Name, Line: book.Meta.Lines["date"], Field: "date", Msg: "not a date (want YYYY-MM-DD)"}
	}
	if d.After(today) {
		return &levelbook.Error{File: book.Name, Line: book.Meta.Lines["date"], Field: "date",
			Msg: fmt.Sprintf("the book is dated %s, after today (%s): a book is dated the day it was observed; correct the date", book.Meta.Date, today.Format(time.DateOnly))}
	}
	return nil
}

// BookWarnings are what the register says of a book without refusing it:
// the marks it takes as turning points, and the marks it names whose
// earliest record in the register is later than the book's date.
func (r *Register) BookWarnings(ctx context.Context, book *levelbook.Book) ([]string, error) {
	var out []string
	err := r.withTx(ctx, readTx, func(tx pgx.Tx) error {
		var err error
		out, err = bookWarnings(ctx, tx, book)
		return err
	})
	return out, err
}

// foldedBatch is how many folded names bookWarnings looks up at once.
const foldedBatch = 5000

// bookWarnings is BookWarnings in a transaction of the caller's.
func bookWarnings(ctx context.Context, db store.DBTX, book *levelbook.Book) ([]string, error) {
	var out []string
	// Points the turning-point pattern takes that name marks, looked up
	// some thousands at a time: a book of the largest size has half a
	// million turning points.
	var marks []string
	pointLine := map[string]int{}
	var like []store.Mark
	seen := map[int64]bool{}
	var tpFolded []string
	lookUp := func() error {
		ms, err := store.MarkListByFolded(ctx, db, tpFolded)
		if err != nil {
			return fmt.Errorf("look up marks named like the turning points of %s: %w", book.Name, err)
		}
		for _, m := range ms {
			if !seen[m.ID] {
				seen[m.ID] = true
				like = append(like, m)
			}
		}
		tpFolded = tpFolded[:0]
		return nil
	}
	pts := points(book)
	for _, s := range pts {
		switch {
		case s.TurningPoint:
			tpFolded = append(tpFolded, names.Fold(s.Name))
			if len(tpFolded) == foldedBatch {
				if err := lookUp(); err != nil {
					return nil, err
				}
			}
		case !s.Spot:
			pointLine[s.Name] = s.Line
			marks = append(marks, s.Name)
		}
	}
	if len(tpFolded) > 0 {
		if err := lookUp(); err != nil {
			return nil, err
		}
	}
	if len(like) > 0 {
		// In the register's order of designations, each named at the
		// first turning point that folds to its name.
		tpLine := map[string]int{}
		for _, m := range like {
			k := names.Fold(m.Designation)
			tpLine[k] = 0
			tpFolded = append(tpFolded, k)
		}
		ms, err := store.MarkListByFolded(ctx, db, tpFolded)
		if err != nil {
			return nil, fmt.Errorf("look up marks named like the turning points of %s: %w", book.Name, err)
		}
		for _, s := range pts {
			if !s.TurningPoint {
				continue
			}
			if k := names.Fold(s.Name); tpLine[k] == 0 {
				if _, ok := tpLine[k]; ok {
					tpLine[k] = s.Line
				}
			}
		}
		for _, m := range ms {
			out = append(out, fmt.Sprintf("WARNING: %s: line %d: %s is a mark in the register, but this book takes it as a turning point (the name matches its turning-point pattern %q): nothing is checked or recorded against mark %s; if the book means the mark, give it a \"# turning-points:\" pattern that %s does not match",
				book.Name, tpLine[names.Fold(m.Designation)], m.Designation, book.Meta.TurningPoints, m.Designation, m.Designation))
		}
	}
	if book.Meta.Date == "" || len(marks) == 0 {
		return out, nil
	}
	dated, err := time.Parse(time.DateOnly, book.Meta.Date)
	if err != nil {
		return out, nil // refused elsewhere
	}
	ms, err := store.MarkListByDesignations(ctx, db, marks)
	if err != nil {
		return nil, fmt.Errorf("look up the marks of %s: %w", book.Name, err)
	}
	ids := make([]int64, len(ms))
	for i, m := range ms {
		ids[i] = m.ID
	}
	first, err := store.MarkEarliestRecord(ctx, db, ids)
	if err != nil {
		return nil, fmt.Errorf("look up the earliest records of the marks of %s: %w", book.Name, err)
	}
	for _, m := range ms {
		if f, ok := first[m.ID]; ok && dated.Before(f) {
			out = append(out, fmt.Sprintf("WARNING: %s: line %d: the book is dated %s, before the register's earliest record of %s (%s): check the book's date, and that %s is the mark the book means",
				book.Name, pointLine[m.Designation], book.Meta.Date, m.Designation, f.Format(time.DateOnly), m.Designation))
		}
	}
	return out, nil
}
