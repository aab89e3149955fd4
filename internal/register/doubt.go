package register

import (
	"context"
	"fmt"
	"slices"
	"strings"
	"time"

	"cairn/internal/store"
)

// Kinds of doubt about a mark's height. Every command that shows a height
// shows its doubts, found here and nowhere else.
const (
	// DoubtCondition: the mark's latest condition report says it is
	// disturbed, destroyed or not found. Only a later report (good or
	// reset) clears it; a new height does not.
	DoubtCondition = "condition"
	// DoubtStale: the version is current but no longer stands on current
	// control (Stale): a version its adjustment held was superseded or is
	// itself stale, or a mark its runs touched was reported disturbed or
	// destroyed after them.
	DoubtStale = "stale"
	// DoubtVoidedRun: the version's adjustment used a run since voided.
	DoubtVoidedRun = "voided-run"
	// DoubtAcceptedFailures: the version's adjustment was published with
	// its failed checks accepted.
	DoubtAcceptedFailures = "accepted-failed-checks"
	// DoubtSuspect: every check connection of the mark judged in the latest
	// run not voided that judged one failed: the mark may have moved. A
	// later run that passes one of its connections, or a condition report
	// recorded after that run, clears it.
	DoubtSuspect = "suspect"
	// DoubtRetired: the mark is retired (migrations/00018): its heights
	// are of a mark no longer in use, never held as control.
	DoubtRetired = "retired"
	// DoubtBeforeReset: the version was recorded before the mark's latest
	// reset report: it is the height of the mark as it was, never held as
	// control after the reset.
	DoubtBeforeReset = "before-reset"
)

// Doubt is one reason not to rely on a mark's height.
type Doubt struct {
	Kind string `json:"kind"`
	// Word is the doubt in one word, for a table's column: the condition
	// (disturbed, destroyed, not-found), stale, voided-run or
	// accepted-failures.
	Word string `json:"word"`
	// Datum and Version name the height version the doubt concerns; empty
	// and 0 for a doubt about the mark itself (its condition).
	Datum   string `json:"datum,omitempty"`
	Version int    `json:"version,omitempty"`
	// Text says it in words, with dates and who.
	Text string `json:"text"`
}

// Warning is the doubt as a loud warning, with what to do about it.
func (d Doubt) Warning() string {
	switch d.Kind {
	case DoubtCondition:
		return "WARNING: mark " + d.Text + "; do not rely on its height until it has been checked in the field"
	case DoubtStale:
		return "WARNING: " + d.Text + "; adjust it again before relying on it"
	case DoubtVoidedRun:
		return "WARNING: " + d.Text + "; adjust it again without that run before relying on it"
	case DoubtSuspect:
		return "WARNING: mark " + d.Text + "; check it in the field and report its condition, or check it again into two other marks, before relying on its height"
	case DoubtRetired:
		return "WARNING: mark " + d.Text + "; it is not control any more: do not hold it or set out from it"
	case DoubtBeforeReset:
		return "WARNING: " + d.Text + "; it is the height of the mark as it was: level the mark again and publish its new height before relying on it"
	default:
		return "WARNING: " + d.Text + "; read the checks accepted (cairn trace) before relying on it"
	}
}

// Doubts are a mark's doubts: its own first, then those of its versions by
// datum and version.
type Doubts []Doubt

// Words is the doubts' words, each once, in order ("" for none).
func (ds Doubts) Words() string {
	var w []string
	for _, d := range ds {
		if !slices.Contains(w, d.Word) {
			w = append(w, d.Word)
		}
	}
	return strings.Join(w, ",")
}

// Of returns the doubts that concern one version: the mark's own, and the
// version's.
func (ds Doubts) Of(datum string, version int) Doubts {
	var out Doubts
	for _, d := range ds {
		if d.Datum == "" || (d.Datum == datum && d.Version == version) {
			out = append(out, d)
		}
	}
	return out
}

// conditionWords are the words of the conditions in doubt.
var conditionWords = map[string]string{"disturbed": "was reported DISTURBED", "destroyed": "was reported DESTROYED",
	"not-found": "was NOT FOUND when searched for"}

// conditionDoubt is the doubt a mark's latest condition report casts, if
// any.
func conditionDoubt(m store.Mark) (Doubt, bool) {
	c := m.Latest
	if c == nil || !conditionsInDoubt[c.Condition] {
		return Doubt{}, false
	}
	s := fmt.Sprintf("%s %s on %s", m.Designation, conditionWords[c.Condition], c.ObservedOn.Format("2006-01-02"))
	if c.Note != "" {
		s += " (" + c.Note + ")"
	}
	return Doubt{Kind: DoubtCondition, Word: c.Condition, Text: s}, true
}

// doubtsOf finds the doubts of marks and of the height versions hs (of
// those marks, any versions), by mark identifier: a mark without doubt is
// absent. Marks need their latest condition report (store.Mark.Latest).
// It reads in db, which should be one read-only transaction so that every
// doubt describes the same moment.
func doubtsOf(ctx context.Context, db store.DBTX, marks []store.Mark, hs []store.Height) (map[int64]Doubts, error) {
	out := map[int64]Doubts{}
	var ids []int64
	seen := map[int64]bool{}
	for _, m := range marks {
		if d, ok := conditionDoubt(m); ok {
			out[m.ID] = append(out[m.ID], d)
		}
		if m.Retired != nil {
			out[m.ID] = append(out[m.ID], Doubt{Kind: DoubtRetired, Word: "retired", Text: retiredText(m)})
		}
		if !seen[m.ID] {
			ids, seen[m.ID] = append(ids, m.ID), true
		}
	}
	for _, h := range hs {
		if !seen[h.MarkID] {
			ids, seen[h.MarkID] = append(ids, h.MarkID), true
		}
	}
	if len(hs) > 0 {
		resets, err := store.ConditionLatestResetMany(ctx, db, ids)
		if err != nil {
			return nil, fmt.Errorf("look up the resets of the marks: %w", err)
		}
		for _, h := range hs {
			if c, ok := resets[h.MarkID]; ok && beforeReset(h, &c) {
				out[h.MarkID] = append(out[h.MarkID], Doubt{Kind: DoubtBeforeReset, Word: "before-reset", Datum: h.DatumCode, Version: h.Version,
					Text: fmt.Sprintf("%s on %s, version %d: in force from %s, recorded %s, BEFORE RESET (the mark was %s)", h.Designation, h.DatumCode, h.Version,
						h.InForceFrom.UTC().Format("2006-01-02"), h.RecordedAt.UTC().Format("2006-01-02"), resetText(c))})
			}
		}
	}
	suspect, err := suspectDoubts(ctx, db, marks)
	if err != nil {
		return nil, err
	}
	for _, m := range marks {
		if d, ok := suspect[m.ID]; ok {
			out[m.ID] = append(out[m.ID], d)
		}
	}
	var adjIDs, currentAdjusted []int64
	for _, h := range hs {
		if h.AdjustmentID != nil && !slices.Contains(adjIDs, *h.AdjustmentID) {
			adjIDs = append(adjIDs, *h.AdjustmentID)
		}
		if h.Current && h.AdjustmentID != nil {
			currentAdjusted = append(currentAdjusted, h.ID)
		}
	}
	if len(adjIDs) == 0 {
		return out, nil
	}
	adjs, err := store.AdjustmentListByIDs(ctx, db, adjIDs)
	if err != nil {
		return nil, fmt.Errorf("look up the adjustments of the heights: %w", err)
	}
	byAdj := map[int64]store.Adjustment{}
	var runIDs []int64
	for _, a := range adjs {
		byAdj[a.ID] = a
		runIDs = append(runIDs, a.RunIDs...)
	}
	voids, err := store.RunVoidedList(ctx, db, runIDs)
	if err != nil {
		return nil, fmt.Errorf("look up voided runs: %w", err)
	}
	staleReasons := map[int64][]StaleReason{}
	if len(currentAdjusted) > 0 {
		// Only these heights, and those their adjustments held, are read.
		shs, err := staleHeights(ctx, db, currentAdjusted, true)
		if err != nil {
			return nil, err
		}
		for _, sh := range shs {
			staleReasons[sh.ID] = sh.Reasons
		}
	}
	for _, h := range hs {
		if h.AdjustmentID == nil {
			continue
		}
		a := byAdj[*h.AdjustmentID]
		add := func(kind, word, text string) {
			out[h.MarkID] = append(out[h.MarkID], Doubt{Kind: kind, Word: word, Datum: h.DatumCode, Version: h.Version,
				Text: fmt.Sprintf("%s on %s, version %d: %s", h.Designation, h.DatumCode, h.Version, text)})
		}
		acc, err := AcceptanceOf(a)
		if err != nil {
			return nil, err
		}
		if acc != nil {
			var checks []string
			for _, c := range acc.Checks {
				checks = append(checks, c.Kind+": "+c.Message)
			}
			add(DoubtAcceptedFailures, "accepted-failures", fmt.Sprintf("adjustment %d was PUBLISHED WITH FAILED CHECKS ACCEPTED by %s on %s (%s); accepted %s",
				a.ID, acc.By, acc.At.UTC().Format("2006-01-02"), acc.Reason, strings.Join(checks, "; ")))
		}
		for _, id := range a.RunIDs {
			if v, ok := voids[id]; ok {
				add(DoubtVoidedRun, "voided-run", fmt.Sprintf("adjustment %d used run %d, voided %s by %s: %s",
					a.ID, id, v.RecordedAt.UTC().Format("2006-01-02"), v.RecordedBy, v.Reason))
			}
		}
		if !h.Current {
			continue
		}
		var why []string
		for _, r := range staleReasons[h.ID] {
			if r.Kind != store.CauseVoidedRun {
				why = append(why, r.Text)
			}
		}
		if len(why) > 0 {
			add(DoubtStale, "stale", "stale: "+strings.Join(why, "; "))
		}
	}
	return out, nil
}

// markDoubtsCurrent finds the doubts of marks and their current heights
// on every datum.
func markDoubtsCurrent(ctx context.Context, db store.DBTX, marks []store.Mark) (map[int64]Doubts, error) {
	ids := make([]int64, len(marks))
	for i, m := range marks {
		ids[i] = m.ID
	}
	hs, err := store.HeightCurrentByMarks(ctx, db, ids)
	if err != nil {
		return nil, err
	}
	return doubtsOf(ctx, db, marks, hs)
}

// suspectDoubts finds the marks that failed their check connections: in
// the latest run not voided that judged a check connection of the mark,
// every one of its connections failed, and no condition report of the
// mark was recorded after that run. Marks need their latest condition
// report.
func suspectDoubts(ctx context.Context, db store.DBTX, marks []store.Mark) (map[int64]Doubt, error) {
	out := map[int64]Doubt{}
	if len(marks) == 0 {
		return out, nil
	}
	ids := make([]int64, len(marks))
	for i, m := range marks {
		ids[i] = m.ID
	}
	cs, err := store.CheckConnectionLatestByMarks(ctx, db, ids)
	if err != nil {
		return nil, fmt.Errorf("look up the check connections of the marks: %w", err)
	}
	for _, m := range marks {
		var latest int64
		for _, c := range cs {
			if (c.FromMarkID == m.ID || c.ToMarkID == m.ID) && c.RunID > latest {
				latest = c.RunID
			}
		}
		if latest == 0 {
			continue
		}
		var failed []string
		passed := false
		var at time.Time
		for _, c := range cs {
			if c.RunID != latest || (c.FromMarkID != m.ID && c.ToMarkID != m.ID) {
				continue
			}
			at = c.RunRecordedAt
			if *c.Pass {
				passed = true
				continue
			}
			// The mark's height as levelled from the other mark, minus
			// its published height.
			other, off := c.From, c.ObservedM-c.KnownM
			if c.FromMarkID == m.ID {
				other, off = c.To, -off
			}
			failed = append(failed, fmt.Sprintf("levelled from %s it is %+.1f mm from its published height (allowable %.1f mm)", other, off*1000, *c.AllowableM*1000))
		}
		if passed || m.Latest != nil && m.Latest.RecordedAt.After(at) {
			continue
		}
		out[m.ID] = Doubt{Kind: DoubtSuspect, Word: "suspect", Text: fmt.Sprintf("%s is SUSPECT: its check connections in run %d (recorded %s) failed: %s",
			m.Designation, latest, at.UTC().Format("2006-01-02"), strings.Join(failed, "; "))}
	}
	return out, nil
}
