package register

import (
	"context"
	"testing"

	"cairn/internal/booktest"
	"cairn/internal/pgtest"
)

// largeLoop records a generated loop of 20 000 setups with a mark every 10
// (2 000 marks) and holds its first mark, TC-1001, at an outside height.
func largeLoop(b *testing.B) (*Register, int64) {
	b.Helper()
	ctx := context.Background()
	db := pgtest.New(b)
	r := New(db.Pool)
	if _, err := r.DatumAdd(ctx, DatumAddParams{Code: "NAVD88", Name: "North American Vertical Datum of 1988", By: "test"}); err != nil {
		b.Fatal(err)
	}
	loop := booktest.Loop{Setups: 20000, MarkEvery: 10, Seed: 1}
	rec, err := r.Record(ctx, RecordParams{Path: "large.csv", Book: loop.Book(), By: "bench", NewMarks: true})
	if err != nil {
		b.Fatal(err)
	}
	if _, err := r.HeightSet(ctx, HeightSetParams{Designation: "TC-1001", Datum: "NAVD88", Value: "100.000", Unit: "m",
		Source: "invented", Reason: "bench", RecordedBy: "bench"}); err != nil {
		b.Fatal(err)
	}
	return r, rec.Run.ID
}

func adjustPublish(b *testing.B, r *Register, run int64) {
	b.Helper()
	ctx := context.Background()
	v, err := r.Adjust(ctx, AdjustParams{RunIDs: []int64{run}, Hold: HoldFixed("TC-1001"), By: "bench"})
	if err != nil {
		b.Fatal(err)
	}
	if _, err := r.Publish(ctx, PublishParams{AdjustmentID: v.Adjustment.ID, Reason: "bench", By: "bench"}); err != nil {
		b.Fatal(err)
	}
}

// BenchmarkAdjustPublish: a draft of 2 000 marks stored, then published as
// 1 999 new versions, each superseding the last.
func BenchmarkAdjustPublish(b *testing.B) {
	r, run := largeLoop(b)
	for b.Loop() {
		adjustPublish(b, r, run)
	}
}

// BenchmarkStale: all 1 999 heights of the loop stale after the held mark
// is republished.
func BenchmarkStale(b *testing.B) {
	r, run := largeLoop(b)
	adjustPublish(b, r, run)
	if _, err := r.HeightSet(context.Background(), HeightSetParams{Designation: "TC-1001", Datum: "NAVD88", Value: "100.010",
		Unit: "m", Source: "invented", Reason: "bench", RecordedBy: "bench"}); err != nil {
		b.Fatal(err)
	}
	for b.Loop() {
		s, err := r.Stale(context.Background())
		if err != nil || len(s) != 1999 {
			b.Fatalf("%d stale, %v", len(s), err)
		}
	}
}

// BenchmarkTrace: the trace of one height of the loop.
func BenchmarkTrace(b *testing.B) {
	r, run := largeLoop(b)
	adjustPublish(b, r, run)
	for b.Loop() {
		if _, err := r.Trace(context.Background(), TraceParams{Designation: "TC-2000"}); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkAdjust: the draft alone.
func BenchmarkAdjust(b *testing.B) {
	r, run := largeLoop(b)
	for b.Loop() {
		if _, err := r.Adjust(context.Background(), AdjustParams{RunIDs: []int64{run}, Hold: HoldFixed("TC-1001"), By: "bench"}); err != nil {
			b.Fatal(err)
		}
	}
}
