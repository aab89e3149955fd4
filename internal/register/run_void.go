package register

import (
	"context"
	"errors"
	"fmt"
	"strings"

	"github.com/jackc/pgx/v5"

	"cairn/internal/store"
)

// VoidRunParams void a recorded run.
type VoidRunParams struct {
	RunID int64
	// Reason says why the run is not to be used; By who decided it.
	Reason string
	By     string
}

// RunVoidedError refuses the use of a voided run by name (an adjustment
// that names it); Run carries the void. Nothing was written.
type RunVoidedError struct {
	Run store.Run
}

func (e *RunVoidedError) Error() string {
	v := e.Run.Voided
	return fmt.Sprintf("run %d was voided %s by %s: %s; a voided run is left out of adjustments (see cairn run show %d)",
		e.Run.ID, v.RecordedAt.UTC().Format("2006-01-02 15:04:05Z"), v.RecordedBy, v.Reason, e.Run.ID)
}

// VoidRun records, in one transaction, that a run is not to be used: who
// decided it, when and why. Nothing of the run is changed or removed: new
// adjustments leave it out (refusing it when named), and every current
// height published from an adjustment that used it is stale. A run is
// voided once: voiding it again is refused. It needs the publisher's role.
func (r *Register) VoidRun(ctx context.Context, p VoidRunParams) (store.Run, error) {
	reason, by := strings.TrimSpace(p.Reason), strings.TrimSpace(p.By)
	if reason == "" {
		return store.Run{}, inputErr("reason", "say why the run is voided")
	}
	if by == "" {
		return store.Run{}, inputErr("by", "say who voids the run")
	}
	var run store.Run
	err := r.withTx(ctx, pgx.TxOptions{}, func(tx pgx.Tx) error {
		var err error
		if run, err = r.run(ctx, tx, p.RunID); err != nil {
			return err
		}
		if run.Voided != nil {
			return voidedTwice(run)
		}
		v, err := store.RunVoidInsert(ctx, tx, store.RunVoidInsertParams{RunID: run.ID, Reason: reason, RecordedBy: by})
		if err != nil {
			return err
		}
		run.Voided = &v
		return nil
	})
	if errors.Is(err, store.ErrAlreadyExists) {
		// Another publisher voided it meanwhile.
		if again, gerr := store.RunGet(ctx, r.pool, p.RunID); gerr == nil && again.Voided != nil {
			return store.Run{}, voidedTwice(again)
		}
	}
	var ie *InputError
	if errors.As(err, &ie) {
		return store.Run{}, err
	}
	if err != nil {
		return store.Run{}, fmt.Errorf("void run %d: %w", p.RunID, asConflict(err))
	}
	return run, nil
}

func voidedTwice(run store.Run) error {
	v := run.Voided
	return inputErr("run", "run %d is voided already (%s by %s: %s); a run is voided once",
		run.ID, v.RecordedAt.UTC().Format("2006-01-02 15:04:05Z"), v.RecordedBy, v.Reason)
}

// VoidedRuns returns the voids of those of runIDs that are voided, by run
// (store.RunVoidedList, in a read-only transaction of its own).
func (r *Register) VoidedRuns(ctx context.Context, runIDs []int64) (map[int64]store.RunVoid, error) {
	var out map[int64]store.RunVoid
	err := r.withTx(ctx, readTx, func(tx pgx.Tx) error {
		var err error
		out, err = store.RunVoidedList(ctx, tx, runIDs)
		return err
	})
	if err != nil {
		return nil, fmt.Errorf("look up voided runs: %w", err)
	}
	return out, nil
}
