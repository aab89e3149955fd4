package register

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"sort"
	"strconv"
	"strings"
	"time"

	"github.com/jackc/pgx/v5"

	"cairn/internal/store"
)

// PublishParams ask for a draft adjustment to be published.
type PublishParams struct {
	AdjustmentID int64
	// Reason is kept with the publication and with every new version.
	Reason string
	By     string
	// AcceptFailedChecks publishes a draft whose checks failed (see
	// FailedCheck); AcceptReason, required with it, says why they are
	// accepted. Both are kept with the publication, with the checks.
	AcceptFailedChecks bool
	AcceptReason       string
	// LargeChangeM is the change, in metres, over which a new height is
	// called out (Published.Changes); 0 means DefaultLargeChangeM.
	LargeChangeM float64
	// ReportCondition, "good" or "reset", writes with the publication a
	// condition report on each adjusted mark whose latest report casts
	// doubt on it (AdjustmentView.InDoubt), observed on the date of the
	// last run that levelled it, with ConditionNote (required with it).
	// A new height never clears that doubt by itself.
	ReportCondition string
	ConditionNote   string
}

// check trims p and refuses what is missing.
func (p *PublishParams) check() error {
	p.Reason, p.By, p.AcceptReason = strings.TrimSpace(p.Reason), strings.TrimSpace(p.By), strings.TrimSpace(p.AcceptReason)
	p.ReportCondition, p.ConditionNote = strings.ToLower(strings.TrimSpace(p.ReportCondition)), strings.TrimSpace(p.ConditionNote)
	switch {
	case p.ReportCondition != "" && p.ReportCondition != "good" && p.ReportCondition != "reset":
		return inputErr("report-condition", "%q is not a condition that clears a doubt (want good or reset)", p.ReportCondition)
	case p.ReportCondition != "" && p.ConditionNote == "":
		return inputErr("condition-note", "say what the crew found at the marks (a note goes with the condition report)")
	case p.ReportCondition == "" && p.ConditionNote != "":
		return inputErr("condition-note", "a condition note goes with a condition report to write (report-condition)")
	case p.Reason == "":
		return inputErr("reason", "say why these heights are published")
	case p.By == "":
		return inputErr("by", "say who publishes")
	case p.AcceptFailedChecks && p.AcceptReason == "":
		return inputErr("accept-reason", "say why the failed checks are accepted")
	case !p.AcceptFailedChecks && p.AcceptReason != "":
		return inputErr("accept-reason", "a reason for accepting failed checks goes with accepting them")
	}
	var err error
	p.LargeChangeM, err = checkLargeChange(p.LargeChangeM)
	return err
}

// Published is a publication: the adjustment as it now stands, the
// versions it wrote, by designation, what they changed, and the failed
// checks it accepted (nil when none failed).
type Published struct {
	Adjustment store.Adjustment
	Versions   []store.Height
	Changes    []MarkChange
	Accepted   *Acceptance
	// LargeChangeM is the threshold the changes were called out over.
	LargeChangeM float64
	// Reported are the condition reports written with the publication
	// (PublishParams.ReportCondition), by designation.
	Reported []ReportedCondition
	// StillInDoubt are the adjusted marks whose latest condition report
	// still casts doubt on their new heights.
	StillInDoubt []MarkInDoubt
}

// ReportedCondition is a condition report a publication wrote.
type ReportedCondition struct {
	Designation string
	Condition   store.Condition
}

// PublishPreview is what publishing a draft would do, as the register
// stands now: the draft, its failed checks and the changes of its marks'
// heights. Publish checks it all again in its own transaction.
type PublishPreview struct {
	View         *AdjustmentView
	Failed       []FailedCheck
	Changes      []MarkChange
	LargeChangeM float64
}

// Refusal is the error Publish would give for the failed checks unless
// they are accepted; nil when none failed.
func (pv *PublishPreview) Refusal() error {
	if len(pv.Failed) == 0 {
		return nil
	}
	return &PublishChecksError{AdjustmentID: pv.View.Adjustment.ID, Checks: pv.Failed}
}

// PublishPreview shows what publishing draft adjustment id would do
// (changes over largeChangeM metres, 0 for DefaultLargeChangeM, called
// out), for its confirmation. An adjustment no longer a draft is refused
// with a NotDraftError, one that does not follow from its stored inputs
// (reproduce) with a DraftMismatchError.
func (r *Register) PublishPreview(ctx context.Context, id int64, largeChangeM float64) (*PublishPreview, error) {
	largeChangeM, err := checkLargeChange(largeChangeM)
	if err != nil {
		return nil, err
	}
	pv := &PublishPreview{View: &AdjustmentView{}, LargeChangeM: largeChangeM}
	err = r.withTx(ctx, readTx, func(tx pgx.Tx) error {
		if err := store.TxNoJIT(ctx, tx); err != nil {
			return err
		}
		v := pv.View
		if err := r.adjustmentView(ctx, tx, id, v); err != nil {
			return err
		}
		if err := notDraft(v.Adjustment, store.StatusPublished); err != nil {
			return err
		}
		if err := reproduce(ctx, tx, v); err != nil {
			return err
		}
		latest, err := store.HeightLatestMany(ctx, tx, store.HeightLatestManyParams{MarkIDs: resultMarks(v), DatumID: v.Adjustment.DatumID})
		if err != nil {
			return err
		}
		if latest, err = inForceOf(ctx, tx, latest, v.Adjustment.DatumID); err != nil {
			return err
		}
		if pv.Changes, err = markChanges(v, latest, largeChangeM); err != nil {
			return err
		}
		pv.Failed, err = failedChecks(ctx, tx, v)
		return err
	})
	if err != nil {
		return nil, err
	}
	return pv, nil
}

// inForceOf returns, by mark, the version in force now of each chain
// whose latest version is in latest: the latest itself, unless a version
// recorded later came in force earlier (a correction of the past), when it
// is looked up.
func inForceOf(ctx context.Context, tx pgx.Tx, latest map[int64]store.Height, datumID int64) (map[int64]store.Height, error) {
	out := make(map[int64]store.Height, len(latest))
	for id, h := range latest {
		if !h.Current {
			var err error
			if h, err = store.HeightCurrent(ctx, tx, store.HeightLatestParams{MarkID: id, DatumID: datumID}); err != nil {
				return nil, err
			}
		}
		out[id] = h
	}
	return out, nil
}

// resultMarks are the marks of v's results.
func resultMarks(v *AdjustmentView) []int64 {
	ids := make([]int64, len(v.Results))
	for i, res := range v.Results {
		ids[i] = res.MarkID
	}
	return ids
}

// Publish turns a draft adjustment into new height versions, in one
// transaction. It locks every mark involved (in order of identifier), then
// checks that every held version and every version to be replaced is still
// current; if any is not, someone published in between and it returns a
// ConflictError naming the mark, having written nothing. It then runs the
// gates of publication (failedChecks: the draft's own checks, and the held
// marks' conditions as reported now); if any failed and they are not
// accepted, it returns a PublishChecksError listing them, having written
// nothing. A draft whose stored results are not those its stored inputs
// give (reproduce) is a DraftMismatchError. An adjustment published or
// discarded before the request is a NotDraftError.
func (r *Register) Publish(ctx context.Context, p PublishParams) (*Published, error) {
	if err := p.check(); err != nil {
		return nil, err
	}
	out := &Published{LargeChangeM: p.LargeChangeM}
	var xid uint64
	err := r.withTx(ctx, pgx.TxOptions{}, func(tx pgx.Tx) error {
		if err := store.TxNoJIT(ctx, tx); err != nil {
			return err
		}
		a, err := r.lockDraft(ctx, tx, p.AdjustmentID, store.StatusPublished)
		if err != nil {
			return err
		}
		v := &AdjustmentView{}
		if err := r.adjustmentView(ctx, tx, a.ID, v); err != nil {
			return err
		}
		held, results := v.Held, v.Results
		var ids []int64
		for _, h := range held {
			ids = append(ids, h.MarkID)
		}
		ids = append(ids, resultMarks(v)...)
		sort.Slice(ids, func(i, j int) bool { return ids[i] < ids[j] })
		if err := store.MarkLock(ctx, tx, ids); err != nil {
			return fmt.Errorf("lock marks: %w", err)
		}
		latest, err := store.HeightLatestMany(ctx, tx, store.HeightLatestManyParams{MarkIDs: ids, DatumID: a.DatumID})
		if err != nil {
			return err
		}
		inForce, err := inForceOf(ctx, tx, latest, a.DatumID)
		if err != nil {
			return err
		}
		for _, h := range held {
			if cur := inForce[h.MarkID]; cur.ID != h.ID {
				return changed(a, h.Designation, "held", &h.Height, cur)
			}
			// Retired or reset since the draft was made: never control.
			m, err := store.MarkGet(ctx, tx, store.MarkGetParams{Designation: h.Designation})
			if err != nil {
				return err
			}
			if err := heldRefusal(ctx, tx, "held mark", m, h.Height); err != nil {
				return err
			}
		}
		for _, res := range results {
			if res.Held {
				continue
			}
			cur, ok := latest[res.MarkID]
			switch {
			case res.Replaces == nil && ok:
				return changed(a, res.Designation, "to be replaced", nil, cur)
			case res.Replaces != nil && cur.ID != *res.Replaces:
				return changed(a, res.Designation, "to be replaced", &store.Height{ID: *res.Replaces, Version: *res.ReplacesVersion}, cur)
			}
		}
		// The draft must follow from its stored inputs (a draft whose
		// rows were written or altered outside cairn does not).
		if err := reproduce(ctx, tx, v); err != nil {
			return err
		}
		failed, err := failedChecks(ctx, tx, v)
		if err != nil {
			return err
		}
		ev := store.AdjustmentEventInsertParams{AdjustmentID: a.ID, Status: store.StatusPublished, Reason: p.Reason, RecordedBy: p.By}
		if len(failed) > 0 {
			if !p.AcceptFailedChecks {
				return &PublishChecksError{AdjustmentID: a.ID, Checks: failed}
			}
			if ev.AcceptedChecks, err = json.Marshal(failed); err != nil {
				return err
			}
			ev.AcceptedReason = p.AcceptReason
		}
		if out.Changes, err = markChanges(v, inForce, p.LargeChangeM); err != nil {
			return err
		}
		if err := store.AdjustmentEventInsert(ctx, tx, ev); err != nil {
			return asConflict(err)
		}
		var publish []store.AdjustmentResult
		for _, res := range results {
			if !res.Held {
				publish = append(publish, res)
			}
		}
		if err := checkResults(publish, nil); err != nil {
			return err
		}
		out.Versions, err = store.HeightInsertMany(ctx, tx, store.HeightInsertManyParams{DatumID: a.DatumID, DatumCode: a.DatumCode, AdjustmentID: a.ID,
			Source: AdjustmentSource(a.ID, a.Method, len(a.RunIDs)),
			Reason: p.Reason, RecordedBy: p.By, Results: publish})
		if err != nil {
			return asConflict(err)
		}
		if out.Adjustment, err = store.AdjustmentGet(ctx, tx, store.AdjustmentGetParams{ID: a.ID}); err != nil {
			return err
		}
		if out.Accepted, err = AcceptanceOf(out.Adjustment); err != nil {
			return err
		}
		if err := reportConditions(ctx, tx, p, v, out); err != nil {
			return err
		}
		xid, err = store.TxID(ctx, tx)
		return err
	})
	if err == nil {
		// The versions came in force together, at the commit.
		var at time.Time
		if at, err = store.CommitTime(ctx, r.pool, xid); err == nil {
			for i := range out.Versions {
				out.Versions[i].InForceFrom, out.Versions[i].CommittedAt = at, at
			}
		}
	}
	if err != nil {
		return nil, publishErr("publish", p.AdjustmentID, err)
	}
	return out, nil
}

// publishErr wraps err of a publication or discard with its context; a
// refusal that says it all already (a NotDraftError, a
// PublishChecksError) is returned as it is.
func publishErr(what string, id int64, err error) error {
	var nd *NotDraftError
	var pc *PublishChecksError
	var dm *DraftMismatchError
	if errors.As(err, &nd) || errors.As(err, &pc) || errors.As(err, &dm) {
		return err
	}
	return fmt.Errorf("%s adjustment %d: %w", what, id, err)
}

// changed is the conflict of a version that is no longer current.
func changed(a store.Adjustment, designation, role string, was *store.Height, now store.Height) error {
	wasText := "no height"
	if was != nil {
		wasText = fmt.Sprintf("version %d", was.Version)
	}
	nowText := fmt.Sprintf("version %d, recorded %s by %s", now.Version, now.RecordedAt.UTC().Format("2006-01-02 15:04:05Z"), now.RecordedBy)
	return &ConflictError{Err: fmt.Errorf("%s on %s changed since adjustment %d was made: the %s height was %s, now it is %s; adjust again against the current heights",
		designation, a.DatumCode, a.ID, role, wasText, nowText)}
}

// NotDraftError refuses to publish or discard an adjustment that was
// already published or discarded when asked: a request that can never
// succeed. Nothing was written.
type NotDraftError struct {
	Adjustment store.Adjustment
	// Asked is what was asked: store.StatusPublished or StatusDiscarded.
	Asked string
}

func (e *NotDraftError) Error() string {
	a := e.Adjustment
	verb := map[string]string{store.StatusPublished: "published", store.StatusDiscarded: "discarded"}[e.Asked]
	if a.Status == e.Asked {
		verb += " again"
	}
	return fmt.Sprintf("adjustment %d was %s on %s by %s (%s): it cannot be %s", a.ID, a.Status, statusTime(a), a.StatusBy, a.StatusReason, verb)
}

// statusTime is when a's status changed, in UTC.
func statusTime(a store.Adjustment) string {
	if a.StatusAt == nil {
		return "an unknown date"
	}
	return a.StatusAt.UTC().Format("2006-01-02 15:04:05Z")
}

// notDraft refuses, with a NotDraftError, to do asked (publish or
// discard) to an adjustment that is no longer a draft.
func notDraft(a store.Adjustment, asked string) error {
	if a.Status == store.StatusDraft {
		return nil
	}
	return &NotDraftError{Adjustment: a, Asked: asked}
}

// lockDraft locks adjustment id in tx for its publication or discard
// (asked). An adjustment that was no longer a draft when asked is a
// NotDraftError; one that stopped being a draft while this transaction
// waited for its lock (another publisher or discarder won the race) is a
// ConflictError.
func (r *Register) lockDraft(ctx context.Context, tx pgx.Tx, id int64, asked string) (store.Adjustment, error) {
	before, err := r.adjustment(ctx, tx, id, false)
	if err != nil {
		return before, err
	}
	if err := notDraft(before, asked); err != nil {
		return before, err
	}
	a, err := r.adjustment(ctx, tx, id, true)
	if err != nil {
		return a, err
	}
	if a.Status != store.StatusDraft {
		return a, &ConflictError{Err: fmt.Errorf("adjustment %d was %s meanwhile, on %s by %s (%s)", a.ID, a.Status,
			statusTime(a), a.StatusBy, a.StatusReason)}
	}
	return a, nil
}

// DiscardParams ask for a draft adjustment to be set aside.
type DiscardParams struct {
	AdjustmentID int64
	Reason       string
	By           string
}

// Discard sets a draft adjustment aside for good; it stays in the register
// with the reason.
func (r *Register) Discard(ctx context.Context, p DiscardParams) (store.Adjustment, error) {
	p.Reason, p.By = strings.TrimSpace(p.Reason), strings.TrimSpace(p.By)
	if p.Reason == "" {
		return store.Adjustment{}, inputErr("reason", "say why the adjustment is discarded")
	}
	if p.By == "" {
		return store.Adjustment{}, inputErr("by", "say who discards it")
	}
	var out store.Adjustment
	err := r.withTx(ctx, pgx.TxOptions{}, func(tx pgx.Tx) error {
		a, err := r.lockDraft(ctx, tx, p.AdjustmentID, store.StatusDiscarded)
		if err != nil {
			return err
		}
		if err := store.AdjustmentEventInsert(ctx, tx, store.AdjustmentEventInsertParams{AdjustmentID: a.ID,
			Status: store.StatusDiscarded, Reason: p.Reason, RecordedBy: p.By}); err != nil {
			return asConflict(err)
		}
		out, err = store.AdjustmentGet(ctx, tx, store.AdjustmentGetParams{ID: a.ID})
		return err
	})
	if err != nil {
		return store.Adjustment{}, publishErr("discard", p.AdjustmentID, err)
	}
	return out, nil
}

// reportConditions writes, when p asks, a condition report on each of v's
// adjusted marks in doubt, observed on the date of the last of v's runs
// that levelled it; it refuses a mark whose doubtful report came after
// that run, which cannot speak for the mark since. Without p asking, the
// marks stay in doubt (out.StillInDoubt).
func reportConditions(ctx context.Context, tx pgx.Tx, p PublishParams, v *AdjustmentView, out *Published) error {
	if len(v.InDoubt) == 0 {
		return nil
	}
	if p.ReportCondition == "" {
		out.StillInDoubt = v.InDoubt
		return nil
	}
	levelled := map[int64]time.Time{} // mark: date of the last run over it
	for _, run := range v.Runs {
		on := run.RecordedAt.UTC()
		if run.ObservedOn != nil {
			on = *run.ObservedOn
		}
		on = time.Date(on.Year(), on.Month(), on.Day(), 0, 0, 0, 0, time.UTC)
		marks, err := store.RunMarkListByRun(ctx, tx, run.ID)
		if err != nil {
			return err
		}
		for _, m := range marks {
			if on.After(levelled[m.MarkID]) {
				levelled[m.MarkID] = on
			}
		}
	}
	ids := map[string]int64{}
	for _, res := range v.Results {
		ids[res.Designation] = res.MarkID
	}
	for _, d := range v.InDoubt {
		on, ok := levelled[ids[d.Designation]]
		if !ok || on.Before(d.Condition.ObservedOn) {
			return inputErr("report-condition", "%s was reported %s on %s, after the last run of adjustment %d that levelled it (%s): that run cannot speak for the mark since; report its condition on its own (cairn mark condition)",
				d.Designation, d.Condition.Condition, d.Condition.ObservedOn.Format("2006-01-02"), v.Adjustment.ID, on.Format("2006-01-02"))
		}
		c, err := store.ConditionInsert(ctx, tx, store.ConditionInsertParams{MarkID: ids[d.Designation], Condition: p.ReportCondition,
			Note:       fmt.Sprintf("%s (reported with the publication of adjustment %d, which levelled the mark)", p.ConditionNote, v.Adjustment.ID),
			ObservedOn: on, RecordedBy: p.By})
		if err != nil {
			return err
		}
		out.Reported = append(out.Reported, ReportedCondition{Designation: d.Designation, Condition: c})
	}
	return nil
}

// AdjustmentSource is the source text of the versions an adjustment
// publishes: "adjustment 12 (least-squares, 2947 runs)", a few dozen bytes
// whatever the size of the network. The runs themselves are in
// adjustment_run, and trace shows them. Versions published before this
// text carried every run's number, "adjustment 12 (least-squares, run 3,
// 7, 8, ...)"; they stay as written (the history is append-only) and the
// command line shortens them for display.
func AdjustmentSource(id int64, method string, runs int) string {
	n := strconv.Itoa(runs) + " runs"
	if runs == 1 {
		n = "1 run"
	}
	return "adjustment " + strconv.FormatInt(id, 10) + " (" + method + ", " + n + ")"
}
