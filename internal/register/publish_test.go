package register

import (
	"context"
	"errors"
	"fmt"
	"math"
	"os"
	"strings"
	"sync"
	"testing"
	"time"

	"cairn/internal/adjust"
	"cairn/internal/pgtest"
	"cairn/internal/store"
)

// workedExample is worked example 1 of docs/references.md: a level circuit from
// BM1 (728.730 m) closing on BM1 at 728.486 m after 30.500 km. Inputs read
// from a published sample problem of a distance-proportional adjustment;
// the adjusted heights are derived there (+0.008 m/km) and are what cairn
// must publish. testdata/adjust/worked-circuit.csv lays it out as a book.
var workedExample = []struct {
	point     string
	cumKm     float64
	computedM float64
	adjusted  string
}{
	{"BM1", 0, 728.730, ""},
	{"BM2", 5.245, 783.213, "783.255"},
	{"BM3", 11.271, 891.764, "891.854"},
	{"BM4", 17.718, 843.195, "843.337"},
	{"BM5", 21.964, 739.708, "739.884"},
	{"BM6", 25.247, 702.956, "703.158"},
	{"BM1", 30.500, 728.486, ""},
}

// workedBook returns the worked circuit's book; copies after the first get
// a comment line of their own, so that they are different files.
func workedBook(t *testing.T, copy int) []byte {
	t.Helper()
	b, err := os.ReadFile("../../testdata/adjust/worked-circuit.csv")
	if err != nil {
		t.Fatal(err)
	}
	if copy > 1 {
		b = append([]byte(fmt.Sprintf("# copy %d\n", copy)), b...)
	}
	return b
}

type bundle struct {
	db  *pgtest.DB
	reg *Register
	ctx context.Context
}

// setup gives a fresh register with datum NAVD88, marks BM1 to BM6, BM1's
// outside height, and the worked circuit recorded as a run.
func setup(t *testing.T) (*bundle, int64) {
	t.Helper()
	db := pgtest.New(t)
	b := &bundle{db: db, reg: New(db.Pool), ctx: context.Background()}
	if _, err := b.reg.DatumAdd(b.ctx, DatumAddParams{Code: "NAVD88", Name: "North American Vertical Datum of 1988", By: "test"}); err != nil {
		t.Fatal(err)
	}
	for i := 1; i <= 6; i++ {
		if _, err := b.reg.MarkAdd(b.ctx, MarkAddParams{Designation: fmt.Sprintf("BM%d", i), CreatedBy: "test"}); err != nil {
			t.Fatal(err)
		}
	}
	b.setHeight(t, "BM1", "728.730", "Outside control, sheet 1 (invented citation)")
	return b, b.record(t, 1)
}

func (b *bundle) record(t *testing.T, seed int) int64 {
	t.Helper()
	rec, err := b.reg.Record(b.ctx, RecordParams{Path: fmt.Sprintf("worked-%d.csv", seed), Book: workedBook(t, seed), By: "test"})
	if err != nil {
		t.Fatal(err)
	}
	return rec.Run.ID
}

func (b *bundle) setHeight(t *testing.T, mark, value, source string) store.Height {
	t.Helper()
	res, err := b.reg.HeightSet(b.ctx, HeightSetParams{Designation: mark, Datum: "NAVD88", Value: value, Unit: "m",
		Class: "first-II", Source: source, Reason: "outside control", RecordedBy: "test"})
	if err != nil {
		t.Fatal(err)
	}
	return res.Version
}

func (b *bundle) adjust(t *testing.T, runs ...int64) *AdjustmentView {
	t.Helper()
	v, err := b.reg.Adjust(b.ctx, AdjustParams{RunIDs: runs, Hold: HoldFixed("BM1"), By: "test"})
	if err != nil {
		t.Fatal(err)
	}
	return v
}

func (b *bundle) current(t *testing.T, mark string) store.Height {
	t.Helper()
	v, err := b.reg.HeightShow(b.ctx, HeightShowParams{Designation: mark})
	if err != nil {
		t.Fatal(err)
	}
	if len(v.Heights) != 1 {
		t.Fatalf("%s has %d current heights, want 1", mark, len(v.Heights))
	}
	return v.Heights[0]
}

func (b *bundle) counts(t *testing.T) string {
	t.Helper()
	var s string
	err := b.db.Pool.QueryRow(b.ctx, `SELECT format('adjustment %s, result %s, held %s, event %s, height %s',
		(SELECT count(*) FROM adjustment), (SELECT count(*) FROM adjustment_result), (SELECT count(*) FROM adjustment_held),
		(SELECT count(*) FROM adjustment_event), (SELECT count(*) FROM height))`).Scan(&s)
	if err != nil {
		t.Fatal(err)
	}
	return s
}

// End to end: outside control, a recorded loop, a draft, its publication;
// the new heights are the worked example's, history keeps both versions
// with their reasons, and the trace reaches the book's SHA-256 and the
// outside citation.
func TestAdjustPublishTrace(t *testing.T) {
	t.Parallel()
	b, run := setup(t)

	dry, err := b.reg.Adjust(b.ctx, AdjustParams{RunIDs: []int64{run}, Hold: HoldFixed("BM1"), DryRun: true})
	if err != nil {
		t.Fatal(err)
	}
	if dry.Adjustment.ID != 0 || b.counts(t) != "adjustment 0, result 0, held 0, event 0, height 1" {
		t.Fatalf("dry run stored something: id %d, %s", dry.Adjustment.ID, b.counts(t))
	}

	v := b.adjust(t, run)
	if v.Adjustment.Status != store.StatusDraft || len(v.Results) != 6 {
		t.Fatalf("draft: status %s, %d results", v.Adjustment.Status, len(v.Results))
	}
	st := v.Statistics.Stretches
	if len(st) != 1 || math.Abs(st[0].MisclosureM-(-0.244)) > 1e-9 || math.Abs(st[0].LengthM-30500) > 1e-6 {
		t.Fatalf("stretches %+v, want one of 30.5 km closing -0.244 m", st)
	}
	// Draft results as stored equal the worked example, and the corrections
	// grow to minus the misclosure at the closing mark (the rule of the
	// method).
	stored, err := b.reg.Adjustment(b.ctx, v.Adjustment.ID)
	if err != nil {
		t.Fatal(err)
	}
	for i, r := range stored.Results[1:] {
		want := workedExample[i+1]
		if r.Designation != want.point || *r.Value != want.adjusted || math.Abs(*r.ComputedM-want.computedM) > 1e-9 {
			t.Errorf("result %s %s (computed %.4f), want %s %s (computed %.3f)", r.Designation, *r.Value, *r.ComputedM, want.point, want.adjusted, want.computedM)
		}
		// Each correction is −E·d/D, E = −0.244 m, D = 30.5 km.
		if c := 0.244 * want.cumKm / 30.5; math.Abs(*r.CorrectionM-c) > 1e-9 {
			t.Errorf("%s correction %.6f, want %.6f", r.Designation, *r.CorrectionM, c)
		}
	}

	pub, err := b.reg.Publish(b.ctx, PublishParams{AdjustmentID: v.Adjustment.ID, Reason: "first adjustment of the circuit", By: "reviewer"})
	if err != nil {
		t.Fatal(err)
	}
	if len(pub.Versions) != 5 || pub.Adjustment.Status != store.StatusPublished {
		t.Fatalf("published %d versions, status %s", len(pub.Versions), pub.Adjustment.Status)
	}
	if h := b.current(t, "BM4"); *h.Value != "843.337" || h.SourceKind != KindAdjustment || *h.AdjustmentID != v.Adjustment.ID {
		t.Fatalf("BM4 now %s (%s, adjustment %v), want 843.337 from adjustment %d", *h.Value, h.SourceKind, h.AdjustmentID, v.Adjustment.ID)
	}

	// A second publication of the same draft is refused.
	_, err = b.reg.Publish(b.ctx, PublishParams{AdjustmentID: v.Adjustment.ID, Reason: "again", By: "reviewer"})
	var ce *ConflictError
	if !errors.As(err, &ce) {
		t.Fatalf("publishing twice: %v, want a conflict", err)
	}

	// History: a new adjustment of BM2 over an outside first version keeps
	// both, each with its reason.
	b.setHeight(t, "BM2", "783.250", "Outside control, sheet 2 (invented citation)")
	v2 := b.adjust(t, run)
	if _, err := b.reg.Publish(b.ctx, PublishParams{AdjustmentID: v2.Adjustment.ID, Reason: "re-adjusted after review", By: "reviewer"}); err != nil {
		t.Fatal(err)
	}
	_, hist, err := b.reg.History(b.ctx, "BM2", "")
	if err != nil {
		t.Fatal(err)
	}
	var got []string
	for _, h := range hist {
		got = append(got, *h.Value+" "+h.Reason)
	}
	want := []string{"783.255 re-adjusted after review", "783.250 outside control", "783.255 first adjustment of the circuit"}
	if strings.Join(got, "; ") != strings.Join(want, "; ") {
		t.Fatalf("history of BM2:\n got %q\nwant %q", got, want)
	}

	tr, err := b.reg.Trace(b.ctx, TraceParams{Designation: "BM4"})
	if err != nil {
		t.Fatal(err)
	}
	top := tr.Versions[0]
	runs, err := b.reg.RunList(b.ctx, RunListParams{})
	if err != nil {
		t.Fatal(err)
	}
	if top.Adjustment == nil || top.Adjustment.ID != v2.Adjustment.ID || len(top.Adjustment.Runs) != 1 ||
		string(top.Adjustment.Runs[0].BookSHA256) != string(runs[0].BookSHA256) {
		t.Fatalf("trace of BM4 does not lead to adjustment %d and its run's book", v2.Adjustment.ID)
	}
	held := top.Adjustment.Held
	if len(held) != 1 || held[0].Designation != "BM1" || held[0].SourceKind != KindAuthority ||
		held[0].Source != "Outside control, sheet 1 (invented citation)" || held[0].Adjustment != nil {
		t.Fatalf("trace of BM4 does not end at BM1's outside citation: %+v", held)
	}
}

// Two publications racing on the same marks: both wait on a lock a third
// connection holds on BM3, then race; one wins, the other fails with a
// conflict naming a mark and writes nothing.
func TestPublishRace(t *testing.T) {
	t.Parallel()
	b, run := setup(t)
	run2 := b.record(t, 2)
	a1, a2 := b.adjust(t, run), b.adjust(t, run2)
	before := b.counts(t)

	blocker, err := b.db.Pool.Begin(b.ctx)
	if err != nil {
		t.Fatal(err)
	}
	if _, err := blocker.Exec(b.ctx, "SELECT 1 FROM mark WHERE designation = 'BM3' FOR UPDATE"); err != nil {
		t.Fatal(err)
	}
	var wg sync.WaitGroup
	errs := make([]error, 2)
	for i, id := range []int64{a1.Adjustment.ID, a2.Adjustment.ID} {
		wg.Add(1)
		go func() {
			defer wg.Done()
			_, errs[i] = b.reg.Publish(b.ctx, PublishParams{AdjustmentID: id, Reason: fmt.Sprintf("publication %d", i+1), By: "racer"})
		}()
	}
	// Wait until both are blocked on the lock (polled, not timed).
	for {
		var n int
		if err := b.db.Pool.QueryRow(b.ctx, `SELECT count(*) FROM pg_stat_activity
			WHERE datname = current_database() AND wait_event_type = 'Lock' AND query LIKE '%FOR NO KEY UPDATE%'`).Scan(&n); err != nil {
			t.Fatal(err)
		}
		if n == 2 {
			break
		}
		time.Sleep(5 * time.Millisecond)
	}
	if err := blocker.Rollback(b.ctx); err != nil {
		t.Fatal(err)
	}
	wg.Wait()

	var wins, conflicts int
	for _, err := range errs {
		var ce *ConflictError
		switch {
		case err == nil:
			wins++
		case errors.As(err, &ce):
			conflicts++
			if !strings.Contains(err.Error(), "BM2 on NAVD88 changed") {
				t.Errorf("conflict does not name the first mark replaced: %v", err)
			}
		default:
			t.Errorf("unexpected error: %v", err)
		}
	}
	if wins != 1 || conflicts != 1 {
		t.Fatalf("%d won and %d conflicted, want one of each: %v", wins, conflicts, errs)
	}
	// The winner wrote its event and 5 versions; the loser nothing.
	want := strings.Replace(strings.Replace(before, "event 0", "event 1", 1), "height 1", "height 6", 1)
	if got := b.counts(t); got != want {
		t.Fatalf("after the race %s, want %s", got, want)
	}
	list, err := b.reg.AdjustmentList(b.ctx, AdjustmentListParams{Status: store.StatusDraft})
	if err != nil || len(list) != 1 {
		t.Fatalf("drafts after the race: %d (%v), want the loser's one", len(list), err)
	}
}

// Republishing a held mark makes every height derived from its old value
// stale, and heights derived from those; re-adjusting and publishing
// clears them. A mark reported disturbed after the run makes the
// heights of that run stale too.
func TestStale(t *testing.T) {
	t.Parallel()
	b, run := setup(t)
	a := b.adjust(t, run)
	if _, err := b.reg.Publish(b.ctx, PublishParams{AdjustmentID: a.Adjustment.ID, Reason: "circuit", By: "test"}); err != nil {
		t.Fatal(err)
	}
	stale := func() map[string]string {
		t.Helper()
		s, err := b.reg.Stale(b.ctx)
		if err != nil {
			t.Fatal(err)
		}
		out := map[string]string{}
		for _, h := range s {
			var kinds []string
			for _, r := range h.Reasons {
				kinds = append(kinds, r.Kind+" "+r.Mark)
			}
			out[h.Designation] = strings.Join(kinds, ", ")
		}
		return out
	}
	if s := stale(); len(s) != 0 {
		t.Fatalf("stale right after publication: %v", s)
	}

	// A second circuit holds BM2 (from the first adjustment) and BM1.
	rec, err := b.reg.Record(b.ctx, RecordParams{Path: "spur.csv", By: "test", NewMarks: true,
		Hold: map[string]float64{"BM2": 783.255, "BM1": 728.730}, Book: []byte(
			"# run: Spur\n# date: 2024-05-20\n# units: m\npoint,sight,middle,distance,note\n" +
				"BM2,BS,1.500,40.0,\nTC-0900,FS,1.200,40.0,\nTC-0900,BS,1.300,40.0,\nBM1,FS,56.080,40.0,\n")})
	if err != nil {
		t.Fatal(err)
	}
	spur, err := b.reg.Adjust(b.ctx, AdjustParams{RunIDs: []int64{rec.Run.ID}, Hold: HoldFixed("BM2", "BM1"), By: "test"})
	if err != nil {
		t.Fatal(err)
	}
	if _, err := b.reg.Publish(b.ctx, PublishParams{AdjustmentID: spur.Adjustment.ID, Reason: "spur", By: "test"}); err != nil {
		t.Fatal(err)
	}
	if s := stale(); len(s) != 0 {
		t.Fatalf("stale before any change: %v", s)
	}

	// A new outside value for BM1.
	b.setHeight(t, "BM1", "728.735", "Outside control, sheet 1, revision 2 (invented citation)")
	got := stale()
	want := map[string]string{
		"BM2": "held-superseded BM1", "BM3": "held-superseded BM1", "BM4": "held-superseded BM1",
		"BM5": "held-superseded BM1", "BM6": "held-superseded BM1",
		"TC-0900": "held-superseded BM1, held-stale BM2",
	}
	if fmt.Sprint(got) != fmt.Sprint(want) {
		t.Fatalf("stale after republishing BM1:\n got %v\nwant %v", got, want)
	}

	// Re-adjusting the circuit clears its heights; the spur still holds
	// an old BM1 and an old BM2.
	a2 := b.adjust(t, run)
	if _, err := b.reg.Publish(b.ctx, PublishParams{AdjustmentID: a2.Adjustment.ID, Reason: "new BM1", By: "test"}); err != nil {
		t.Fatal(err)
	}
	if got := stale(); fmt.Sprint(got) != "map[TC-0900:held-superseded BM1, held-superseded BM2]" {
		t.Fatalf("stale after re-adjusting the circuit: %v", got)
	}
	spur2, err := b.reg.Adjust(b.ctx, AdjustParams{RunIDs: []int64{rec.Run.ID}, Hold: HoldFixed("BM2", "BM1"), By: "test"})
	if err != nil {
		t.Fatal(err)
	}
	if _, err := b.reg.Publish(b.ctx, PublishParams{AdjustmentID: spur2.Adjustment.ID, Reason: "new BM1 and BM2", By: "test"}); err != nil {
		t.Fatal(err)
	}
	if got := stale(); len(got) != 0 {
		t.Fatalf("stale after re-adjusting both: %v", got)
	}

	// BM4 is found disturbed after the circuit was run: every height of
	// the circuit's adjustment is in question.
	if _, err := b.reg.MarkCondition(b.ctx, MarkConditionParams{Designation: "BM4", Condition: "disturbed",
		ObservedOn: time.Date(2024, 6, 1, 0, 0, 0, 0, time.UTC), RecordedBy: "test"}); err != nil {
		t.Fatal(err)
	}
	got = stale()
	for _, m := range []string{"BM2", "BM3", "BM4", "BM5", "BM6"} {
		if got[m] != "mark-condition BM4" {
			t.Errorf("%s: stale %q, want for BM4's condition", m, got[m])
		}
	}
	if got["TC-0900"] != "held-stale BM2" {
		t.Errorf("TC-0900: stale %q, want through BM2", got["TC-0900"])
	}
}

// An as-of look-up at every instant of a timeline returns what was current
// then.
func TestAsOfTimeline(t *testing.T) {
	t.Parallel()
	b, run := setup(t)
	now := func() time.Time {
		t.Helper()
		var ts time.Time
		if err := b.db.Pool.QueryRow(b.ctx, "SELECT clock_timestamp()").Scan(&ts); err != nil {
			t.Fatal(err)
		}
		return ts
	}
	type step struct {
		at   time.Time
		want string // BM3's height then, "" for none
	}
	steps := []step{{now(), ""}}
	publish := func(reason string) {
		a := b.adjust(t, run)
		if _, err := b.reg.Publish(b.ctx, PublishParams{AdjustmentID: a.Adjustment.ID, Reason: reason, By: "test"}); err != nil {
			t.Fatal(err)
		}
	}
	publish("first")
	steps = append(steps, step{now(), "891.854"})
	b.setHeight(t, "BM3", "891.900", "Outside check (invented citation)")
	steps = append(steps, step{now(), "891.900"})
	b.setHeight(t, "BM1", "728.740", "Outside control, revision (invented citation)")
	steps = append(steps, step{now(), "891.900"})
	publish("after the new BM1")
	// 891.764 computed + 0.010 held change + 0.090168 correction (derived).
	steps = append(steps, step{now(), "891.864"})

	_, hist, err := b.reg.History(b.ctx, "BM3", "")
	if err != nil {
		t.Fatal(err)
	}
	// Each version's own instant, and the microsecond before it.
	for _, h := range hist {
		steps = append(steps, step{h.RecordedAt, *h.Value})
		prev := ""
		if h.Supersedes != nil {
			p, err := store.HeightGet(b.ctx, b.db.Pool, *h.Supersedes)
			if err != nil {
				t.Fatal(err)
			}
			prev = *p.Value
		}
		steps = append(steps, step{h.RecordedAt.Add(-time.Microsecond), prev})
	}
	for _, s := range steps {
		at := s.at
		v, err := b.reg.HeightShow(b.ctx, HeightShowParams{Designation: "BM3", AsOf: &at})
		if err != nil {
			t.Fatal(err)
		}
		got := ""
		if len(v.Heights) == 1 {
			got = *v.Heights[0].Value
		}
		if got != s.want {
			t.Errorf("BM3 as of %s: %q, want %q", at.Format(time.RFC3339Nano), got, s.want)
		}
		tr, err := b.reg.Trace(b.ctx, TraceParams{Designation: "BM3", AsOf: &at})
		if s.want == "" {
			if err == nil {
				t.Errorf("trace of BM3 as of %s found %d heights, want none", at.Format(time.RFC3339Nano), len(tr.Versions))
			}
			continue
		}
		if err != nil || *tr.Versions[0].Value != s.want {
			t.Errorf("trace of BM3 as of %s: %v, want %s", at.Format(time.RFC3339Nano), err, s.want)
		}
	}
}

// Bad input names its field and writes nothing.
func TestAdjustRefusals(t *testing.T) {
	t.Parallel()
	b, run := setup(t)
	if _, err := b.reg.MarkCondition(b.ctx, MarkConditionParams{Designation: "BM1", Condition: "disturbed",
		ObservedOn: time.Date(2024, 7, 1, 0, 0, 0, 0, time.UTC), RecordedBy: "test"}); err != nil {
		t.Fatal(err)
	}
	tests := []struct {
		name  string
		p     AdjustParams
		field string
		msg   string
	}{
		{"no runs", AdjustParams{Hold: HoldFixed("BM1"), By: "t"}, "run", "at least one run"},
		{"unknown run", AdjustParams{RunIDs: []int64{run + 100}, Hold: HoldFixed("BM1"), By: "t"}, "run", "no run"},
		{"unknown mark", AdjustParams{RunIDs: []int64{run}, Hold: HoldFixed("BM7"), By: "t"}, "hold", "did you mean"},
		{"no height", AdjustParams{RunIDs: []int64{run}, Hold: HoldFixed("BM1", "BM3"), By: "t", AllowCondition: true, ConditionReason: "checked"}, "hold", "BM3 has no current height"},
		{"disturbed", AdjustParams{RunIDs: []int64{run}, Hold: HoldFixed("BM1"), By: "t"}, "hold", "BM1 (disturbed"},
		{"no reason", AdjustParams{RunIDs: []int64{run}, Hold: HoldFixed("BM1"), By: "t", AllowCondition: true}, "reason", "say why"},
		{"method", AdjustParams{RunIDs: []int64{run}, Hold: HoldFixed("BM1"), By: "t", Method: "guess"}, "method", "unknown method"},
		{"decimals", AdjustParams{RunIDs: []int64{run}, Hold: HoldFixed("BM1"), By: "t", Decimals: ptr(9)}, "decimals", "outside"},
	}
	for _, tt := range tests {
		_, err := b.reg.Adjust(b.ctx, tt.p)
		var ie *InputError
		if !errors.As(err, &ie) || ie.Field != tt.field || !strings.Contains(err.Error(), tt.msg) {
			t.Errorf("%s: %v, want an input error on %s saying %q", tt.name, err, tt.field, tt.msg)
		}
	}
	if got := b.counts(t); got != "adjustment 0, result 0, held 0, event 0, height 1" {
		t.Fatalf("refusals wrote: %s", got)
	}
	// Allowed with a reason, the reason is kept.
	v, err := b.reg.Adjust(b.ctx, AdjustParams{RunIDs: []int64{run}, Hold: HoldFixed("BM1"), By: "t",
		AllowCondition: true, ConditionReason: "re-checked against TC-0001 on 2024-07-02", Distribution: adjust.BySetups})
	if err != nil {
		t.Fatal(err)
	}
	if v.Adjustment.ConditionReason == "" || v.Parameters.Distribution != "setups" {
		t.Fatalf("condition reason %q, distribution %q", v.Adjustment.ConditionReason, v.Parameters.Distribution)
	}
	// Discarded, it cannot be published.
	if _, err := b.reg.Discard(b.ctx, DiscardParams{AdjustmentID: v.Adjustment.ID, Reason: "by setups was a mistake", By: "t"}); err != nil {
		t.Fatal(err)
	}
	_, err = b.reg.Publish(b.ctx, PublishParams{AdjustmentID: v.Adjustment.ID, Reason: "x", By: "t"})
	if err == nil || !strings.Contains(err.Error(), "was discarded") {
		t.Fatalf("publishing a discarded adjustment: %v", err)
	}
}

func ptr[T any](v T) *T { return &v }

// The database refuses changes to an adjustment and heights that cite an
// unpublished adjustment, whoever asks.
func TestAdjustmentAppendOnly(t *testing.T) {
	t.Parallel()
	b, run := setup(t)
	v := b.adjust(t, run)
	for _, sql := range []string{
		"UPDATE adjustment SET method = 'least-squares'",
		"DELETE FROM adjustment_result",
		"UPDATE adjustment_held SET condition_id = NULL",
		"DELETE FROM adjustment_run",
	} {
		if _, err := b.db.Pool.Exec(b.ctx, sql); err == nil || !strings.Contains(err.Error(), "append-only") {
			t.Errorf("%s: %v, want refused", sql, err)
		}
	}
	_, err := b.db.Pool.Exec(b.ctx, `INSERT INTO height (mark_id, datum_id, value, unit, decimals, source_kind, adjustment_id, reason, recorded_by)
		SELECT m.id, d.id, 783.255, 'm', 3, 'adjustment', $1, 'sneak', 'x' FROM mark m, datum d WHERE m.designation = 'BM2'`, v.Adjustment.ID)
	if err == nil || !strings.Contains(err.Error(), "not published") {
		t.Fatalf("height citing a draft: %v, want refused", err)
	}
}
