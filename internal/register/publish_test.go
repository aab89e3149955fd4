package register_test

import (
	"errors"
	"fmt"
	"math"
	"strings"
	"sync"
	"testing"
	"time"

	"cairn/internal/adjust"
	. "cairn/internal/register"
	"cairn/internal/registertest"
	"cairn/internal/store"
)

// workedExample is worked example 1 of REFERENCES.md: a level circuit from
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

// setupWorked gives a fresh register with datum NAVD88, marks BM1 to BM6,
// BM1's outside height, and the worked circuit recorded as a run (the
// bundle holds BM1 when told nothing else).
func setupWorked(t *testing.T) (*registertest.Bundle, int64) {
	t.Helper()
	b := registertest.Setup(t)
	return b, b.WorkedCircuit(t, registertest.WorkedCircuitOpts{Class: "first-II"})[0]
}

// outside records an outside height of mark, in metres, citing source.
func outside(t *testing.T, b *registertest.Bundle, mark, value, source string) store.Height {
	t.Helper()
	return b.Height(t, registertest.HeightOpts{Designation: mark, Value: value, Class: "first-II", Source: source})
}

// adjustRuns makes a draft of runs holding BM1.
func adjustRuns(t *testing.T, b *registertest.Bundle, runs ...int64) *AdjustmentView {
	t.Helper()
	return b.Adjustment(t, registertest.AdjustmentOpts{Runs: runs})
}

// current returns mark's one current height.
func current(t *testing.T, b *registertest.Bundle, mark string) store.Height {
	t.Helper()
	v, err := b.Reg.HeightShow(b.Ctx, HeightShowParams{Designation: mark})
	if err != nil {
		t.Fatal(err)
	}
	if len(v.Heights) != 1 {
		t.Fatalf("%s has %d current heights, want 1", mark, len(v.Heights))
	}
	return v.Heights[0]
}

// noAdjustment are the counts of a register with the worked circuit and no
// adjustment.
var noAdjustment = map[string]int64{"adjustment": 0, "adjustment_result": 0, "adjustment_held": 0, "adjustment_event": 0, "height": 1}

var abs = math.Abs

// End to end: outside control, a recorded loop, a draft, its publication;
// the new heights are the worked example's, history keeps both versions
// with their reasons, and the trace reaches the book's SHA-256 and the
// outside citation.
func TestAdjustPublishTrace(t *testing.T) {
	t.Parallel()
	b, run := setupWorked(t)

	before := b.Counts(t)
	dry := b.Adjustment(t, registertest.AdjustmentOpts{Runs: []int64{run}, DryRun: true})
	if dry.Adjustment.ID != 0 {
		t.Fatalf("dry run stored something: id %d", dry.Adjustment.ID)
	}
	if !b.AssertCounts(t, noAdjustment) || !b.AssertNothingWritten(t, before) {
		t.Fatal("dry run stored something")
	}

	v := adjustRuns(t, b, run)
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
	stored, err := b.Reg.Adjustment(b.Ctx, v.Adjustment.ID)
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

	pub, err := b.Reg.Publish(b.Ctx, PublishParams{AdjustmentID: v.Adjustment.ID, Reason: "first adjustment of the circuit", By: "reviewer"})
	if err != nil {
		t.Fatal(err)
	}
	if len(pub.Versions) != 5 || pub.Adjustment.Status != store.StatusPublished {
		t.Fatalf("published %d versions, status %s", len(pub.Versions), pub.Adjustment.Status)
	}
	if h := current(t, b, "BM4"); *h.Value != "843.337" || h.SourceKind != KindAdjustment || *h.AdjustmentID != v.Adjustment.ID {
		t.Fatalf("BM4 now %s (%s, adjustment %v), want 843.337 from adjustment %d", *h.Value, h.SourceKind, h.AdjustmentID, v.Adjustment.ID)
	}

	// A second publication of the same draft is refused: not as a
	// conflict (it can never succeed, trying again is no use) but as a
	// request that cannot be met.
	_, err = b.Reg.Publish(b.Ctx, PublishParams{AdjustmentID: v.Adjustment.ID, Reason: "again", By: "reviewer"})
	var nd *NotDraftError
	if !errors.As(err, &nd) || !strings.Contains(err.Error(), "it cannot be published again") {
		t.Fatalf("publishing twice: %v, want a refusal of an adjustment already published", err)
	}

	// History: a new adjustment of BM2 over an outside first version keeps
	// both, each with its reason.
	outside(t, b, "BM2", "783.250", "Outside control, sheet 2 (invented citation)")
	v2 := adjustRuns(t, b, run)
	if _, err := b.Reg.Publish(b.Ctx, PublishParams{AdjustmentID: v2.Adjustment.ID, Reason: "re-adjusted after review", By: "reviewer"}); err != nil {
		t.Fatal(err)
	}
	hv, err := b.Reg.History(b.Ctx, "BM2", "")
	hist := hv.Versions
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

	tr, err := b.Reg.Trace(b.Ctx, TraceParams{Designation: "BM4"})
	if err != nil {
		t.Fatal(err)
	}
	top := tr.Versions[0]
	runs, err := b.Reg.RunList(b.Ctx, RunListParams{})
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
	b, run := setupWorked(t)
	run2 := b.WorkedCopy(t, 2, "")
	a1, a2 := adjustRuns(t, b, run), adjustRuns(t, b, run2)
	before := b.Counts(t)

	blocker, err := b.DB.Pool.Begin(b.Ctx)
	if err != nil {
		t.Fatal(err)
	}
	if _, err := blocker.Exec(b.Ctx, "SELECT 1 FROM mark WHERE designation = 'BM3' FOR UPDATE"); err != nil {
		t.Fatal(err)
	}
	var wg sync.WaitGroup
	errs := make([]error, 2)
	for i, id := range []int64{a1.Adjustment.ID, a2.Adjustment.ID} {
		wg.Add(1)
		go func() {
			defer wg.Done()
			_, errs[i] = b.Reg.Publish(b.Ctx, PublishParams{AdjustmentID: id, Reason: fmt.Sprintf("publication %d", i+1), By: "racer"})
		}()
	}
	// Wait until both are blocked on the lock (polled, not timed).
	for {
		var n int
		if err := b.DB.Pool.QueryRow(b.Ctx, `SELECT count(*) FROM pg_stat_activity
			WHERE datname = current_database() AND wait_event_type = 'Lock' AND query LIKE '%FOR NO KEY UPDATE%'`).Scan(&n); err != nil {
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
	if !b.AssertWrote(t, before, map[string]int64{"adjustment_event": 1, "height": 5, "register_commit": 1}) {
		t.Fatal("after the race: the winner's event and 5 versions, and nothing else, were wanted")
	}
	list, err := b.Reg.AdjustmentList(b.Ctx, AdjustmentListParams{Status: store.StatusDraft})
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
	b, run := setupWorked(t)
	a := adjustRuns(t, b, run)
	b.Publication(t, a.Adjustment.ID, registertest.PublicationOpts{Reason: "circuit"})
	stale := func() map[string]string {
		t.Helper()
		s, err := b.Reg.Stale(b.Ctx, StaleParams{})
		if err != nil {
			t.Fatal(err)
		}
		out := map[string]string{}
		for _, h := range s.Heights {
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
	rec := b.Run(t, registertest.RunOpts{Path: "spur.csv", NewMarks: true,
		Hold: map[string]float64{"BM2": 783.255, "BM1": 728.730}, Book: []byte(
			"# run: Spur\n# date: 2024-05-20\n# units: m\npoint,sight,middle,distance,note\n" +
				"BM2,BS,1.500,40.0,\nTC-0900,FS,1.200,40.0,\nTC-0900,BS,1.300,40.0,\nBM1,FS,56.080,40.0,\n")})
	spur := b.Adjustment(t, registertest.AdjustmentOpts{Runs: []int64{rec.Run.ID}, Hold: []string{"BM2", "BM1"}})
	b.Publication(t, spur.Adjustment.ID, registertest.PublicationOpts{Reason: "spur"})
	if s := stale(); len(s) != 0 {
		t.Fatalf("stale before any change: %v", s)
	}

	// A new outside value for BM1.
	outside(t, b, "BM1", "728.735", "Outside control, sheet 1, revision 2 (invented citation)")
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
	a2 := adjustRuns(t, b, run)
	b.Publication(t, a2.Adjustment.ID, registertest.PublicationOpts{Reason: "new BM1"})
	if got := stale(); fmt.Sprint(got) != "map[TC-0900:held-superseded BM1, held-superseded BM2]" {
		t.Fatalf("stale after re-adjusting the circuit: %v", got)
	}
	spur2 := b.Adjustment(t, registertest.AdjustmentOpts{Runs: []int64{rec.Run.ID}, Hold: []string{"BM2", "BM1"}})
	b.Publication(t, spur2.Adjustment.ID, registertest.PublicationOpts{Reason: "new BM1 and BM2"})
	if got := stale(); len(got) != 0 {
		t.Fatalf("stale after re-adjusting both: %v", got)
	}

	// BM4 is found disturbed after the circuit was run: every height of
	// the circuit's adjustment is in question.
	b.Condition(t, registertest.ConditionOpts{Designation: "BM4", Condition: "disturbed",
		ObservedOn: time.Date(2024, 6, 1, 0, 0, 0, 0, time.UTC)})
	got = stale()
	for _, m := range []string{"BM2", "BM3", "BM4", "BM5", "BM6"} {
		if got[m] != "mark-condition BM4" {
			t.Errorf("%s: stale %q, want for BM4's condition", m, got[m])
		}
	}
	if got["TC-0900"] != "held-stale BM2" {
		t.Errorf("TC-0900: stale %q, want through BM2", got["TC-0900"])
	}

	// By datum and by area (issue 15: stale of a county, not the whole
	// register). The circuit's marks are placed at 41.62,-97.95, 100 m
	// apart; TC-0900 some 100 km away. Within 1 km of TC-0900 only it is
	// listed, still stale through BM2 and BM4, which lie outside the area:
	// what a height held is followed wherever it is.
	place := func(mark string, lat, lon float64) {
		t.Helper()
		if _, err := b.Reg.MarkEdit(b.Ctx, MarkEditParams{Designation: mark, Lat: &lat, Lon: &lon, Reason: "position (invented)", By: "test"}); err != nil {
			t.Fatal(err)
		}
	}
	for i, m := range []string{"BM2", "BM3", "BM4", "BM5", "BM6"} {
		place(m, 41.62+0.0009*float64(i), -97.95)
	}
	place("TC-0900", 42.5, -97.5)
	b.Datum(t, registertest.DatumOpts{Code: "TCVD"})
	staleIn := func(p StaleParams) (string, bool) {
		t.Helper()
		s, err := b.Reg.Stale(b.Ctx, p)
		if err != nil {
			t.Fatal(err)
		}
		var out []string
		for _, h := range s.Heights {
			var kinds []string
			for _, r := range h.Reasons {
				kinds = append(kinds, r.Kind+" "+r.Mark)
			}
			out = append(out, h.Designation+": "+strings.Join(kinds, ", "))
		}
		return strings.Join(out, "; "), s.More
	}
	circuit := "BM2: mark-condition BM4; BM3: mark-condition BM4; BM4: mark-condition BM4; BM5: mark-condition BM4; BM6: mark-condition BM4"
	cases := []struct {
		p    StaleParams
		want string
		more bool
	}{
		{StaleParams{Near: &store.LatLon{Lat: 42.5, Lon: -97.5}, RadiusM: 1000}, "TC-0900: held-stale BM2", false},
		{StaleParams{Near: &store.LatLon{Lat: 41.62, Lon: -97.95}, RadiusM: 2000}, circuit, false},
		{StaleParams{Near: &store.LatLon{Lat: 41.62, Lon: -97.95}, RadiusM: 2000, Datum: "NAVD88"}, circuit, false},
		{StaleParams{Near: &store.LatLon{Lat: 41.62, Lon: -97.95}, RadiusM: 2000, Datum: "TCVD"}, "", false},
		{StaleParams{Datum: "NAVD88"}, circuit + "; TC-0900: held-stale BM2", false},
		{StaleParams{Datum: "TCVD"}, "", false},
		{StaleParams{Near: &store.LatLon{Lat: 0, Lon: 0}, RadiusM: 1000}, "", false},
		{StaleParams{Limit: 2}, "BM2: mark-condition BM4; BM3: mark-condition BM4", true},
		{StaleParams{Limit: 6}, circuit + "; TC-0900: held-stale BM2", false},
	}
	for _, c := range cases {
		if got, more := staleIn(c.p); got != c.want || more != c.more {
			t.Errorf("stale %+v:\n got %q (more %v)\nwant %q (more %v)", c.p, got, more, c.want, c.more)
		}
	}
	var ie *InputError
	if _, err := b.Reg.Stale(b.Ctx, StaleParams{Datum: "TCVDX"}); !errors.As(err, &ie) || ie.Field != "datum" || !strings.Contains(err.Error(), "did you mean TCVD?") {
		t.Errorf("an unknown datum: %v", err)
	}
	if _, err := b.Reg.Stale(b.Ctx, StaleParams{Near: &store.LatLon{Lat: 91, Lon: 0}, RadiusM: 1}); !errors.As(err, &ie) || ie.Field != "area" {
		t.Errorf("latitude 91: %v", err)
	}
}

// An as-of look-up at every instant of a timeline returns what was current
// then.
func TestAsOfTimeline(t *testing.T) {
	t.Parallel()
	b, run := setupWorked(t)
	now := func() time.Time {
		t.Helper()
		var ts time.Time
		if err := b.DB.Pool.QueryRow(b.Ctx, "SELECT clock_timestamp()").Scan(&ts); err != nil {
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
		a := adjustRuns(t, b, run)
		b.Publication(t, a.Adjustment.ID, registertest.PublicationOpts{Reason: reason})
	}
	publish("first")
	steps = append(steps, step{now(), "891.854"})
	outside(t, b, "BM3", "891.900", "Outside check (invented citation)")
	steps = append(steps, step{now(), "891.900"})
	outside(t, b, "BM1", "728.740", "Outside control, revision (invented citation)")
	steps = append(steps, step{now(), "891.900"})
	publish("after the new BM1")
	// 891.764 computed + 0.010 held change + 0.090168 correction (derived).
	steps = append(steps, step{now(), "891.864"})

	hv, err := b.Reg.History(b.Ctx, "BM3", "")
	hist := hv.Versions
	if err != nil {
		t.Fatal(err)
	}
	// Each version's own instant of coming in force (its commit), and the
	// microsecond before it.
	for _, h := range hist {
		steps = append(steps, step{h.InForceFrom, *h.Value})
		prev := ""
		if h.Supersedes != nil {
			p, err := store.HeightGet(b.Ctx, b.DB.Pool, *h.Supersedes)
			if err != nil {
				t.Fatal(err)
			}
			prev = *p.Value
		}
		steps = append(steps, step{h.InForceFrom.Add(-time.Microsecond), prev})
	}
	for _, s := range steps {
		at := s.at
		v, err := b.Reg.HeightShow(b.Ctx, HeightShowParams{Designation: "BM3", AsOf: &at})
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
		tr, err := b.Reg.Trace(b.Ctx, TraceParams{Designation: "BM3", AsOf: &at})
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
	b, run := setupWorked(t)
	b.Condition(t, registertest.ConditionOpts{Designation: "BM1", Condition: "disturbed",
		ObservedOn: time.Date(2024, 7, 1, 0, 0, 0, 0, time.UTC)})
	before := b.Counts(t)
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
		_, err := b.Reg.Adjust(b.Ctx, tt.p)
		var ie *InputError
		if !errors.As(err, &ie) || ie.Field != tt.field || !strings.Contains(err.Error(), tt.msg) {
			t.Errorf("%s: %v, want an input error on %s saying %q", tt.name, err, tt.field, tt.msg)
		}
	}
	if !b.AssertCounts(t, noAdjustment) || !b.AssertNothingWritten(t, before) {
		t.Fatal("refusals wrote")
	}
	// Allowed with a reason, the reason is kept.
	v, err := b.Reg.Adjust(b.Ctx, AdjustParams{RunIDs: []int64{run}, Hold: HoldFixed("BM1"), By: "t",
		AllowCondition: true, ConditionReason: "re-checked against TC-0001 on 2024-07-02", Distribution: adjust.BySetups})
	if err != nil {
		t.Fatal(err)
	}
	if v.Adjustment.ConditionReason == "" || v.Parameters.Distribution != "setups" {
		t.Fatalf("condition reason %q, distribution %q", v.Adjustment.ConditionReason, v.Parameters.Distribution)
	}
	// Discarded, it cannot be published.
	if _, err := b.Reg.Discard(b.Ctx, DiscardParams{AdjustmentID: v.Adjustment.ID, Reason: "by setups was a mistake", By: "t"}); err != nil {
		t.Fatal(err)
	}
	_, err = b.Reg.Publish(b.Ctx, PublishParams{AdjustmentID: v.Adjustment.ID, Reason: "x", By: "t"})
	if err == nil || !strings.Contains(err.Error(), "was discarded") {
		t.Fatalf("publishing a discarded adjustment: %v", err)
	}
}

func ptr[T any](v T) *T { return &v }

// The database refuses changes to an adjustment and heights that cite an
// unpublished adjustment, whoever asks.
func TestAdjustmentAppendOnly(t *testing.T) {
	t.Parallel()
	b, run := setupWorked(t)
	v := adjustRuns(t, b, run)
	before := b.Counts(t)
	for _, sql := range []string{
		"UPDATE adjustment SET method = 'least-squares'",
		"DELETE FROM adjustment_result",
		"UPDATE adjustment_held SET condition_id = NULL",
		"DELETE FROM adjustment_run",
	} {
		if _, err := b.DB.Pool.Exec(b.Ctx, sql); err == nil || !strings.Contains(err.Error(), "append-only") {
			t.Errorf("%s: %v, want refused", sql, err)
		}
	}
	_, err := b.DB.Pool.Exec(b.Ctx, `INSERT INTO height (mark_id, datum_id, value, unit, decimals, source_kind, adjustment_id, reason, recorded_by)
		SELECT m.id, d.id, 783.255, 'm', 3, 'adjustment', $1, 'sneak', 'x' FROM mark m, datum d WHERE m.designation = 'BM2'`, v.Adjustment.ID)
	if err == nil || !strings.Contains(err.Error(), "not published") {
		t.Fatalf("height citing a draft: %v, want refused", err)
	}
	b.AssertNothingWritten(t, before)
}

// A published version's source names its adjustment, method and count of
// runs, never the run list (issue 15: 17 kB a version for 2,947 runs),
// and is a few dozen bytes however many runs there are.
func TestPublishedSourceIsShort(t *testing.T) {
	t.Parallel()
	b := registertest.Setup(t)
	b.WorkedCircuit(t, registertest.WorkedCircuitOpts{Copies: 3})
	// Three copies of the worked circuit by least squares: it misses
	// closure by 0.244 m, so the network's checks fail; accepted here.
	v := b.Adjustment(t, registertest.AdjustmentOpts{Method: adjust.MethodLeastSquares})
	if _, err := b.Reg.Publish(b.Ctx, PublishParams{AdjustmentID: v.Adjustment.ID, Reason: "three copies", By: "reviewer",
		AcceptFailedChecks: true, AcceptReason: "a test of the source text"}); err != nil {
		t.Fatal(err)
	}
	want := fmt.Sprintf("adjustment %d (least-squares, 3 runs)", v.Adjustment.ID)
	if h := current(t, b, "BM4"); h.Source != want {
		t.Errorf("BM4's source %q, want %q", h.Source, want)
	}
	if got := AdjustmentSource(12, "least-squares", 2947); got != "adjustment 12 (least-squares, 2947 runs)" {
		t.Errorf("2947 runs: %q", got)
	}
	if got := AdjustmentSource(3, "proportional", 1); got != "adjustment 3 (proportional, 1 run)" {
		t.Errorf("one run: %q", got)
	}
}
