package register_test

import (
	"errors"
	"fmt"
	"strings"
	"sync"
	"testing"
	"time"

	. "cairn/internal/register"
)

// Two publishers of the same draft at once: both find it a draft, one
// wins, and the other, having waited for the draft's lock, finds it
// published meanwhile: a conflict (someone else changed the register
// first), not the refusal of a request that could never succeed.
func TestPublishSameDraftRace(t *testing.T) {
	t.Parallel()
	b, run := setupWorked(t)
	v := adjustRuns(t, b, run)
	before := b.Counts(t)

	blocker, err := b.DB.Pool.Begin(b.Ctx)
	if err != nil {
		t.Fatal(err)
	}
	defer blocker.Rollback(b.Ctx)
	if _, err := blocker.Exec(b.Ctx, "SELECT 1 FROM adjustment WHERE id = $1 FOR UPDATE", v.Adjustment.ID); err != nil {
		t.Fatal(err)
	}
	var wg sync.WaitGroup
	errs := make([]error, 2)
	for i := range errs {
		wg.Add(1)
		go func() {
			defer wg.Done()
			_, errs[i] = b.Reg.Publish(b.Ctx, PublishParams{AdjustmentID: v.Adjustment.ID, Reason: fmt.Sprintf("publisher %d", i+1), By: "racer"})
		}()
	}
	// Wait until both are blocked on the draft's lock (polled, not timed).
	for {
		var n int
		if err := b.DB.Pool.QueryRow(b.Ctx, `SELECT count(*) FROM pg_stat_activity
			WHERE datname = current_database() AND wait_event_type = 'Lock' AND query LIKE '%FROM adjustment WHERE id = $1 FOR UPDATE%'`).Scan(&n); err != nil {
			t.Fatal(err)
		}
		if n == 2 {
			break
		}
		time.Sleep(5 * time.Millisecond)
	}
	if err := blocker.Rollback(b.Ctx); err != nil {
		t.Fatal(err)
	}
	wg.Wait()
	var wins, conflicts int
	for _, err := range errs {
		var ce *ConflictError
		var nd *NotDraftError
		switch {
		case err == nil:
			wins++
		case errors.As(err, &ce) && !errors.As(err, &nd) && strings.Contains(err.Error(), "was published meanwhile"):
			conflicts++
		default:
			t.Errorf("unexpected error: %v", err)
		}
	}
	if wins != 1 || conflicts != 1 {
		t.Fatalf("%d won and %d conflicted, want one of each: %v", wins, conflicts, errs)
	}
	b.AssertWrote(t, before, map[string]int64{"adjustment_event": 1, "height": 5, "register_commit": 1})
}

// A run voided between the draft and its publication stops the
// publication (nothing written) unless the failed check is accepted, and
// the acceptance keeps the void among its checks.
func TestPublishRefusesARunVoidedSinceTheDraft(t *testing.T) {
	t.Parallel()
	b, run := setupWorked(t)
	v := adjustRuns(t, b, run)
	if _, err := b.Reg.VoidRun(b.Ctx, VoidRunParams{RunID: run, Reason: "rod found 10 mm short", By: "chief"}); err != nil {
		t.Fatal(err)
	}
	before := b.Counts(t)
	_, err := b.Reg.Publish(b.Ctx, PublishParams{AdjustmentID: v.Adjustment.ID, Reason: "reviewed", By: "publisher"})
	var pce *PublishChecksError
	if !errors.As(err, &pce) || !strings.Contains(err.Error(), fmt.Sprintf("run %d", run)) || !strings.Contains(err.Error(), "rod found 10 mm short") {
		t.Fatalf("publish of a draft whose run was voided since: %v", err)
	}
	b.AssertNothingWritten(t, before)
	p, err := b.Reg.Publish(b.Ctx, PublishParams{AdjustmentID: v.Adjustment.ID, Reason: "reviewed", By: "publisher",
		AcceptFailedChecks: true, AcceptReason: "the rod was checked again and found true"})
	if err != nil {
		t.Fatal(err)
	}
	acc, err := AcceptanceOf(p.Adjustment)
	if err != nil || acc == nil || len(acc.Checks) != 1 || acc.Checks[0].Kind != "run-voided" || acc.Checks[0].RunID != run {
		t.Fatalf("acceptance %+v, %v", acc, err)
	}
}
