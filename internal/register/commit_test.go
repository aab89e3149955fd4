package register_test

import (
	"context"
	"errors"
	"slices"
	"strconv"
	"strings"
	"sync"
	"testing"
	"time"

	"cairn/internal/booktest"
	. "cairn/internal/register"
	"cairn/internal/registertest"
	"cairn/internal/store"
)

// A reader asking, during and after a publication of 20 000 heights, what
// was in force at any instant finds all of the publication or none of it:
// never part. Before schema v12 each version was stamped with the clock
// as it was written, so the first of them was in force seconds before the
// last.
func TestPublicationInForceWhole(t *testing.T) {
	t.Parallel()
	if testing.Short() {
		t.Skip("records, adjusts and publishes a loop of 20 001 marks")
	}
	const n = 20000
	setupStart := time.Now()
	fx := registertest.Setup(t)
	fx.Datum(t, registertest.DatumOpts{})
	loop := booktest.Loop{Setups: n + 1, MarkEvery: 1, Seed: 1}
	rec := fx.Run(t, registertest.RunOpts{Path: "large.csv", Book: loop.Book(), By: "test", NewMarks: true})
	fx.Height(t, registertest.HeightOpts{Designation: "TC-1001", Value: "100.000", Unit: "m", Source: "invented", Reason: "held", By: "test"})
	v := fx.Adjustment(t, registertest.AdjustmentOpts{Runs: []int64{rec.Run.ID}, Hold: []string{"TC-1001"}, By: "test"})
	id := v.Adjustment.ID
	last := loop.Marks()[len(loop.Marks())-1]

	// inForce counts the versions of the publication in force at at, and
	// says whether the last mark's height is one of them.
	inForce := func(at time.Time) (int, bool, error) {
		// The store's query of what was in force (HeightsAsOf without the
		// doubts, which would cost a second per look-up here).
		hs, err := store.HeightAsOfAll(context.Background(), fx.DB.Pool, store.HeightAsOfAllParams{AsOf: &at})
		if err != nil {
			return 0, false, err
		}
		count := 0
		for _, h := range hs {
			if h.AdjustmentID != nil && *h.AdjustmentID == id {
				count++
			}
		}
		mv, err := fx.Reg.HeightShow(context.Background(), HeightShowParams{Designation: last, AsOf: &at})
		if err != nil {
			return 0, false, err
		}
		lastIn := len(mv.Heights) == 1 && mv.Heights[0].AdjustmentID != nil && *mv.Heights[0].AdjustmentID == id
		return count, lastIn, nil
	}

	var (
		mu      sync.Mutex
		samples []time.Time
		during  []int
	)
	done := make(chan struct{})
	var wg sync.WaitGroup
	wg.Add(1)
	go func() {
		defer wg.Done()
		for {
			select {
			case <-done:
				return
			default:
			}
			at := time.Now()
			c, _, err := inForce(at)
			if err != nil {
				t.Error(err)
				return
			}
			mu.Lock()
			samples, during = append(samples, at), append(during, c)
			mu.Unlock()
		}
	}()
	t.Logf("set up in %v", time.Since(setupStart))
	start := time.Now()
	pub := fx.Publication(t, id, registertest.PublicationOpts{Reason: "test", By: "test"})
	end := time.Now()
	close(done)
	wg.Wait()
	if len(pub.Versions) != n {
		t.Fatalf("%d versions published, want %d", len(pub.Versions), n)
	}
	at := pub.Versions[0].InForceFrom
	for _, h := range pub.Versions {
		if !h.InForceFrom.Equal(at) {
			t.Fatalf("%s in force from %v, %s from %v: one publication, one instant", pub.Versions[0].Designation, at, h.Designation, h.InForceFrom)
		}
		if !h.RecordedAt.Equal(pub.Versions[0].RecordedAt) {
			t.Fatalf("%s recorded at %v, %s at %v: one transaction, one time", pub.Versions[0].Designation, pub.Versions[0].RecordedAt, h.Designation, h.RecordedAt)
		}
	}
	for i, c := range during {
		if c != 0 && c != n {
			t.Errorf("asked at %v during the publication: %d of %d in force", samples[i], c, n)
		}
	}
	if len(samples) < 2 {
		t.Errorf("only %d look-ups during the publication", len(samples))
	}
	// Afterwards, as of every instant asked about, of 50 instants spread
	// over the publication, and of the commit and the microsecond before.
	// (Of the instants asked about, 20 spread over them and the last 10,
	// those nearest the commit: each look-up now lists 20 000 heights.)
	var asked []time.Time
	for i, s := range samples {
		if i%max(1, len(samples)/20) == 0 || i >= len(samples)-10 {
			asked = append(asked, s)
		}
	}
	for i := range 50 {
		asked = append(asked, start.Add(end.Sub(start)*time.Duration(i)/49))
	}
	asked = append(asked, at.Add(-time.Microsecond), at, pub.Versions[0].RecordedAt)
	for _, a := range asked {
		c, lastIn, err := inForce(a)
		if err != nil {
			t.Fatal(err)
		}
		want := 0
		if !a.Before(at) {
			want = n
		}
		if c != want || lastIn != (want == n) {
			t.Errorf("as of %s (commit at %s): %d of %d in force, the last mark's %v; want %d", a.Format(time.RFC3339Nano), at.Format(time.RFC3339Nano), c, n, lastIn, want)
		}
	}
	t.Logf("published in %v; %d look-ups during it, %d after", end.Sub(start), len(samples), len(asked))
	rep, err := fx.Reg.AuditVerify(context.Background())
	if err != nil || len(rep.Breaks) != 0 {
		t.Fatalf("audit: %v %+v", err, rep.Breaks)
	}
}

// cairn refuses to write when the server's clock is more than
// ClockTolerance from its own, either way, and writes nothing.
func TestClockFarFromThisComputerRefused(t *testing.T) {
	t.Parallel()
	for _, off := range []time.Duration{-ClockTolerance - time.Minute, ClockTolerance + time.Minute} {
		fx := registertest.Setup(t)
		before := fx.Counts(t)
		r := New(fx.DB.Pool)
		// This computer's clock, as r sees it, off from the server's.
		SetClock(r, func() time.Time { return time.Now().Add(-off) })
		_, err := r.DatumAdd(fx.Ctx, DatumAddParams{Code: "NAVD88", Name: "North American Vertical Datum of 1988", By: "test"})
		var ce *ClockError
		want := "ahead of"
		if off < 0 {
			want = "behind"
		}
		if !errors.As(err, &ce) || !strings.Contains(err.Error(), want) || !strings.Contains(err.Error(), "5m0s") {
			t.Errorf("server clock %v from this computer's: %v, want a ClockError saying %q", off, err, want)
		}
		fx.AssertNothingWritten(t, before)
		// Reading goes on.
		if _, err := r.DatumList(fx.Ctx); err != nil {
			t.Errorf("reading with the clock off: %v", err)
		}
		// Within the tolerance, it writes.
		SetClock(r, func() time.Time { return time.Now().Add(-ClockTolerance / 2) })
		if _, err := r.DatumAdd(fx.Ctx, DatumAddParams{Code: "NAVD88", Name: "North American Vertical Datum of 1988", By: "test"}); err != nil {
			t.Errorf("server clock %v from this computer's: %v", ClockTolerance/2, err)
		}
	}
}

// A chain whose versions span schema v12 verifies: the versions from
// before it (no login, layout 1 of the canonical text) and after it
// (layout 2, with the login).
func TestAuditAcrossLayouts(t *testing.T) {
	t.Parallel()
	fx := registertest.Setup(t)
	fx.Datum(t, registertest.DatumOpts{})
	fx.Mark(t, registertest.MarkOpts{Designation: "TC-0412"})
	ctx := context.Background()
	conn, err := fx.DB.Pool.Acquire(ctx)
	if err != nil {
		t.Fatal(err)
	}
	// A version as schema v11 wrote it: layout 1, no login, no
	// transaction, its time from the clock.
	for _, q := range []string{
		"SET session_replication_role = replica",
		`INSERT INTO height (mark_id, datum_id, version, value, unit, decimals, source_kind, source, reason, recorded_by, recorded_at, hash)
		 SELECT m.id, d.id, 1, 769.83, 'usft', 2, 'authority', 'Tallis County Benchmark Book (invented)', 'entered', 'old hand', '2020-01-01T00:00:00Z', '\x00'
		 FROM mark m, datum d`,
		`UPDATE height h SET created_xid = NULL, recorded_role = NULL, hash = sha256(convert_to(height_canonical(NULL, m.designation, d.code, h), 'UTF8'))
		 FROM mark m, datum d WHERE m.id = h.mark_id AND d.id = h.datum_id`,
		"SET session_replication_role = origin",
	} {
		if _, err := conn.Exec(ctx, q); err != nil {
			t.Fatalf("%s: %v", q, err)
		}
	}
	conn.Release()
	// A version as schemas v12 to v16 wrote it: layout 2, no in-force time
	// of its own (in force from its commit).
	conn, err = fx.DB.Pool.Acquire(ctx)
	if err != nil {
		t.Fatal(err)
	}
	for _, q := range []string{
		"SET session_replication_role = replica",
		`INSERT INTO height (mark_id, datum_id, version, supersedes, value, unit, decimals, source_kind, source, reason, recorded_by, recorded_at, recorded_role, hash)
		 SELECT m.id, d.id, 2, h.id, 769.85, 'usft', 2, 'authority', 'Tallis County control sheet (invented)', 'entered', 'old hand', '2021-01-01T00:00:00Z', 'clerk', '\x00'
		 FROM mark m, datum d, height h`,
		`UPDATE height h SET created_xid = NULL, hash = sha256(convert_to(height_canonical_v2(p.hash, m.designation, d.code, h), 'UTF8'))
		 FROM mark m, datum d, height p WHERE m.id = h.mark_id AND d.id = h.datum_id AND h.version = 2 AND p.id = h.supersedes`,
		"SET session_replication_role = origin",
	} {
		if _, err := conn.Exec(ctx, q); err != nil {
			t.Fatalf("%s: %v", q, err)
		}
	}
	conn.Release()
	v3 := fx.Height(t, registertest.HeightOpts{Designation: "TC-0412", Value: "769.88", Unit: "usft", Kind: KindCorrection, Source: "errata (invented)", Reason: "transcription error", By: "test"})
	hv, err := fx.Reg.History(ctx, "TC-0412", "")
	if err != nil || len(hv.Versions) != 3 {
		t.Fatalf("history: %v, %d versions", err, len(hv.Versions))
	}
	old, v2 := hv.Versions[2].Height, hv.Versions[1].Height
	if old.RecordedRole != nil || !strings.HasPrefix(Canonical(nil, old), "cairn-height:1:1\n") {
		t.Errorf("the old version: role %v, layout %q", old.RecordedRole, Canonical(nil, old)[:16])
	}
	if v2.RecordedRole == nil || v2.InForceGiven != nil || !strings.HasPrefix(Canonical(old.Hash, v2), "cairn-height:1:2\n") ||
		!strings.HasSuffix(Canonical(old.Hash, v2), "recorded_role:"+strconv.Itoa(len(*v2.RecordedRole))+":"+*v2.RecordedRole+"\n") {
		t.Errorf("the v12 version: role %v, text %q", v2.RecordedRole, Canonical(old.Hash, v2))
	}
	if v3.InForceGiven == nil || !strings.HasPrefix(Canonical(v2.Hash, v3), "cairn-height:1:3\n") ||
		!strings.HasSuffix(Canonical(v2.Hash, v3), "in_force_from:27:"+v3.InForceGiven.UTC().Format("2006-01-02T15:04:05.000000Z")+"\n") {
		t.Errorf("the new version: in force %v, text %q", v3.InForceGiven, Canonical(v2.Hash, v3))
	}
	rep, err := fx.Reg.AuditVerify(ctx)
	if err != nil || len(rep.Breaks) != 0 || rep.Versions != 3 {
		t.Fatalf("audit: %v %+v", err, rep)
	}
	// The in-force time is sealed: changed on the new version, or given to
	// the v12 one, the audit finds each.
	for _, q := range []string{
		"UPDATE height SET in_force_from = in_force_from - interval '1 day' WHERE version = 3",
		"UPDATE height SET in_force_from = '2021-01-01T00:00:00Z' WHERE version = 2",
	} {
		conn, err := fx.DB.Pool.Acquire(ctx)
		if err != nil {
			t.Fatal(err)
		}
		for _, q := range []string{"SET session_replication_role = replica", q, "SET session_replication_role = origin"} {
			if _, err := conn.Exec(ctx, q); err != nil {
				t.Fatalf("%s: %v", q, err)
			}
		}
		conn.Release()
		if rep, err := fx.Reg.AuditVerify(ctx); err != nil || len(rep.Breaks) == 0 ||
			!slices.ContainsFunc(rep.Breaks, func(b Break) bool { return strings.Contains(b.Problem, "hash does not match") }) {
			t.Fatalf("audit after %s: %v %+v", q, err, rep)
		}
	}
	// The login is sealed: changed, the audit finds it.
	conn, err = fx.DB.Pool.Acquire(ctx)
	if err != nil {
		t.Fatal(err)
	}
	defer conn.Release()
	for _, q := range []string{"SET session_replication_role = replica",
		"UPDATE height SET recorded_role = 'somebody' WHERE version = 3",
		"SET session_replication_role = origin"} {
		if _, err := conn.Exec(ctx, q); err != nil {
			t.Fatalf("%s: %v", q, err)
		}
	}
	if rep, err := fx.Reg.AuditVerify(ctx); err != nil || len(rep.Breaks) != 2 {
		t.Fatalf("audit after the login was changed too (two versions broken, v2 and v3): %v %+v", err, rep)
	}
}
