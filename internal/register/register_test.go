package register_test

import (
	"errors"
	"fmt"
	"math"
	"reflect"
	"strings"
	"testing"
	"time"

	"cairn/internal/register"
	"cairn/internal/registertest"
	"cairn/internal/store"
)

// setup gives a register with datum NAVD88 and mark TC-0412 at 41.62,
// -97.95.
func setup(t *testing.T) *registertest.Bundle {
	t.Helper()
	b := registertest.Setup(t)
	b.Datum(t, registertest.DatumOpts{})
	b.Mark(t, registertest.MarkOpts{Designation: "TC-0412"})
	return b
}

// set records value (in unit) on TC-0412.
func set(t *testing.T, b *registertest.Bundle, value, unit string) store.Height {
	t.Helper()
	return b.Height(t, registertest.HeightOpts{Designation: "TC-0412", Value: value, Unit: unit})
}

// What the register said, at each instant, was in force then
// (--known-at alone): a version is known from its commit.
func TestHeightAsOf(t *testing.T) {
	t.Parallel()
	b := setup(t)
	v1, v2, v3 := set(t, b, "769.83", "usft"), set(t, b, "769.88", "usft"), set(t, b, "234.662", "m")
	if !(v1.CommittedAt.Before(v2.CommittedAt) && v2.CommittedAt.Before(v3.CommittedAt)) {
		t.Fatalf("commit times not increasing: %v %v %v", v1.CommittedAt, v2.CommittedAt, v3.CommittedAt)
	}
	mid := func(a, b time.Time) time.Time { return a.Add(b.Sub(a) / 2) }
	for _, c := range []struct {
		name string
		at   time.Time
		want int // version, 0 for none
	}{
		{"before t1", v1.CommittedAt.Add(-time.Microsecond), 0},
		{"at t1", v1.CommittedAt, 1},
		// Written (recorded_at) but not yet committed: not known then.
		{"at t1's write time", v1.RecordedAt, 0},
		{"between t1 and t2", mid(v1.CommittedAt, v2.CommittedAt), 1},
		{"between t2 and t3", mid(v2.CommittedAt, v3.CommittedAt), 2},
		{"after t3", v3.CommittedAt.Add(time.Hour), 3},
	} {
		at := c.at
		v, err := b.Reg.HeightShow(b.Ctx, register.HeightShowParams{Designation: "TC-0412", Datum: "NAVD88", KnownAt: &at})
		if err != nil {
			t.Fatal(err)
		}
		got := 0
		if len(v.Heights) > 1 {
			t.Fatalf("%s: %d versions in force", c.name, len(v.Heights))
		}
		if len(v.Heights) == 1 {
			got = v.Heights[0].Version
		}
		if got != c.want {
			t.Errorf("%s: version %d in force, want %d", c.name, got, c.want)
		}
	}
}

// UPDATE, DELETE and TRUNCATE of history are refused by the database, for
// the tables' owner (the test connects as the owner, a superuser) too.
func TestHistoryIsAppendOnly(t *testing.T) {
	t.Parallel()
	b := setup(t)
	set(t, b, "769.83", "usft")
	b.Condition(t, registertest.ConditionOpts{Designation: "TC-0412", Condition: "good",
		ObservedOn: time.Date(2024, 5, 1, 0, 0, 0, 0, time.UTC)})
	var owner string
	if err := b.DB.Pool.QueryRow(b.Ctx, "SELECT tableowner FROM pg_tables WHERE tablename = 'height'").Scan(&owner); err != nil {
		t.Fatal(err)
	}
	var me string
	if err := b.DB.Pool.QueryRow(b.Ctx, "SELECT current_user").Scan(&me); err != nil {
		t.Fatal(err)
	}
	if owner != me {
		t.Fatalf("test connects as %s, table owner is %s", me, owner)
	}
	before := b.Counts(t)
	for _, sql := range []string{
		"UPDATE height SET value = 769.84",
		"UPDATE height SET reason = 'rewritten'",
		"DELETE FROM height",
		"TRUNCATE height",
		"TRUNCATE height CASCADE",
		"UPDATE mark_condition SET condition = 'destroyed'",
		"DELETE FROM mark_condition",
		"TRUNCATE mark_condition",
		"TRUNCATE mark_condition CASCADE",
	} {
		_, err := b.DB.Pool.Exec(b.Ctx, sql)
		// Tables that later tables reference refuse a TRUNCATE without
		// CASCADE before their triggers run.
		if err == nil || !strings.Contains(err.Error(), "append-only") && !strings.Contains(err.Error(), "referenced in a foreign key constraint") {
			t.Errorf("%s: err = %v, want a refusal saying history is append-only", sql, err)
		}
	}
	var value string
	if err := b.DB.Pool.QueryRow(b.Ctx, "SELECT value::text FROM height").Scan(&value); err != nil || value != "769.83" {
		t.Fatalf("value after refused changes: %q, %v", value, err)
	}
	b.AssertNothingWritten(t, before)
	_, err := b.DB.Pool.Exec(b.Ctx, "UPDATE mark SET designation = 'TC-9999'")
	if err == nil || !strings.Contains(err.Error(), "never changes") {
		t.Errorf("renaming a mark: err = %v, want a refusal", err)
	}
}

// A version must supersede the latest one: a stale writer gets a conflict
// and writes nothing.
func TestStaleSupersedesConflicts(t *testing.T) {
	t.Parallel()
	b := setup(t)
	v1 := set(t, b, "769.83", "usft")
	set(t, b, "769.88", "usft")
	before := b.Counts(t)
	value, unit, dec := "769.90", "usft", 2
	_, err := store.HeightInsert(b.Ctx, b.DB.Pool, store.HeightInsertParams{MarkID: v1.MarkID, DatumID: v1.DatumID,
		Supersedes: &v1.ID, Value: &value, Unit: &unit, Decimals: &dec, SourceKind: "authority", Source: "x",
		Reason: "stale", RecordedBy: "tester"})
	if !errors.Is(err, store.ErrConflict) {
		t.Fatalf("superseding an old version: err = %v, want ErrConflict", err)
	}
	_, err = store.HeightInsert(b.Ctx, b.DB.Pool, store.HeightInsertParams{MarkID: v1.MarkID, DatumID: v1.DatumID,
		Value: &value, Unit: &unit, Decimals: &dec, SourceKind: "authority", Source: "x",
		Reason: "second first version", RecordedBy: "tester"})
	if !errors.Is(err, store.ErrConflict) {
		t.Fatalf("a second first version: err = %v, want ErrConflict", err)
	}
	b.AssertNothingWritten(t, before)
	rep, err := b.Reg.AuditVerify(b.Ctx)
	if err != nil || len(rep.Breaks) != 0 || rep.Versions != 2 {
		t.Fatalf("audit after refused writes: %+v, %v", rep, err)
	}
}

// 769.83 usft is kept as written; converted exactly it is 234.645 m.
// Source: 1 usft = 1200/3937 m (Federal Register Vol. 85 No. 193, 5 Oct 2020,
// NIST and NOAA/NGS). 769.83 × 1200/3937 = 923796/3937 = 234.64465... m,
// which rounds to 234.645 m at the millimetre.
func TestUnitRoundTrip(t *testing.T) {
	t.Parallel()
	b := setup(t)
	set(t, b, "769.83", "usft")
	var stored, unit string
	if err := b.DB.Pool.QueryRow(b.Ctx, "SELECT value::text, unit FROM height").Scan(&stored, &unit); err != nil {
		t.Fatal(err)
	}
	if stored != "769.83" || unit != "usft" {
		t.Fatalf("stored %s %s, want 769.83 usft", stored, unit)
	}
	v, err := b.Reg.HeightShow(b.Ctx, register.HeightShowParams{Designation: "TC-0412"})
	if err != nil {
		t.Fatal(err)
	}
	h := v.Heights[0]
	if *h.Value != "769.83" || *h.Unit != "usft" || *h.Decimals != 2 {
		t.Fatalf("read back %s %s (%d decimals), want 769.83 usft (2)", *h.Value, *h.Unit, *h.Decimals)
	}
}

// The change between versions is exact, converting when units differ.
func TestHistoryChanges(t *testing.T) {
	t.Parallel()
	b := setup(t)
	set(t, b, "769.83", "usft")
	set(t, b, "769.88", "usft")
	// 769.88 usft = 769.88 × 1200/3937 m = 234.65989... m; 234.662 − 234.65989 = +0.00211 → +0.002 m.
	set(t, b, "234.662", "m")
	hv, err := b.Reg.History(b.Ctx, "TC-0412", "")
	hs := hv.Versions
	if err != nil {
		t.Fatal(err)
	}
	want := []string{"+0.002", "+0.05", ""}
	if len(hs) != 3 {
		t.Fatalf("%d versions, want 3", len(hs))
	}
	for i, h := range hs {
		got := ""
		if h.Change != nil {
			got = *h.Change
		}
		if h.Version != 3-i || got != want[i] {
			t.Errorf("entry %d: version %d change %q, want version %d change %q", i, h.Version, got, 3-i, want[i])
		}
	}
}

// Near search distances against hand computation with the haversine
// formula, d = 2R asin √(sin²(Δφ/2) + cos φ1 cos φ2 sin²(Δλ/2)), R =
// 6371.0088 km (IUGG mean radius R1 of GRS 80, Moritz 2000).
func TestMarkListNear(t *testing.T) {
	t.Parallel()
	b := setup(t) // TC-0412 at 41.62, -97.95: the search point itself
	// Along the parallel, Δλ = 0.02°: cos 41.62° = 0.7475663, sin 0.01° =
	// 1.7453292e-4, √a = 0.7475663 × 1.7453292e-4 = 1.3047494e-4,
	// d = 2 × 6371008.8 m × asin(1.3047494e-4) = 1662.514 m.
	b.Mark(t, registertest.MarkOpts{Designation: "TC-0413", Lat: ptr(41.62), Lon: ptr(-97.93)})
	// Along the meridian, Δφ = 0.01°: d = R Δφ = 6371008.8 m × 0.01 × π/180 = 1111.951 m.
	b.Mark(t, registertest.MarkOpts{Designation: "TC-0414", Lat: ptr(41.63), Lon: ptr(-97.95)})
	// Δφ = 0.02°: 2223.902 m, outside 2 km.
	b.Mark(t, registertest.MarkOpts{Designation: "TC-0415", Lat: ptr(41.64), Lon: ptr(-97.95)})
	ms, err := b.Reg.MarkList(b.Ctx, register.MarkListParams{Near: &store.LatLon{Lat: 41.62, Lon: -97.95}, RadiusM: 2000})
	if err != nil {
		t.Fatal(err)
	}
	want := []struct {
		des string
		m   float64
	}{{"TC-0412", 0}, {"TC-0414", 1111.951}, {"TC-0413", 1662.514}}
	if len(ms) != len(want) {
		t.Fatalf("%d marks within 2 km, want %d", len(ms), len(want))
	}
	for i, w := range want {
		if ms[i].Designation != w.des || math.Abs(*ms[i].DistanceM-w.m) > 0.001 {
			t.Errorf("%d: %s at %.4f m, want %s at %.3f m (±1 mm)", i, ms[i].Designation, *ms[i].DistanceM, w.des, w.m)
		}
	}
}

func TestDidYouMean(t *testing.T) {
	t.Parallel()
	b := setup(t)
	_, err := b.Reg.MarkShow(b.Ctx, "TC-0421")
	var ie *register.InputError
	if !errors.As(err, &ie) || ie.Field != "designation" || !strings.Contains(err.Error(), "did you mean TC-0412?") {
		t.Fatalf("err = %v, want a designation error suggesting TC-0412", err)
	}
	_, err = b.Reg.HeightShow(b.Ctx, register.HeightShowParams{Designation: "TC-0412", Datum: "NAVD 88"})
	if !errors.As(err, &ie) || ie.Field != "datum" || !strings.Contains(err.Error(), "did you mean NAVD88?") {
		t.Fatalf("err = %v, want a datum error suggesting NAVD88", err)
	}
}

// At the size of a national register "did you mean" names the mark one
// edit away, or none, never another mark. With 10,000 designations AA0000
// to AA9999 before it, AB0826X was once answered AA0826 (two edits: the
// first 10,000 designations starting with A were all it read), not AB0826
// (one edit). A register larger than one read is read by prefixes of what
// was typed; BB0826XY, one edit from AB0826XY, is never read for it, so
// AB0826 (two edits) is not offered either.
func TestDidYouMeanAtScale(t *testing.T) {
	t.Parallel()
	b := setup(t)
	designations := []string{"AB0826", "BB0826XY"}
	for i := range 10000 {
		designations = append(designations, fmt.Sprintf("AA%04d", i))
	}
	tx, err := b.DB.Pool.Begin(b.Ctx)
	if err != nil {
		t.Fatal(err)
	}
	defer tx.Rollback(b.Ctx)
	if _, err := store.MarkInsertMany(b.Ctx, tx, store.MarkInsertManyParams{Designations: designations, CreatedBy: registertest.By}); err != nil {
		t.Fatal(err)
	}
	if err := tx.Commit(b.Ctx); err != nil {
		t.Fatal(err)
	}
	cases := []struct{ typed, want string }{
		{"AB0826X", "(did you mean AB0826?)"},
		{"ab-0826", ""}, // the mark itself, by its folded form
		{"AB0862", "(did you mean AB0826?)"},
		{"AB0826XY", ""},
		{"AD0826Y", ""}, // AA0826 is two edits away; BD... could be one
		{"AA0826Z", "(did you mean AA0826?)"},
		{"A", ""},
	}
	for _, c := range cases {
		_, err := b.Reg.MarkShow(b.Ctx, c.typed)
		if c.typed == "ab-0826" {
			if err == nil || !strings.Contains(err.Error(), "did you mean AB0826?") {
				t.Errorf("%s: %v, want a hint of AB0826", c.typed, err)
			}
			continue
		}
		var ie *register.InputError
		if !errors.As(err, &ie) || ie.Field != "designation" {
			t.Errorf("%s: %v, want a designation error", c.typed, err)
			continue
		}
		if c.want == "" && strings.Contains(err.Error(), "did you mean") || c.want != "" && !strings.HasSuffix(err.Error(), c.want) {
			t.Errorf("%s: %v, want hint %q", c.typed, err, c.want)
		}
	}
}

// The audit recomputes the same hashes as the database writes.
func TestCanonicalMatchesDatabase(t *testing.T) {
	t.Parallel()
	b := setup(t)
	set(t, b, "769.83", "usft")
	withdrawn := time.Date(2024, 6, 10, 0, 0, 0, 0, time.UTC)
	if _, err := b.Reg.HeightSet(b.Ctx, register.HeightSetParams{Designation: "TC-0412", Datum: "NAVD88", Kind: register.KindWithdrawal,
		Reason: "mark reported destroyed: tab:\t newline:\n quote:' unicode: ±°", RecordedBy: "tester",
		InForceFrom: &withdrawn}); err != nil {
		t.Fatal(err)
	}
	rep, err := b.Reg.AuditVerify(b.Ctx)
	if err != nil {
		t.Fatal(err)
	}
	if rep.Chains != 1 || rep.Versions != 2 || len(rep.Breaks) != 0 {
		t.Fatalf("audit %+v, want 1 chain of 2 versions and no break", rep)
	}
}

// The chains are read a chunk of mark ids at a time, the designations of
// each chunk's marks first and matched to its versions as both stream in
// mark order (store.HeightChainRows). With chunks of 4 mark ids over 30
// marks (ids not all taken: a mark of the middle removed behind the
// register's back) the audit finds what it finds in one chunk: every
// other version's hash verifies against what the database wrote
// (height_canonical, migrations/00001: so every designation was matched
// to its own versions), the edit of TC-0521's second version is reported
// once, and the versions of the removed mark are reported as having no
// mark, not skipped. Not parallel: it sets the package's chunk.
func TestAuditChainsInChunks(t *testing.T) {
	b := registertest.Setup(t)
	b.Datum(t, registertest.DatumOpts{})
	var names []string
	for i := range 30 {
		names = append(names, fmt.Sprintf("TC-%04d", 500+i))
	}
	b.Marks(t, names...)
	for _, n := range names {
		b.Height(t, registertest.HeightOpts{Designation: n, Value: "10.000"})
		b.Height(t, registertest.HeightOpts{Designation: n, Value: "10.004"})
	}
	if _, err := b.DB.Pool.Exec(b.Ctx, `BEGIN; SET LOCAL session_replication_role = replica;
		UPDATE height SET reason = 'edited' WHERE mark_id = (SELECT id FROM mark WHERE designation = 'TC-0521') AND version = 2;
		DELETE FROM mark WHERE designation = 'TC-0513'; COMMIT`); err != nil {
		t.Fatal(err)
	}
	defer func(was int64) { store.ChainChunk = was }(store.ChainChunk)
	for _, chunk := range []int64{4, 1000} {
		store.ChainChunk = chunk
		rep, err := b.Reg.AuditVerify(b.Ctx)
		if err != nil {
			t.Fatal(err)
		}
		var edited, orphans int
		for _, br := range rep.Breaks {
			switch {
			case br.Designation == "TC-0521" && br.Version == 2 && strings.HasPrefix(br.Problem, "hash does not match"):
				edited++
			case br.Designation == "" && strings.Contains(br.Problem, "is not in the mark table"):
				orphans++
			default:
				t.Errorf("chunks of %d: unexpected break %+v", chunk, br)
			}
		}
		if rep.Chains != 30 || rep.Versions != 60 || edited != 1 || orphans != 2 {
			t.Errorf("chunks of %d: %d chains, %d versions, %d edits and %d versions without a mark found; want 30, 60, 1 and 2: %+v",
				chunk, rep.Chains, rep.Versions, edited, orphans, rep.Breaks)
		}
	}
}

// The audit divided among worker transactions (here 4, a worker for
// every 7 mark ids) finds what one transaction finds: the same chains
// and versions, and a hash edited behind the register's back in the
// chains of the third worker, reported once, as in one transaction. Not
// parallel: it sets the package's split.
func TestAuditVerifyInParts(t *testing.T) {
	b := registertest.Setup(t)
	b.Datum(t, registertest.DatumOpts{})
	var names []string
	for i := range 30 {
		names = append(names, fmt.Sprintf("TC-%04d", 500+i))
	}
	b.Marks(t, names...)
	for _, n := range names {
		b.Height(t, registertest.HeightOpts{Designation: n, Value: "10.000"})
		b.Height(t, registertest.HeightOpts{Designation: n, Value: "10.004"})
	}
	if _, err := b.DB.Pool.Exec(b.Ctx, `BEGIN; SET LOCAL session_replication_role = replica;
		UPDATE height SET reason = 'edited' WHERE mark_id = (SELECT id FROM mark WHERE designation = 'TC-0521') AND version = 2; COMMIT`); err != nil {
		t.Fatal(err)
	}
	whole := register.SetAuditSplit(1, 1000)
	one, err := b.Reg.AuditVerify(b.Ctx)
	whole()
	if err != nil {
		t.Fatal(err)
	}
	restore := register.SetAuditSplit(4, 7)
	defer restore()
	parts, err := b.Reg.AuditVerify(b.Ctx)
	if err != nil {
		t.Fatal(err)
	}
	if one.Chains != 30 || one.Versions != 60 || len(one.Breaks) != 1 || one.Breaks[0].Designation != "TC-0521" {
		t.Fatalf("one transaction: %d chains, %d versions, breaks %+v; want 30, 60 and the edit of TC-0521", one.Chains, one.Versions, one.Breaks)
	}
	if parts.Chains != one.Chains || parts.Versions != one.Versions || !reflect.DeepEqual(parts.Breaks, one.Breaks) {
		t.Errorf("in parts: %d chains, %d versions, breaks %+v; one transaction: %d, %d, %+v",
			parts.Chains, parts.Versions, parts.Breaks, one.Chains, one.Versions, one.Breaks)
	}
}
