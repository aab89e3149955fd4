package register_test

import (
	"context"
	"testing"

	"cairn/internal/booktest"
	. "cairn/internal/register"
	"cairn/internal/registertest"
)

// largeLoop records a generated loop of 20 000 setups with a mark every 10
// (2 000 marks) and holds its first mark, TC-1001, at an outside height.
func largeLoop(b *testing.B) (*registertest.Bundle, int64) {
	b.Helper()
	fx := registertest.Setup(b)
	fx.Datum(b, registertest.DatumOpts{})
	loop := booktest.Loop{Setups: 20000, MarkEvery: 10, Seed: 1}
	rec := fx.Run(b, registertest.RunOpts{Path: "large.csv", Book: loop.Book(), By: "bench", NewMarks: true})
	fx.Height(b, registertest.HeightOpts{Designation: "TC-1001", Value: "100.000", Unit: "m", Source: "invented", Reason: "bench", By: "bench"})
	return fx, rec.Run.ID
}

func adjustPublish(b *testing.B, fx *registertest.Bundle, run int64) {
	b.Helper()
	v := fx.Adjustment(b, registertest.AdjustmentOpts{Runs: []int64{run}, Hold: []string{"TC-1001"}, By: "bench"})
	fx.Publication(b, v.Adjustment.ID, registertest.PublicationOpts{Reason: "bench", By: "bench"})
}

// BenchmarkAdjustPublish: a draft of 2 000 marks stored, then published as
// 1 999 new versions, each superseding the last.
func BenchmarkAdjustPublish(b *testing.B) {
	fx, run := largeLoop(b)
	for b.Loop() {
		adjustPublish(b, fx, run)
	}
}

// BenchmarkStale: all 1 999 heights of the loop stale after the held mark
// is republished.
func BenchmarkStale(b *testing.B) {
	fx, run := largeLoop(b)
	adjustPublish(b, fx, run)
	fx.Height(b, registertest.HeightOpts{Designation: "TC-1001", Value: "100.010", Unit: "m", Source: "invented", Reason: "bench", By: "bench"})
	for b.Loop() {
		s, err := fx.Reg.Stale(context.Background(), StaleParams{})
		if err != nil || len(s.Heights) != 1999 {
			b.Fatalf("%d stale, %v", len(s.Heights), err)
		}
	}
}

// BenchmarkTrace: the trace of one height of the loop.
func BenchmarkTrace(b *testing.B) {
	fx, run := largeLoop(b)
	adjustPublish(b, fx, run)
	for b.Loop() {
		if _, err := fx.Reg.Trace(context.Background(), TraceParams{Designation: "TC-2000"}); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkAdjust: the draft alone.
func BenchmarkAdjust(b *testing.B) {
	fx, run := largeLoop(b)
	for b.Loop() {
		fx.Adjustment(b, registertest.AdjustmentOpts{Runs: []int64{run}, Hold: []string{"TC-1001"}, By: "bench"})
	}
}

// BenchmarkPublish20k: a loop of 20 001 marks (one at every setup), held
// at TC-1001, adjusted once per iteration (not timed) and published as
// 20 000 new versions (timed).
func BenchmarkPublish20k(b *testing.B) {
	fx := registertest.Setup(b)
	fx.Datum(b, registertest.DatumOpts{})
	loop := booktest.Loop{Setups: 20001, MarkEvery: 1, Seed: 1}
	rec := fx.Run(b, registertest.RunOpts{Path: "large.csv", Book: loop.Book(), By: "bench", NewMarks: true})
	fx.Height(b, registertest.HeightOpts{Designation: "TC-1001", Value: "100.000", Unit: "m", Source: "invented", Reason: "bench", By: "bench"})
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		b.StopTimer()
		v := fx.Adjustment(b, registertest.AdjustmentOpts{Runs: []int64{rec.Run.ID}, Hold: []string{"TC-1001"}, By: "bench"})
		b.StartTimer()
		pub := fx.Publication(b, v.Adjustment.ID, registertest.PublicationOpts{Reason: "bench", By: "bench"})
		if len(pub.Versions) != 20000 {
			b.Fatalf("%d versions published, want 20000", len(pub.Versions))
		}
	}
}
