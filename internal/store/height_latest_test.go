package store_test

import (
	"testing"
	"time"

	"cairn/internal/register"
	"cairn/internal/registertest"
	"cairn/internal/store"
)

// HeightLatestMany says of each latest version whether it is the one in
// force now by the shortcut for a chain's latest version
// (heightCurrentOfLatest), and the shortcut agrees with the rule as
// HeightCurrent applies it (docs/register.md: the version in force from
// the latest time, the later recorded of two from the same time) in each
// case of a chain: a latest version in force from its own commit (an
// adjustment's), one whose source gives a time after every earlier
// version's, one that corrects the past (in force from before an earlier
// version given a time, and from before an earlier adjustment's commit),
// and a tie of in-force times.
func TestHeightLatestManyCurrentAsTheRule(t *testing.T) {
	t.Parallel()
	fx := registertest.Setup(t)
	fx.Datum(t, registertest.DatumOpts{})
	runs := fx.WorkedCircuit(t, registertest.WorkedCircuitOpts{})
	v := fx.Adjustment(t, registertest.AdjustmentOpts{Runs: runs})
	fx.Publication(t, v.Adjustment.ID, registertest.PublicationOpts{})
	marks := map[string]store.Mark{}
	for _, d := range []string{"BM1", "BM2", "BM3", "BM4"} {
		m, err := store.MarkGet(fx.Ctx, fx.DB.Pool, store.MarkGetParams{Designation: d})
		if err != nil {
			t.Fatal(err)
		}
		marks[d] = m
	}
	day := func(y int) *time.Time {
		at := time.Date(y, 6, 1, 0, 0, 0, 0, time.UTC)
		return &at
	}
	check := func(step string, want map[string]bool) {
		t.Helper()
		ids := make([]int64, 0, len(marks))
		for _, m := range marks {
			ids = append(ids, m.ID)
		}
		datum := v.Adjustment.DatumID
		latest, err := store.HeightLatestMany(fx.Ctx, fx.DB.Pool, store.HeightLatestManyParams{MarkIDs: ids, DatumID: datum})
		if err != nil {
			t.Fatal(err)
		}
		for d, m := range marks {
			h, ok := latest[m.ID]
			if !ok {
				t.Fatalf("%s: %s has no latest version", step, d)
			}
			cur, err := store.HeightCurrent(fx.Ctx, fx.DB.Pool, store.HeightLatestParams{MarkID: m.ID, DatumID: datum})
			if err != nil {
				t.Fatal(err)
			}
			if h.Current != (cur.ID == h.ID) {
				t.Errorf("%s: %s version %d: Current %v, but the version in force is version %d", step, d, h.Version, h.Current, cur.Version)
			}
			if w, ok := want[d]; ok && h.Current != w {
				t.Errorf("%s: %s version %d: Current %v, want %v", step, d, h.Version, h.Current, w)
			}
		}
	}
	// BM1: its outside height, given in force now; BM2 to BM4: the
	// adjustment's, in force from its commit.
	check("published", map[string]bool{"BM1": true, "BM2": true, "BM3": true, "BM4": true})
	// BM2 corrected back to 2001: the adjustment's commit is later.
	fx.Height(t, registertest.HeightOpts{Designation: "BM2", Value: "729.000", Source: "sheet of 2001 (invented)", InForceFrom: day(2001)})
	// BM3 given a time now: after the adjustment's commit.
	bm3 := fx.Height(t, registertest.HeightOpts{Designation: "BM3", Value: "729.100", Source: "sheet of today (invented)"})
	// BM4: in force from 2010, before the adjustment's commit.
	fx.Height(t, registertest.HeightOpts{Designation: "BM4", Value: "729.200", Source: "sheet of 2010 (invented)", InForceFrom: day(2010)})
	check("corrections", map[string]bool{"BM1": true, "BM2": false, "BM3": true, "BM4": false})
	// BM3 again from the same time as its version before (a tie: the
	// later recorded is in force); BM4 from 2005, under its 2010 version.
	at := bm3.InForceFrom
	fx.Height(t, registertest.HeightOpts{Designation: "BM3", Value: "729.150", Source: "sheet of today, again (invented)", InForceFrom: &at})
	fx.Height(t, registertest.HeightOpts{Designation: "BM4", Value: "729.300", Source: "sheet of 2005 (invented)", InForceFrom: day(2005)})
	check("a tie and the past corrected", map[string]bool{"BM3": true, "BM4": false})
	// BM1 corrected to before its own version's time: not in force.
	fx.Height(t, registertest.HeightOpts{Designation: "BM1", Value: "728.731", Source: "sheet of 1990 (invented)", InForceFrom: day(1990)})
	check("BM1 corrected", map[string]bool{"BM1": false})
}

// HeightCurrentByMarks, which takes each chain's first version in force
// from the latest time, then recorded latest, lists exactly the versions
// heightCurrent calls current when applied to every version of every chain
// (HeightHistory), in each case of a chain: versions in force from their
// own commit (an adjustment's), versions given a time, corrections of the
// past, a tie, and a second datum.
func TestHeightCurrentByMarksAsTheRule(t *testing.T) {
	t.Parallel()
	fx := registertest.Setup(t)
	fx.Datum(t, registertest.DatumOpts{})
	other := fx.Datum(t, registertest.DatumOpts{Code: "OBLD61"})
	runs := fx.WorkedCircuit(t, registertest.WorkedCircuitOpts{})
	v := fx.Adjustment(t, registertest.AdjustmentOpts{Runs: runs})
	fx.Publication(t, v.Adjustment.ID, registertest.PublicationOpts{})
	var ids []int64
	names := map[int64]string{}
	for _, d := range []string{"BM1", "BM2", "BM3", "BM4", "BM5", "BM6"} {
		m, err := store.MarkGet(fx.Ctx, fx.DB.Pool, store.MarkGetParams{Designation: d})
		if err != nil {
			t.Fatal(err)
		}
		ids, names[m.ID] = append(ids, m.ID), d
	}
	day := func(y int) *time.Time {
		at := time.Date(y, 6, 1, 0, 0, 0, 0, time.UTC)
		return &at
	}
	check := func(step string) {
		t.Helper()
		want := map[int64]bool{}
		for _, id := range ids {
			hs, err := store.HeightHistory(fx.Ctx, fx.DB.Pool, store.HeightHistoryParams{MarkID: id})
			if err != nil {
				t.Fatal(err)
			}
			for _, h := range hs {
				if h.Current {
					want[h.ID] = true
				}
			}
		}
		got, err := store.HeightCurrentByMarks(fx.Ctx, fx.DB.Pool, ids)
		if err != nil {
			t.Fatal(err)
		}
		seen := map[int64]bool{}
		for _, h := range got {
			seen[h.ID] = true
			if !want[h.ID] || !h.Current {
				t.Errorf("%s: %s on %s version %d is listed as in force; the rule says not", step, names[h.MarkID], h.DatumCode, h.Version)
			}
		}
		for id := range want {
			if !seen[id] {
				t.Errorf("%s: version %d, in force by the rule, is not listed", step, id)
			}
		}
		if len(want) == 0 {
			t.Fatalf("%s: nothing in force", step)
		}
	}
	check("published")
	fx.Height(t, registertest.HeightOpts{Designation: "BM1", Datum: other.Code, Value: "112.470", Unit: "ft", Source: "works book of 1961 (invented)", InForceFrom: day(1961)})
	fx.Height(t, registertest.HeightOpts{Designation: "BM2", Value: "729.000", Source: "sheet of 2001 (invented)", InForceFrom: day(2001)})
	bm3 := fx.Height(t, registertest.HeightOpts{Designation: "BM3", Value: "729.100", Source: "sheet of today (invented)"})
	fx.Height(t, registertest.HeightOpts{Designation: "BM4", Value: "729.200", Source: "sheet of 2010 (invented)", InForceFrom: day(2010)})
	check("corrections")
	at := bm3.InForceFrom
	fx.Height(t, registertest.HeightOpts{Designation: "BM3", Value: "729.150", Source: "sheet of today, again (invented)", InForceFrom: &at})
	fx.Height(t, registertest.HeightOpts{Designation: "BM4", Value: "729.300", Source: "sheet of 2005 (invented)", InForceFrom: day(2005)})
	fx.Height(t, registertest.HeightOpts{Designation: "BM1", Datum: other.Code, Value: "112.480", Unit: "ft", Source: "works book of 1958 (invented)", InForceFrom: day(1958)})
	check("a tie and the past corrected")
	fx.Height(t, registertest.HeightOpts{Designation: "BM1", Value: "728.731", Source: "sheet of 1990 (invented)", InForceFrom: day(1990)})
	// A second adjustment of the same runs, published over the
	// corrections: in force from its commit.
	v2 := fx.Adjustment(t, registertest.AdjustmentOpts{Runs: runs, Edit: func(p *register.AdjustParams) { p.Datum = "NAVD88" }})
	fx.Publication(t, v2.Adjustment.ID, registertest.PublicationOpts{})
	check("published again")
}
