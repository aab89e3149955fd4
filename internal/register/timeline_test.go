package register_test

import (
	"errors"
	"fmt"
	"strings"
	"testing"
	"time"

	"cairn/internal/register"
	"cairn/internal/registertest"
	"cairn/internal/store"
)

// tlVersion is what the timeline test knows of a version, kept apart from
// the register's rows: its number, when it came in force and when the
// register learned of it.
type tlVersion struct {
	version  int
	inForce  time.Time
	recorded time.Time
}

// tlExpected is the answer to "what was in force at asOf, as known at
// knownAt" by the definition in docs/register.md, worked out here by
// brute force over the versions and not by the register's code: of the
// versions recorded by knownAt and in force from a time not after asOf,
// the one in force from the latest time; of two in force from the same
// time, the one recorded later. 0 means none.
func tlExpected(vs []tlVersion, asOf, knownAt time.Time) int {
	best := -1
	for i, v := range vs {
		if v.recorded.After(knownAt) || v.inForce.After(asOf) {
			continue
		}
		if best < 0 || v.inForce.After(vs[best].inForce) ||
			v.inForce.Equal(vs[best].inForce) && v.recorded.After(vs[best].recorded) {
			best = i
		}
	}
	if best < 0 {
		return 0
	}
	return vs[best].version
}

// A timeline: versions in force from D1 < D2 < D3, recorded out of order
// at T1 < T2 < T3 < T4, the last a correction of D2's value recorded after
// D3's version. Every pair (as of, known at) on a grid of instants around
// and between all seven times returns exactly the version the definition
// gives, or none; height show, height list and trace agree.
func TestTimelineEveryQuestionOneAnswer(t *testing.T) {
	t.Parallel()
	b := setup(t)
	d1 := time.Date(2001, 3, 1, 0, 0, 0, 0, time.UTC)
	d2 := time.Date(2005, 7, 15, 0, 0, 0, 0, time.UTC)
	d3 := time.Date(2019, 9, 16, 0, 0, 0, 0, time.UTC)
	steps := []struct {
		value, kind string
		inForce     time.Time
	}{
		{"769.83", register.KindAuthority, d2},  // T1: the 2005 sheet, entered first
		{"769.70", register.KindAuthority, d1},  // T2: the 2001 sheet, found later
		{"234.662", register.KindAuthority, d3}, // T3: the 2019 report
		{"769.88", register.KindCorrection, d2}, // T4: errata to the 2005 sheet, from its own date
	}
	var vs []tlVersion
	for _, s := range steps {
		from := s.inForce
		h := b.Height(t, registertest.HeightOpts{Designation: "TC-0412", Value: s.value, Unit: "usft", Kind: s.kind,
			Source: "Tallis County sheet (invented)", InForceFrom: &from})
		if !h.InForceFrom.Equal(from) || h.InForceGiven == nil || !h.CommittedAt.After(h.RecordedAt) {
			t.Fatalf("version %d: in force %v (given %v), recorded %v, written %v", h.Version, h.InForceFrom, h.InForceGiven, h.CommittedAt, h.RecordedAt)
		}
		vs = append(vs, tlVersion{h.Version, from, h.CommittedAt})
	}
	for i := 1; i < len(vs); i++ {
		if !vs[i].recorded.After(vs[i-1].recorded) {
			t.Fatalf("recorded times not increasing: %v", vs)
		}
	}
	mid := func(a, b time.Time) time.Time { return a.Add(b.Sub(a) / 2) }
	µs := time.Microsecond
	asOfs := []time.Time{d1.Add(-µs), d1, mid(d1, d2), d2.Add(-µs), d2, mid(d2, d3), d3.Add(-µs), d3, d3.AddDate(1, 0, 0)}
	knownAts := []time.Time{vs[0].recorded.Add(-µs)}
	for i, v := range vs {
		knownAts = append(knownAts, v.recorded)
		if i+1 < len(vs) {
			knownAts = append(knownAts, mid(v.recorded, vs[i+1].recorded))
		}
	}
	knownAts = append(knownAts, vs[len(vs)-1].recorded.Add(time.Hour))

	ask := func(asOf, knownAt *time.Time) (show, list, trace int) {
		t.Helper()
		v, err := b.Reg.HeightShow(b.Ctx, register.HeightShowParams{Designation: "TC-0412", Datum: "NAVD88", AsOf: asOf, KnownAt: knownAt})
		if err != nil {
			t.Fatal(err)
		}
		if len(v.Heights) > 1 {
			t.Fatalf("as of %v known at %v: %d versions", asOf, knownAt, len(v.Heights))
		}
		if len(v.Heights) == 1 {
			show = v.Heights[0].Version
		}
		hs, err := b.Reg.HeightsAsOf(b.Ctx, "NAVD88", asOf, knownAt)
		if err != nil {
			t.Fatal(err)
		}
		if len(hs) > 1 {
			t.Fatalf("list as of %v known at %v: %d versions", asOf, knownAt, len(hs))
		}
		if len(hs) == 1 {
			list = hs[0].Version
		}
		tr, err := b.Reg.Trace(b.Ctx, register.TraceParams{Designation: "TC-0412", Datum: "NAVD88", AsOf: asOf, KnownAt: knownAt})
		var ie *register.InputError
		switch {
		case errors.As(err, &ie) && strings.Contains(err.Error(), "has no height"):
		case err != nil:
			t.Fatal(err)
		default:
			trace = tr.Versions[0].Version
		}
		return show, list, trace
	}
	answers := map[int]int{}
	for _, asOf := range asOfs {
		for _, knownAt := range knownAts {
			want := tlExpected(vs, asOf, knownAt)
			answers[want]++
			show, list, trace := ask(&asOf, &knownAt)
			if show != want || list != want || trace != want {
				t.Errorf("as of %s, known at %s: show %d, list %d, trace %d; want version %d",
					asOf.Format(time.RFC3339Nano), knownAt.Format(time.RFC3339Nano), show, list, trace, want)
			}
		}
		// Known now (no --known-at).
		want := tlExpected(vs, asOf, time.Now().Add(time.Hour))
		if show, list, trace := ask(&asOf, nil); show != want || list != want || trace != want {
			t.Errorf("as of %s, known now: show %d, list %d, trace %d; want version %d", asOf.Format(time.RFC3339), show, list, trace, want)
		}
	}
	// Known at T alone: in force at T as known at T.
	for _, knownAt := range knownAts {
		want := tlExpected(vs, knownAt, knownAt)
		if show, list, trace := ask(nil, &knownAt); show != want || list != want || trace != want {
			t.Errorf("known at %s alone: show %d, list %d, trace %d; want version %d", knownAt.Format(time.RFC3339Nano), show, list, trace, want)
		}
	}
	// The grid reaches every version and "none": a test that could not
	// tell them apart would not be one.
	for v := 0; v <= len(vs); v++ {
		if answers[v] == 0 {
			t.Errorf("no pair on the grid answers version %d (answers %v)", v, answers)
		}
	}
	// Now, by all it knows: D3's version, though the correction of D2 was
	// recorded after it; it alone is current.
	if show, list, trace := ask(nil, nil); show != 3 || list != 3 || trace != 3 {
		t.Errorf("now: show %d, list %d, trace %d; want version 3", show, list, trace)
	}
	hv, err := b.Reg.History(b.Ctx, "TC-0412", "NAVD88")
	if err != nil {
		t.Fatal(err)
	}
	for _, e := range hv.Versions {
		if e.Current != (e.Version == 3) {
			t.Errorf("history: version %d current = %v", e.Version, e.Current)
		}
	}
	// The chain stays in recorded order and verifies.
	rep, err := b.Reg.AuditVerify(b.Ctx)
	if err != nil || len(rep.Breaks) != 0 || rep.Versions != 4 {
		t.Fatalf("audit: %v %+v", err, rep)
	}
}

// The database itself holds the two times of every version: an outside
// version without its in-force time, one from an adjustment with one of
// its own, and one in force after it is recorded are refused, whoever
// writes them (the test connects as the owner); a correction is a new
// version, never an edit.
func TestDatabaseHoldsInForce(t *testing.T) {
	t.Parallel()
	b := setup(t)
	h := b.Height(t, registertest.HeightOpts{Designation: "TC-0412", Value: "769.83", Unit: "usft"})
	for _, c := range []struct{ name, sql, want string }{
		{"outside without", `INSERT INTO height (mark_id, datum_id, supersedes, value, unit, decimals, source_kind, source, reason, recorded_by)
			SELECT mark_id, datum_id, id, 769.88, 'usft', 2, 'correction', 'errata (invented)', 'typo', 'test' FROM height WHERE id = $1`,
			"gives the time it came in force"},
		{"in force after it is recorded", `INSERT INTO height (mark_id, datum_id, supersedes, value, unit, decimals, source_kind, source, reason, recorded_by, in_force_from)
			SELECT mark_id, datum_id, id, 769.88, 'usft', 2, 'correction', 'errata (invented)', 'typo', 'test', clock_timestamp() + interval '1 day' FROM height WHERE id = $1`,
			"after it is recorded"},
		{"edit of the in-force time", `UPDATE height SET in_force_from = '2001-01-01' WHERE id = $1`, "append-only"},
	} {
		_, err := b.DB.Pool.Exec(b.Ctx, c.sql, h.ID)
		if err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%s: err = %v, want %q", c.name, err, c.want)
		}
	}
	// A version from an adjustment with an in-force time of its own: the
	// trigger that admits only the heights of a publication in its own
	// transaction (height_adjustment, 00003 and 00011) would refuse it
	// first, so it is set aside in a transaction rolled back.
	tx, err := b.DB.Pool.Begin(b.Ctx)
	if err != nil {
		t.Fatal(err)
	}
	if _, err := tx.Exec(b.Ctx, "ALTER TABLE height DISABLE TRIGGER height_adjustment"); err != nil {
		t.Fatal(err)
	}
	_, err = tx.Exec(b.Ctx, `INSERT INTO height (mark_id, datum_id, supersedes, value, unit, decimals, source_kind, source, reason, recorded_by, adjustment_id, in_force_from)
		SELECT mark_id, datum_id, id, 769.88, 'usft', 2, 'adjustment', '', 'adjusted', 'test', 1, '2020-01-01' FROM height WHERE id = $1`, h.ID)
	if err == nil || !strings.Contains(err.Error(), "comes in force at its publication's commit") {
		t.Errorf("adjustment with an in-force time: err = %v", err)
	}
	_ = tx.Rollback(b.Ctx)
	// Through the register: the in-force time is asked for, and refused in
	// the future, naming the field.
	for _, at := range []*time.Time{nil, ptr(time.Now().Add(time.Hour))} {
		_, err := b.Reg.HeightSet(b.Ctx, register.HeightSetParams{Designation: "TC-0412", Datum: "NAVD88", Value: "769.88", Unit: "usft",
			Kind: register.KindCorrection, Source: "errata (invented)", Reason: "typo", RecordedBy: "test", InForceFrom: at})
		var ie *register.InputError
		if !errors.As(err, &ie) || ie.Field != "in-force-from" {
			t.Errorf("in force from %v: err = %v, want an input error on in-force-from", at, err)
		}
	}
	hv, err := b.Reg.History(b.Ctx, "TC-0412", "")
	if err != nil || len(hv.Versions) != 1 {
		t.Fatalf("history: %v, %d versions; want the one, nothing written", err, len(hv.Versions))
	}
	if !errors.Is(translateOf(b, h.ID), store.ErrInForce) {
		t.Errorf("the store does not name the refusal ErrInForce")
	}
}

// translateOf writes, through the store, a version without its in-force
// time and returns the error.
func translateOf(b *registertest.Bundle, prev int64) error {
	h, err := store.HeightGet(b.Ctx, b.DB.Pool, prev)
	if err != nil {
		return fmt.Errorf("get: %w", err)
	}
	v := "769.88"
	u := "usft"
	d := 2
	_, err = store.HeightInsert(b.Ctx, b.DB.Pool, store.HeightInsertParams{MarkID: h.MarkID, DatumID: h.DatumID, Supersedes: &h.ID,
		Value: &v, Unit: &u, Decimals: &d, SourceKind: "correction", Source: "errata (invented)", Reason: "typo", RecordedBy: "test"})
	return err
}

// A correction of the past on a held mark and on an adjusted one: the
// adjustment holds the version in force now, not the later-recorded
// correction of an earlier date; publishing checks the held version is
// still the one in force, supersedes the latest recorded version (the
// chain stays in recorded order) and says what changes from the one in
// force now.
func TestPublishOverACorrectionOfThePast(t *testing.T) {
	t.Parallel()
	b := registertest.Setup(t)
	runs := b.WorkedCircuit(t, registertest.WorkedCircuitOpts{Class: "first-II"})
	bm4 := b.Height(t, registertest.HeightOpts{Designation: "BM4", Value: "843.400", Unit: "m", Class: "first-II"})
	past := time.Date(2001, 3, 1, 0, 0, 0, 0, time.UTC)
	for _, mark := range []string{"BM1", "BM4"} {
		h := b.Height(t, registertest.HeightOpts{Designation: mark, Value: "700.000", Unit: "m", Kind: register.KindCorrection,
			Source: "sheet of 2001 (invented)", InForceFrom: &past})
		if h.Current {
			t.Fatalf("%s: the correction of 2001 is current", mark)
		}
	}
	draft := b.Adjustment(t, registertest.AdjustmentOpts{Runs: runs})
	if len(draft.Held) != 1 || draft.Held[0].Version != 1 || *draft.Held[0].Value != "728.730" {
		t.Fatalf("held %+v, want BM1 version 1 (728.730), the one in force now", draft.Held)
	}
	pub := b.Publication(t, draft.Adjustment.ID, registertest.PublicationOpts{})
	var changed bool
	for _, c := range pub.Changes {
		if c.Designation == "BM4" {
			changed = true
			if c.Current == nil || c.Current.ID != bm4.ID {
				t.Errorf("BM4 changes from %+v, want version %d in force now", c.Current, bm4.Version)
			}
		}
	}
	if !changed {
		t.Fatalf("no change listed for BM4: %+v", pub.Changes)
	}
	for _, v := range pub.Versions {
		if v.Designation == "BM4" && (v.Version != 3 || !v.Current) {
			t.Errorf("BM4's published version %d (current %v), want 3 superseding the correction, current", v.Version, v.Current)
		}
	}
	if rep, err := b.Reg.AuditVerify(b.Ctx); err != nil || len(rep.Breaks) != 0 {
		t.Fatalf("audit: %v %+v", err, rep.Breaks)
	}
}
