package store_test

import (
	"fmt"
	"reflect"
	"testing"

	"cairn/internal/registertest"
	"cairn/internal/store"
)

// HeightInsertMany returns the versions from the insert itself, with the
// designations and datum code it was given, in place of reading them
// again; what it returns is what a plain read of the rows
// (HeightListByIDs, every column from the table and its joins, Current
// by the rule heightCurrent) gives in the same transaction, field by
// field, in the same order (by designation: here the results' order is not
// the designations'), for a first version and for versions that
// supersede one.
func TestHeightInsertManyAsRead(t *testing.T) {
	t.Parallel()
	fx := registertest.Setup(t)
	d := fx.Datum(t, registertest.DatumOpts{})
	// Results in the order TC-0300, TC-0100, TC-0250, TC-0200; TC-0100
	// and TC-0250 have a version already.
	names := []string{"TC-0300", "TC-0100", "TC-0250", "TC-0200"}
	marks := map[string]store.Mark{}
	for _, n := range names {
		marks[n] = fx.Mark(t, registertest.MarkOpts{Designation: n, NoPosition: true})
	}
	prev := map[string]store.Height{}
	for _, n := range []string{"TC-0100", "TC-0250"} {
		prev[n] = fx.Height(t, registertest.HeightOpts{Designation: n, Value: "12.000", Source: "Tallis County sheet 4 (invented)"})
	}
	tx, err := fx.DB.Pool.Begin(fx.Ctx)
	if err != nil {
		t.Fatal(err)
	}
	defer tx.Rollback(fx.Ctx)
	id, err := store.AdjustmentInsert(fx.Ctx, tx, store.AdjustmentInsertParams{Method: "least-squares", DatumID: d.ID, CreatedBy: "test"})
	if err != nil {
		t.Fatal(err)
	}
	var results []store.AdjustmentResult
	for i, n := range names {
		v, u, dec := fmt.Sprintf("%d.%03d", 10+i, 7*i), "m", 3
		r := store.AdjustmentResult{MarkID: marks[n].ID, Designation: n, Seq: i + 1, AdjustedM: 10, Value: &v, Unit: &u, Decimals: &dec, Class: "second-I"}
		if p, ok := prev[n]; ok {
			r.Replaces = &p.ID
		}
		results = append(results, r)
	}
	if _, err := store.AdjustmentResultCopy(fx.Ctx, tx, store.AdjustmentResultCopyParams{AdjustmentID: id, Results: results}); err != nil {
		t.Fatal(err)
	}
	if err := store.AdjustmentEventInsert(fx.Ctx, tx, store.AdjustmentEventInsertParams{AdjustmentID: id, Status: store.StatusPublished,
		Reason: "a test", RecordedBy: "test"}); err != nil {
		t.Fatal(err)
	}
	got, err := store.HeightInsertMany(fx.Ctx, tx, store.HeightInsertManyParams{DatumID: d.ID, DatumCode: d.Code, AdjustmentID: id,
		Source: fmt.Sprintf("adjustment %d (least-squares, 1 run)", id), Reason: "a test", RecordedBy: "test", Results: results})
	if err != nil {
		t.Fatal(err)
	}
	ids := make([]int64, len(got))
	for i, h := range got {
		ids[i] = h.ID
	}
	want, err := store.HeightListByIDs(fx.Ctx, tx, ids)
	if err != nil {
		t.Fatal(err)
	}
	if len(got) != len(names) || len(want) != len(names) {
		t.Fatalf("%d versions returned, %d read, want %d", len(got), len(want), len(names))
	}
	for i := range want {
		if g, w := utcHeight(got[i]), utcHeight(want[i]); !reflect.DeepEqual(g, w) {
			t.Errorf("version %d as returned:\n%+v\nas read:\n%+v", i, g, w)
		}
	}
	for i, n := range []string{"TC-0100", "TC-0200", "TC-0250", "TC-0300"} {
		if got[i].Designation != n {
			t.Errorf("version %d is of %s, want %s (by designation)", i, got[i].Designation, n)
		}
	}
	if got[0].Version != 2 || got[0].Supersedes == nil || *got[0].Supersedes != prev["TC-0100"].ID || got[1].Version != 1 || got[1].Supersedes != nil {
		t.Errorf("chains: TC-0100 version %d superseding %v, TC-0200 version %d superseding %v", got[0].Version, got[0].Supersedes, got[1].Version, got[1].Supersedes)
	}
	// A result without its designation is refused before anything is
	// written.
	results[0].Designation = ""
	if _, err := store.HeightInsertMany(fx.Ctx, tx, store.HeightInsertManyParams{DatumID: d.ID, DatumCode: d.Code, AdjustmentID: id,
		Source: "x", Reason: "a test", RecordedBy: "test", Results: results[:1]}); err == nil {
		t.Error("a result without a designation: no error")
	}
}

// utcHeight is h with its times in UTC, to compare.
func utcHeight(h store.Height) store.Height {
	h.RecordedAt, h.CommittedAt, h.InForceFrom = h.RecordedAt.UTC(), h.CommittedAt.UTC(), h.InForceFrom.UTC()
	if h.InForceGiven != nil {
		at := h.InForceGiven.UTC()
		h.InForceGiven = &at
	}
	return h
}
