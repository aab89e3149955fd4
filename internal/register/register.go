// Package register holds cairn's use cases over the database: datums,
// marks and their condition reports, published heights and their history,
// and the audit of the hash chains. It owns every transaction: each write
// is one transaction, so bad input or a failure part way leaves nothing
// written.
package register

import (
	"context"
	"errors"
	"fmt"
	"math"
	"slices"
	"sort"
	"strings"
	"sync"
	"time"

	"github.com/jackc/pgx/v5"
	"github.com/jackc/pgx/v5/pgxpool"

	"cairn/internal/names"
	"cairn/internal/store"
	"cairn/internal/suggest"
)

// Register is the register in one PostgreSQL database.
type Register struct {
	pool *pgxpool.Pool
	// now is this computer's clock, which the server's is compared with
	// before the first write (checkClock).
	now func() time.Time
	// clockChecked is set once the server's clock was found within
	// ClockTolerance of now.
	clockMu      sync.Mutex
	clockChecked bool
	// schemaCache keeps the audit's reference schema between processes
	// (UseSchemaCache); nil for none.
	schemaCache SchemaCache
}

// New returns the register over pool (migrated by the caller).
func New(pool *pgxpool.Pool) *Register { return &Register{pool: pool, now: time.Now} }

// ClockTolerance is how far the database server's clock may be from the
// clock of the computer running cairn before cairn refuses to write.
// Every time the register keeps comes from the server's clock; one far
// ahead would stamp the record with a wrong time and then make every
// later write refused (a write may not be stamped before the register's
// latest), one far behind stamps it wrong too.
const ClockTolerance = 5 * time.Minute

// ClockError refuses a write because the database server's clock is
// wrong: too far from this computer's (checked before the first write),
// or behind the register's latest time (refused by the database).
// Nothing was written.
type ClockError struct{ Err error }

func (e *ClockError) Error() string { return e.Err.Error() }
func (e *ClockError) Unwrap() error { return e.Err }

// checkClock compares the server's clock with this computer's, once per
// Register, and refuses when they differ by more than ClockTolerance.
func (r *Register) checkClock(ctx context.Context) error {
	r.clockMu.Lock()
	defer r.clockMu.Unlock()
	if r.clockChecked {
		return nil
	}
	before := r.now()
	server, err := store.ServerClock(ctx, r.pool)
	if err != nil {
		return err
	}
	after := r.now()
	// This computer's time when the server read its clock: the middle of
	// the round trip.
	local := before.Add(after.Sub(before) / 2)
	diff := server.Sub(local)
	if diff > ClockTolerance || diff < -ClockTolerance {
		dir, by := "ahead of", diff
		if diff < 0 {
			dir, by = "behind", -diff
		}
		return &ClockError{Err: fmt.Errorf("the database server's clock reads %s, %s %s this computer's (%s): cairn refuses to write when the two differ by more than %s, since every time the register keeps comes from the server's clock; nothing was written (set the wrong clock right, then try again)",
			server.UTC().Format("2006-01-02 15:04:05.000Z"), by.Round(time.Second), dir, local.UTC().Format("2006-01-02 15:04:05.000Z"), ClockTolerance)}
	}
	r.clockChecked = true
	return nil
}

// InputError is bad input: it names the field at fault. Nothing was
// written. Msg names no flag of the command line: the caller names the
// field as its own interface spells it.
type InputError struct {
	Field string // the parameter at fault, e.g. "lat", "designation", "reason"
	Msg   string
}

func (e *InputError) Error() string { return e.Field + ": " + e.Msg }

func inputErr(field, format string, a ...any) error {
	return &InputError{Field: field, Msg: fmt.Sprintf(format, a...)}
}

// ConflictError says another writer changed the register first; nothing
// was written and the work may be tried again.
type ConflictError struct{ Err error }

func (e *ConflictError) Error() string {
	return "the register changed meanwhile, nothing was written (try again): " + e.Err.Error()
}
func (e *ConflictError) Unwrap() error { return e.Err }

// asConflict wraps store.ErrConflict errors as ConflictError.
func asConflict(err error) error {
	if errors.Is(err, store.ErrConflict) {
		return &ConflictError{Err: err}
	}
	return err
}

// withTx runs fn in one transaction, committing if fn returns nil. The
// deferred rollback runs even when ctx has been cancelled.
//
// Before the first writing transaction it checks the server's clock
// (checkClock). A refusal of the server's clock by the database (a write
// time or a commit not after the register's latest) is a ClockError.
func (r *Register) withTx(ctx context.Context, opts pgx.TxOptions, fn func(tx pgx.Tx) error) error {
	if opts.AccessMode != pgx.ReadOnly {
		if err := r.checkClock(ctx); err != nil {
			return err
		}
	}
	err := r.runTx(ctx, opts, fn)
	switch {
	case errors.Is(err, store.ErrClock) && !errors.As(err, new(*ClockError)):
		return &ClockError{Err: err}
	case errors.Is(err, store.ErrFutureDate) && !errors.As(err, new(*InputError)):
		return inputErr("date", "%v", err)
	}
	return err
}

// LatestToday is the latest calendar date anywhere on Earth at instant t
// (the date at UTC+14), as a date at midnight UTC: no observation may be
// dated after it (the database refuses it too, migrations/00012).
func LatestToday(t time.Time) time.Time {
	d := t.UTC().Add(14 * time.Hour)
	return time.Date(d.Year(), d.Month(), d.Day(), 0, 0, 0, 0, time.UTC)
}

// runTx is withTx without the clock.
func (r *Register) runTx(ctx context.Context, opts pgx.TxOptions, fn func(tx pgx.Tx) error) error {
	tx, err := r.pool.BeginTx(ctx, opts)
	if err != nil {
		return fmt.Errorf("begin transaction: %w", err)
	}
	defer tx.Rollback(context.WithoutCancel(ctx))
	if err := fn(tx); err != nil {
		if tx.Conn().IsClosed() {
			return &ConnectionLostError{Err: err}
		}
		return err
	}
	if err := store.Commit(ctx, tx); err != nil {
		if tx.Conn().IsClosed() {
			return &ConnectionLostError{Err: fmt.Errorf("commit: %w", err), Committing: true}
		}
		return asConflict(fmt.Errorf("commit: %w", err))
	}
	return nil
}

// ConnectionLostError says the connection to the database broke inside a
// transaction (the server stopped or restarted, or the network failed).
// Before the commit was asked for, the server rolls the transaction back:
// nothing was written. While committing, the outcome cannot be known.
type ConnectionLostError struct {
	Err error
	// Committing is set when the connection broke during the commit.
	Committing bool
}

func (e *ConnectionLostError) Error() string {
	if e.Committing {
		return "the connection to the database was lost while committing, so the work may or may not have been written (look before trying again): " + e.Err.Error()
	}
	return "the connection to the database was lost before the work was committed, so nothing was written (try again once the database is back): " + e.Err.Error()
}
func (e *ConnectionLostError) Unwrap() error { return e.Err }

// readTx is a read-only transaction that sees one snapshot.
var readTx = pgx.TxOptions{IsoLevel: pgx.RepeatableRead, AccessMode: pgx.ReadOnly}

// mark returns the mark with designation, or else the mark one of whose
// aliases is designation once folded (names.Fold), with FoundBy set: the
// one place a name given by a user is resolved to a mark. A name that is
// neither is an InputError naming field, with the nearest designations as
// suggestions.
func (r *Register) mark(ctx context.Context, db store.DBTX, field, designation string, forUpdate bool) (store.Mark, error) {
	designation = strings.TrimSpace(designation)
	if designation == "" {
		return store.Mark{}, inputErr(field, "a mark designation is required")
	}
	m, err := store.MarkGet(ctx, db, store.MarkGetParams{Designation: designation, ForUpdate: forUpdate})
	if errors.Is(err, store.ErrNotFound) {
		m, err = store.MarkGetByAlias(ctx, db, names.Fold(designation), forUpdate)
	}
	if errors.Is(err, store.ErrNotFound) {
		hint, err := designationHint(ctx, db, designation)
		if err != nil {
			return store.Mark{}, err
		}
		return store.Mark{}, inputErr(field, "no mark %q in the register%s", designation, hint)
	}
	if err != nil {
		return store.Mark{}, fmt.Errorf("look up mark %s: %w", designation, err)
	}
	return m, nil
}

// datum returns the datum with code, or an InputError naming field.
func (r *Register) datum(ctx context.Context, db store.DBTX, field, code string) (store.Datum, error) {
	code = strings.TrimSpace(code)
	if code == "" {
		return store.Datum{}, inputErr(field, "a datum code is required (see cairn datum list)")
	}
	d, err := store.DatumGetByCode(ctx, db, code)
	if errors.Is(err, store.ErrNotFound) {
		all, err := store.DatumList(ctx, db)
		if err != nil {
			return store.Datum{}, err
		}
		var codes []string
		for _, d := range all {
			codes = append(codes, d.Code)
		}
		return store.Datum{}, inputErr(field, "no datum %q in the register%s", code, didYouMean(code, codes, math.MaxInt))
	}
	if err != nil {
		return store.Datum{}, fmt.Errorf("look up datum %s: %w", code, err)
	}
	return d, nil
}

// hintRead is the most designations designationHint reads for one prefix.
const hintRead = 250

// designationHint returns didYouMean's hint for a designation the register
// does not hold, right at any size of the register. It reads the
// designations whose key (folded, punctuation left out: hintKey) starts
// with the whole typed key, then with shorter and shorter prefixes of it,
// each a range scan of an index (store.MarkDesignationsByKeyPrefix), and
// keeps the shortest prefix whose designations number at most hintRead;
// if even the first character's are that few, the whole register, if it
// is that small. A designation not read then differs from the typed key
// within that prefix, so it is at least one edit away, and the hint names
// only candidates no designation left unread could beat: those one edit
// away; none if the nearest read is further. No hint is better than the
// name of another mark.
func designationHint(ctx context.Context, db store.DBTX, typed string) (string, error) {
	k := hintKey(typed)
	var cands []string
	p := len(k)
	for ; p > 0; p-- {
		got, err := store.MarkDesignationsByKeyPrefix(ctx, db, k[:p], hintRead+1)
		if err != nil {
			return "", err
		}
		if len(got) > hintRead {
			break
		}
		cands = got
	}
	if p == 0 {
		all, err := store.MarkDesignationsByKeyPrefix(ctx, db, "", hintRead+1)
		if err != nil {
			return "", err
		}
		if len(all) <= hintRead {
			return didYouMean(typed, all, math.MaxInt), nil
		}
	}
	return didYouMean(typed, cands, 1), nil
}

// hintKey is the form in which didYouMean compares names: folded
// (names.Fold: case and character forms), punctuation left out.
func hintKey(x string) string {
	return strings.Map(func(r rune) rune {
		if r == '-' || r == '_' || r == '.' || r == '/' || r == ' ' {
			return -1
		}
		return r
	}, names.Fold(x))
}

// didYouMean returns " (did you mean X?)" naming the candidates nearest to
// s, or "" if none is close. Near means an edit distance between the
// keys (hintKey) of at most a third of the length (at least 1), and at
// most unseen: the least distance a name not among cands could have
// (math.MaxInt when cands are all the names there are).
func didYouMean(s string, cands []string, unseen int) string {
	key := hintKey
	k := key(s)
	limit := min(max(1, len(k)/3), unseen)
	type scored struct {
		s string
		d int
	}
	sorted := func(x string) string {
		r := []rune(x)
		slices.Sort(r)
		return string(r)
	}
	var near []scored
	for _, c := range cands {
		if d := suggest.OptimalAlignment(k, key(c)); d <= limit {
			// Between equals, the same characters in another order (two
			// digits swapped) come first.
			d *= 2
			if sorted(key(c)) != sorted(k) {
				d++
			}
			near = append(near, scored{c, d})
		}
	}
	if len(near) == 0 {
		return ""
	}
	sort.SliceStable(near, func(i, j int) bool { return near[i].d < near[j].d })
	var names []string
	for i := 0; i < len(near) && i < 3; i++ {
		names = append(names, near[i].s)
	}
	return " (did you mean " + strings.Join(names, " or ") + "?)"
}
